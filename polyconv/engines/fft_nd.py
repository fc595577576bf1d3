"""Float products over several axes at once: a pruned row-column FFT, overlap-add along one
axis, and direct shift-and-add.

Arrays have their batch axes first and the ``d`` convolution axes last.  The transform is the
row-column algorithm (the multidimensional DFT is the 1-D DFT along each axis in turn; e.g.
Oppenheim & Schafer, *Discrete-Time Signal Processing*, section 8.7, and Dudgeon & Mersereau,
*Multidimensional Digital Signal Processing*, section 2.2), through the project's one FFT module
(:mod:`polyconv.numerics.transforms`): a real transform along the last axis, complex transforms
along the others, in place.  Pruning (common practice, no source): the forward passes skip the
rows that are still all zeros (an operand occupies only ``n_k`` of the ``N_k`` entries along each
axis not yet transformed), and the inverse passes, outermost first, keep only the rows the mode
returns before the next pass.  For ``N_k >= n1_k + n2_k - 1`` along every axis the circular
product is the linear one (the circular convolution theorem in each axis); for mode "valid"
along an axis ``N_k >= max(n1_k, n2_k)`` suffices (the wrap-around lands in entries that mode
drops).

Engines never validate: the caller (:mod:`polyconv.pipeline.nd`) has checked shapes, dtypes and
the memory budget.
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics import transforms as tf
from ._common import spectral_product


def _leading(arr: np.ndarray, d: int, limits) -> np.ndarray:
    """``arr[..., :l_1, ..., :l_d]`` over the last ``d`` axes (``None``: the whole axis)."""
    idx = tuple(slice(None) if lim is None else slice(0, lim) for lim in limits)
    return arr[(Ellipsis,) + idx] if len(idx) == d else arr


def _along(ndim: int, axis: int, sl: slice) -> tuple:
    """An index applying ``sl`` along ``axis`` of an ``ndim``-D array."""
    return (slice(None),) * axis + (sl,)


def spectrum_nd(x: np.ndarray, shape: tuple, threads: int = 1) -> np.ndarray:
    """The zero-padded DFT of ``x`` over its last ``len(shape)`` axes at transform ``shape``.

    Real ``x`` gives the half spectrum along the last axis (``N_d // 2 + 1`` bins), complex
    ``x`` the full one.  Pruned forward passes (module notes).
    """
    d = len(shape)
    ext = x.shape[-d:]
    real = x.dtype.kind != "c"
    cdtype = np.result_type(x.dtype, np.complex64)
    last = shape[-1] // 2 + 1 if real else shape[-1]
    out = np.zeros(x.shape[:-d] + tuple(shape[:-1]) + (last,), dtype=cdtype)
    rows = _leading(out, d, tuple(ext[:-1]) + (None,))
    if real:
        tf.rfft_into(tf.zero_padded(x, shape[-1]), rows, threads)
    else:
        rows[..., : ext[-1]] = x
        tf.fft_inplace(rows, out.ndim - 1, True, threads)
    for k in range(d - 2, -1, -1):  # axis k: the axes before it are still zero beyond n
        view = _leading(out, d, tuple(ext[:k]) + (None,) * (d - k))
        tf.fft_inplace(view, out.ndim - d + k, True, threads)
    return out


def inverse_nd(spec: np.ndarray, shape: tuple, windows: tuple, threads: int = 1,
               real: bool = True) -> np.ndarray:
    """The inverse of :func:`spectrum_nd` (``spec`` is overwritten), cut to ``windows``
    (``(start, stop)`` per axis) pass by pass."""
    d = len(shape)
    view = spec
    for k in range(d - 1):
        axis = spec.ndim - d + k
        tf.fft_inplace(view, axis, False, threads)
        view = view[_along(spec.ndim, axis, slice(*windows[k]))]
    start, stop = windows[-1]
    if real:
        return tf.irfft(view, shape[-1], -1, threads)[..., start:stop]
    return tf.ifft(view, -1, threads)[..., start:stop]


def convolve_fftn(a: np.ndarray, b: np.ndarray, shape: tuple, windows: tuple,
                  threads: int = 1) -> np.ndarray:
    """The product of ``a`` and ``b`` over their last ``len(shape)`` axes, cut to ``windows``.

    Parameters
    ----------
    a, b : numpy.ndarray
        Float or complex arrays of one precision; batch axes broadcast.
    shape : tuple of int
        Transform lengths, one per convolution axis (module notes say how long is enough).
    windows : tuple of (int, int)
        The entries of the full product each axis keeps.
    threads : int
        Threads each transform may use.
    """
    real = a.dtype.kind != "c" and b.dtype.kind != "c"
    fa = spectrum_nd(a, shape, threads)
    fb = spectrum_nd(b, shape, threads)
    product = spectral_product(fa, fb)
    del fa, fb
    return inverse_nd(product, shape, windows, threads, real)


#: Bytes of block spectra an overlap-add group holds at once (blocks are transformed together
#: as a batch, in groups of about this size: few calls, bounded memory).
GROUP_BYTES = 2**23


def convolve_overlap_add_nd(x: np.ndarray, k: np.ndarray, shape: tuple, block: int, axis: int,
                            windows: tuple, threads: int = 1) -> np.ndarray:
    """Overlap-add along convolution axis ``axis`` (counted among the last ``d``): ``x`` is cut
    into blocks of ``block`` entries along it, each block's product with ``k`` is a transform of
    ``shape`` (``shape[axis] >= block + m - 1``), and the block products are added at their
    offsets (Oppenheim & Schafer, section 8.7.3; ``block >= m - 1``, so each output gathers at
    most two blocks).  The kernel's spectrum is computed once; blocks are transformed as a
    batch, a group at a time (:data:`GROUP_BYTES`).  Result cut to ``windows``.
    """
    d = len(shape)
    real = x.dtype.kind != "c" and k.dtype.kind != "c"
    m = k.shape[k.ndim - d + axis]
    n = x.shape[x.ndim - d + axis]
    count = -(-n // block)
    lead = x.ndim - d
    # blocks as a new batch axis just before the convolution axes: x[..., q, ..., j, ...]
    padded_shape = list(x.shape)
    padded_shape[lead + axis] = count * block
    xp = np.zeros(padded_shape, dtype=x.dtype)
    xp[_along(x.ndim, lead + axis, slice(0, n))] = x
    split = x.shape[:lead + axis] + (count, block) + x.shape[lead + axis + 1:]
    blocks = np.moveaxis(xp.reshape(split), lead + axis, lead)
    del xp
    fk = spectrum_nd(k, shape, threads)[(Ellipsis, np.newaxis) + (slice(None),) * d]
    batch = np.broadcast_shapes(x.shape[:-d], k.shape[:-d])
    sizes = [stop - start for start, stop in windows]
    sizes[axis] = (count + 1) * block
    out = np.zeros(batch + tuple(sizes), dtype=np.result_type(x.dtype, k.dtype))
    ax = len(batch) + axis
    cut = list(windows)
    cut[axis] = (0, block + m - 1)
    per_block = 16 * math.prod(shape) * max(1, math.prod(batch))
    group = max(1, GROUP_BYTES // per_block)
    for g0 in range(0, count, group):
        g1 = min(count, g0 + group)
        group_blocks = blocks[(Ellipsis, slice(g0, g1)) + (slice(None),) * d]
        spec = spectral_product(spectrum_nd(group_blocks, shape, threads), fk)
        part = inverse_nd(spec, shape, tuple(cut), threads, real)  # batch + (q,) + sizes
        part = np.moveaxis(part, len(batch), ax)  # q just before the block axis
        head = out[_along(out.ndim, ax, slice(g0 * block, g1 * block))]
        shape_q = head.shape[:ax] + (g1 - g0, block) + head.shape[ax + 1:]
        head.reshape(shape_q)[...] += part[_along(part.ndim, ax + 1, slice(0, block))]
        if m > 1:
            tail = out[_along(out.ndim, ax, slice((g0 + 1) * block, (g1 + 1) * block))]
            tail.reshape(shape_q)[_along(part.ndim, ax + 1, slice(0, m - 1))] += \
                part[_along(part.ndim, ax + 1, slice(block, block + m - 1))]
    return out[_along(out.ndim, ax, slice(*windows[axis]))]


def convolve_direct_nd(a: np.ndarray, b: np.ndarray, windows: tuple) -> np.ndarray:
    """Direct summation over the last ``len(windows)`` axes, cut to ``windows``.

    ``c[k] = sum_j a[k - j] b[j]`` by shift-and-add: each entry of the operand with fewer
    entries scales and adds the other once (one pass per entry), so NaN and inf propagate as
    they do in a direct sum (numpy.convolve's behaviour, per axis).
    """
    d = len(windows)
    if math.prod(b.shape[-d:]) > math.prod(a.shape[-d:]):
        a, b = b, a
    ext_a, ext_b = a.shape[-d:], b.shape[-d:]
    batch = np.broadcast_shapes(a.shape[:-d], b.shape[:-d])
    full = tuple(n1 + n2 - 1 for n1, n2 in zip(ext_a, ext_b, strict=True))
    out = np.zeros(batch + full, dtype=np.result_type(a.dtype, b.dtype))
    spread = (np.newaxis,) * d
    scaled = np.empty(batch + tuple(ext_a), dtype=out.dtype)  # one buffer for every pass
    for idx in np.ndindex(*ext_b):
        target = (Ellipsis,) + tuple(slice(j, j + n) for j, n in zip(idx, ext_a, strict=True))
        np.multiply(a, b[(Ellipsis,) + idx + spread], out=scaled)
        window = out[target]
        np.add(window, scaled, out=window)
    return out[(Ellipsis,) + tuple(slice(start, stop) for start, stop in windows)]


def mapped_spectrum_2d(f: np.ndarray, shape: tuple, keep: tuple, pointwise,
                       column_block: int = 32, row_block: int = 4096,
                       threads: int = 1) -> np.ndarray:
    """``IFFT2(pointwise(FFT2(f)))`` on transform ``shape = (M1, M2)``, cut to ``keep = (n1,
    n2)``, with memory about ``n1 x M2 / 2`` complex instead of ``M1 x M2``.

    The same pruned row-column transform as :func:`spectrum_nd` / :func:`inverse_nd`, done a
    block of ``column_block`` frequency columns at a time: the real transform along the short
    axis of ``f`` (its rows only), then per column block the complex transform along the long
    axis, ``pointwise(block, first, stop)`` (which returns the mapped block, e.g. a generating
    function of the spectrum, and may record sums over it), the inverse along the long axis
    keeping ``n1`` rows; finally the inverse real transform, ``row_block`` rows at a time.
    """
    m1, m2 = shape
    n1, n2 = keep
    half = m2 // 2 + 1
    cols = np.empty((half, f.shape[0]), dtype=complex)  # half x rows: blocks of rows, each
    rows = 4 * row_block                                  # transposed, transformed along axis 0
    for r0 in range(0, f.shape[0], rows):
        cols[:, r0:r0 + rows] = tf.rfft(np.pad(f[r0:r0 + rows].T, ((0, m2 - f.shape[1]), (0, 0))),
                                        0, threads)
    spec = np.empty((half, n1), dtype=complex)
    for c0 in range(0, half, column_block):
        c1 = min(half, c0 + column_block)
        buf = np.zeros((c1 - c0, m1), dtype=complex)  # contiguous along the long axis
        buf[:, : cols.shape[1]] = cols[c0:c1]
        tf.fft_inplace(buf, 1, True, threads)
        mapped = np.ascontiguousarray(pointwise(buf, c0, c1), dtype=complex)
        del buf
        tf.fft_inplace(mapped, 1, False, threads)
        spec[c0:c1] = mapped[:, :n1]
        del mapped
    del cols
    out = np.empty((n1, n2))
    for r0 in range(0, n1, row_block):
        r1 = min(n1, r0 + row_block)
        out[r0:r1] = tf.irfft(np.ascontiguousarray(spec[:, r0:r1].T), m2, -1, threads)[:, :n2]
    return out
