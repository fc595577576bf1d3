"""Overlap-add convolution of a long sequence with a short kernel.

The long operand ``x`` (length ``n``) is cut into blocks of length ``L``; each block is convolved
with the kernel ``k`` (length ``m``) by FFTs of length ``N = L + m - 1``, and the block results,
each ``m - 1`` entries longer than its block, are added where they overlap (Oppenheim & Schafer,
*Discrete-Time Signal Processing*, section 8.7.3; Stockham 1966, "High-speed convolution and
correlation", AFIPS).  Cost ~ ``(n / L) N log N`` instead of ``(n + m) log(n + m)`` for one long
transform: fewer operations per output when ``m << n``, and blocks that stay in cache.

All blocks go through one batched transform call.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from ..numerics import transforms as tf
from ._common import FLOAT_KINDS, LARGE_ARRAY, Engine, Job, Option, fft_rate, spectral_product

#: points per group of blocks transformed together: small enough that a group's input, spectrum
#: and output stay in the CPU cache (measured: groups of 2**14-2**16 points beat one call over
#: all blocks by 1.5-2x at n = 2**22), large enough that the Python loop over groups costs little.
GROUP_POINTS = 2**15
#: fewest blocks per fused call (:func:`polyconv.numerics.transforms.circular_product`
#: transforms the kernel once per call)
FUSED_BLOCKS = 8


def convolve_overlap_add(x: np.ndarray, k: np.ndarray, n_fft: int, threads: int = 1,
                         group_points: int = GROUP_POINTS, fused: bool = True):
    """Full convolution of a long ``x`` with a short kernel ``k`` along the last axis.

    Parameters
    ----------
    x, k : numpy.ndarray
        Float or complex arrays, convolution axis last, leading axes broadcast.  ``x`` is the long
        operand (length ``n``), ``k`` the kernel (length ``m``).
    n_fft : int
        Block transform length; the block length is ``L = n_fft - m + 1``.  The caller guarantees
        ``L >= m - 1`` so that a block's tail overlaps only the next block.
    threads : int
        Threads pocketfft may use for the batched block transforms.
    group_points : int
        About how many points (blocks x ``n_fft`` x batch) to transform per call.
    fused : bool
        With a 1-D kernel, let the library's fused circular product
        (:func:`polyconv.numerics.transforms.circular_product`) do each group of blocks (at
        least :data:`FUSED_BLOCKS` per call); False: separate transform calls.

    Returns
    -------
    numpy.ndarray
        Shape ``batch + (n + m - 1,)``.
    """
    n, m = x.shape[-1], k.shape[-1]
    block = n_fft - m + 1
    n_blocks = -(-n // block)
    dtype = np.result_type(x, k)
    lead_x = x.shape[:-1]
    batch = np.broadcast_shapes(lead_x, k.shape[:-1])
    rows = 1
    for s in lead_x:
        rows *= s
    per_group = max(1, min(n_blocks, group_points // (n_fft * max(rows, 1))))

    kernel = tf.zero_padded(k, n_fft, dtype)
    if fused and tf.FUSED and k.ndim == 1:  # at least FUSED_BLOCKS per call: the kernel's
        per_group = max(per_group, min(n_blocks, FUSED_BLOCKS))  # transform is repeated in each
        return _fused_blocks(x, kernel, n, m, block, n_blocks, per_group, batch, threads)
    with np.errstate(invalid="ignore", over="ignore"):  # NaN/inf: the caller's policy decides
        return _separate_blocks(x, kernel, n, m, block, n_blocks, per_group, batch, threads)


def _separate_blocks(x, kernel, n, m, block, n_blocks, per_group, batch, threads):
    """Overlap-add by batched forward transforms, spectral products and inverses."""
    n_fft, dtype = kernel.shape[-1], kernel.dtype
    complex_data = dtype.kind == "c"
    if complex_data:
        kernel_spectrum = tf.fft(kernel, -1, 1)[..., None, :]
    else:
        kernel_spectrum = tf.rfft(kernel, -1, 1)[..., None, :]
    out = np.zeros(batch + ((n_blocks + 1) * block,), dtype=dtype)
    buf = np.zeros(x.shape[:-1] + (per_group, n_fft), dtype=dtype)
    for first in range(0, n_blocks, per_group):
        count = min(per_group, n_blocks - first)
        _load_blocks(buf, x, first, count, block)
        if complex_data:
            spectra = spectral_product(tf.fft(buf[..., :count, :], -1, threads), kernel_spectrum)
            pieces = tf.ifft(spectra, -1, threads)
        else:
            spectra = spectral_product(tf.rfft(buf[..., :count, :], -1, threads), kernel_spectrum)
            pieces = tf.irfft(spectra, n_fft, -1, threads)
        _add_pieces(out, pieces, first, count, block, m, batch)
    return out[..., : n + m - 1]


def _fused_blocks(x, kernel, n, m, block, n_blocks, per_group, batch, threads):
    """Overlap-add with the library's fused circular product per group of blocks (the kernel's
    spectrum is recomputed per group inside that call; no spectrum arrays in Python)."""
    n_fft = kernel.shape[-1]
    out = np.zeros(batch + ((n_blocks + 1) * block,), dtype=kernel.dtype)
    key = (x.shape[:-1] + (per_group, n_fft), kernel.dtype, block)
    buf, pieces = _work_arrays(key)
    for first in range(0, n_blocks, per_group):
        count = min(per_group, n_blocks - first)
        _load_blocks(buf, x, first, count, block)
        done = tf.circular_product(buf[..., :count, :], kernel, threads, pieces[..., :count, :])
        _add_pieces(out, done, first, count, block, m, batch)
    if buf.size <= KEEP_POINTS:
        _kept.arrays = (key, buf, pieces)
    return out[..., : n + m - 1]


#: Largest block buffer (points) whose pair of work arrays is kept between products (per
#: thread; 4 MiB each at most, complex).  Fresh arrays of this size come from new pages on many
#: calls: measured 1.5 ms instead of 0.6 ms for 65536 x 4096 (blocks of 16384), depending on
#: what the allocator held before (bench/RESULTS.md, float3 section).
KEEP_POINTS = 2**18
_kept = threading.local()


def _work_arrays(key: tuple) -> tuple[np.ndarray, np.ndarray]:
    """The block buffer (zeros after each block's ``block`` leading entries, which every group
    overwrites) and the output buffer for ``key = (shape, dtype, block)``: this thread's kept
    pair (taken out of its slot while in use) or new arrays."""
    held = getattr(_kept, "arrays", None)
    _kept.arrays = None
    if held is not None and held[0] == key:
        return held[1], held[2]
    buf = np.zeros(key[0], dtype=key[1])
    return buf, np.empty_like(buf)


def _add_pieces(out, pieces, first, count, block, m, batch) -> None:
    """Add ``count`` block products (``block + m - 1`` entries each) into ``out``."""
    start = first * block
    heads = out[..., start: start + count * block]
    heads += pieces[..., :block].reshape(batch + (count * block,))
    if m > 1:
        tails = out[..., start + block: start + (count + 1) * block]
        tails = tails.reshape(batch + (count, block))
        tails[..., : m - 1] += pieces[..., block:]


def _load_blocks(buf: np.ndarray, x: np.ndarray, first: int, count: int, block: int) -> None:
    """Copy blocks ``first .. first + count - 1`` of ``x`` into the leading part of each row."""
    n = x.shape[-1]
    start = first * block
    whole = min(count, (n - start) // block)
    lead = x.shape[:-1]
    if whole:
        buf[..., :whole, :block] = x[..., start: start + whole * block].reshape(
            lead + (whole, block))
    if whole < count:  # the last, partial block
        rest = n - (start + whole * block)
        buf[..., whole, :rest] = x[..., start + whole * block:]
        buf[..., whole, rest:block] = 0


# ----------------------------------------------------------------------------- registry record
#
# Cost: ``t = c0 + r(N) N lg N (2 q B + 1) / 3 + c_pt q N B (+ c_big n B)`` for ``q`` blocks of
# transform length ``N``; the block length minimising ``t`` is chosen; one thread (each group of
# blocks is too small to split).


def predict_overlap_add(costs: dict, n: int, m: int, n_fft: int, batch: int, complex_factor: float,
                        threads: int, fused: bool = False) -> float:
    """Seconds for overlap-add with block transforms of length ``n_fft`` (``fused``: by the
    fused circular product, at its own constants ``fused_*`` when the table has them)."""
    c = costs["overlap_add"]
    pre = "fused_" if fused and "fused_per_point" in c else ""
    block = n_fft - m + 1
    blocks = -(-n // block)
    transforms = (2 * blocks * batch + 1) / 3 * complex_factor
    big = c[pre + "per_sample_large"] * n * batch if n * batch >= LARGE_ARRAY else 0.0
    return (c[pre + "overhead"] + fft_rate(costs, n_fft, fused) * n_fft * math.log2(n_fft)
            * transforms + c[pre + "per_point"] * blocks * n_fft * batch + big)


def best_overlap_add(costs: dict, n: int, m: int, batch: int, complex_factor: float,
                     threads: int, fused: bool = False) -> tuple[float, int] | None:
    """Cheapest overlap-add transform length for a long ``n`` and a kernel ``m``, or None.

    Candidates are fast lengths from about ``2m`` up to below the one-shot transform length; a
    block must be at least ``m - 1`` long so that its tail overlaps only the next block.
    """
    full = tf.fast_length(n + m - 1)
    best = None
    size = tf.fast_length(max(2 * m, 16))
    while size < full:
        if size - m + 1 >= max(m - 1, 1):
            t = predict_overlap_add(costs, n, m, size, batch, complex_factor, threads, fused)
            if best is None or t < best[0]:
                best = (t, size)
        size = tf.fast_length(size * 2)
    return best




REFUSAL = "overlap-add needs mode 'full' or 'same' and a kernel shorter than half the long operand"


def option(job: Job) -> Option | str:
    """The overlap-add offer at its best block length, or why it cannot run."""
    if job.mode == "valid" or min(job.n1, job.n2) <= 1:
        return REFUSAL
    n_long, n_short = max(job.n1, job.n2), min(job.n1, job.n2)
    long_batch, kernel_batch = ((job.batch_a, job.batch_b) if job.n1 >= job.n2
                                else (job.batch_b, job.batch_a))
    rows_long = math.prod(long_batch) if long_batch else 1
    best = best_overlap_add(job.costs, n_long, n_short, max(rows_long, 1),
                            2.0 if job.kind == "complex" else 1.0, job.threads,
                            tf.FUSED and not kernel_batch)
    if best is None:
        return REFUSAL
    seconds, n_fft = best
    return Option(seconds,
                  settings={"transform_length": n_fft, "block_length": n_fft - n_short + 1})


def run_planned(plan, x: np.ndarray, y: np.ndarray, keep: int | None) -> np.ndarray:
    """The full product, the longer operand cut into blocks."""
    if x.shape[-1] < y.shape[-1]:
        x, y = y, x
    return convolve_overlap_add(x, y, plan.transform_length, plan.threads)


ENGINE = Engine("overlap-add", FLOAT_KINDS, option, run_planned)
