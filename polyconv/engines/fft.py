"""Float FFT convolution with zero padding.

The circular convolution theorem ``DFT(a (*) b) = DFT(a) . DFT(b)`` gives the full linear
convolution when both operands are zero padded to a length ``N >= n1 + n2 - 1`` (common practice, no
source; see any signal-processing text, e.g. Oppenheim & Schafer, *Discrete-Time Signal
Processing*, section 8.7).  Real data go through real-input transforms, which do about half the
work of complex ones.  Transforms come from :mod:`polyconv.numerics.transforms` (pocketfft).
"""

from __future__ import annotations

import math
import threading

import numpy as np

from ..numerics import negacyclic as ng
from ..numerics import transforms as tf
from ..numerics.tables import value_at_size
from . import jit_state
from ._common import FLOAT_KINDS, Engine, Job, Option, fft_rate, spectral_product
from ._threads import helper_thread

#: Up to this length both 1-D operands go through one batched transform call (saves a call's
#: overhead); beyond it the stacked array no longer fits in cache and separate calls are faster
#: (measured: 1.25x slower stacked at 2^17 points on one thread).
STACK_LIMIT = 2**15


_passes: list = []  # [module or None] once decided in this process


def negacyclic_kernels():
    """The compiled passes of the negacyclic product (:mod:`._kernels_negacyclic`) when the
    kernels are already loaded in this process (never loads them) and they gave the numpy
    passes' bits on a self-check (unsplit and split, folded and not, zeros, signs, 2^-600 ..
    2^600 scales; checked once), else None: the numpy passes run, with the same bits."""
    if _passes:
        return _passes[0]
    if jit_state.state() != "compiled":
        return None
    kernels = jit_state.kernels("_kernels_negacyclic")
    rng = np.random.default_rng(12)
    good = True
    for m, rows, n1, n2, keep in ((64, 1, 40, 25, 64), (64, 1, 100, 20, 119), (64, 1, 9, 9, 17),
                                  (64, 4, 40, 25, 64), (64, 4, 100, 20, 119), (48, 1, 60, 30, 89),
                                  (64, 8, 33, 7, 39)):
        t = ng.Tables(m, rows)
        x = rng.standard_normal(n1) * 2.0 ** rng.integers(-600, 600, n1)
        y = rng.standard_normal(n2) * (rng.random(n2) < 0.8)
        with np.errstate(all="ignore"):
            want = ng._real_product(x, y, t, keep)
            got = ng._real_product(x, y, t, keep, kernels)
        good &= want.tobytes() == got.tobytes()
    _passes.append(kernels if good else None)
    return _passes[0]


def _padded_spectrum(x: np.ndarray, n_fft: int, dtype) -> np.ndarray:
    return tf.rfft(tf.zero_padded(x, n_fft, dtype), -1, 1)


def convolve_fft(a: np.ndarray, b: np.ndarray, n_fft: int, keep: int, threads: int = 1,
                 fused: bool = True, negacyclic: bool = True):
    """First ``keep`` entries of the length-``n_fft`` circular convolution along the last axis.

    Parameters
    ----------
    a, b : numpy.ndarray
        Float or complex arrays of one precision, convolution axis last, leading axes broadcast.
    n_fft : int
        Transform length.  The caller guarantees ``n_fft >= n1 + n2 - 1`` whenever it needs the
        linear convolution (for mode "valid" ``n_fft >= max(n1, n2)`` suffices: wrap-around only
        touches entries that mode drops).
    keep : int
        How many leading entries of the result to return (``keep <= n_fft``).
    threads : int
        Threads allowed.  With two or more, two 1-D forward transforms run concurrently and
        batched transforms are split by the library.
    fused : bool
        Allow the fused circular product (Notes); False: separate transform calls always.
    negacyclic : bool
        With ``fused``, allow the negacyclic real product (Notes); the calibration measures all
        three routes.

    Returns
    -------
    numpy.ndarray
        Shape ``batch + (keep,)``, dtype of the real or complex result.

    Notes
    -----
    When one operand is 1-D (and the other is 1-D on one thread, or a batch) and the library
    has a fused circular product (:func:`polyconv.numerics.transforms.circular_product`), the
    rows are zero padded once and transformed, multiplied by the kernel's spectrum and
    transformed back in that one call: the same FFT plan and the same pointwise products, with
    no spectrum arrays and no Python in between (measured 0.45-0.95x the time of separate
    rfft/multiply/irfft calls, padding included, at ``N = 2^7 .. 2^23`` on one thread).
    Two real float64 1-D operands on one thread at ``N = 2^13 .. 2^21`` (even) go instead
    through :func:`polyconv.numerics.negacyclic.real_product`: the same product as one complex
    negacyclic product of length ``N / 2`` (three complex transforms, no real-FFT
    post-processing), under the same error bound, measured 0.7-0.85x the fused call's time.
    """
    dtype = a.dtype if a.dtype == b.dtype else np.result_type(a, b)
    if dtype.kind not in "fc":  # integers: transformed as float64 (as the library would)
        dtype = np.dtype(np.float64)
    if (fused and negacyclic and a.ndim == 1 and b.ndim == 1 and threads == 1
            and dtype == np.float64 and ng.ready(n_fft)):
        return ng.real_product(a, b, n_fft, keep, negacyclic_kernels())  # (see the Notes)
    if fused and takes_fused(a.ndim == 1, b.ndim == 1, threads):
        if a.ndim == 1 and b.ndim == 1:  # the common case, without the batch bookkeeping
            out = np.zeros(n_fft, dtype)
            out[: a.shape[0]] = a
            kernel = borrow_kernel(b, n_fft, dtype)
            tf.circular_product(out, kernel, threads)
            return_kernel(kernel, b.shape[0])
            return out[:keep]
        rows, kernel = (a, b) if b.ndim == 1 else (b, a)
        out = tf.zero_padded(rows, n_fft, dtype)
        tf.circular_product(out, tf.zero_padded(kernel, n_fft, dtype), threads)
        return out[..., :keep]  # (no numpy arithmetic: no floating-point warnings to silence)
    with np.errstate(invalid="ignore", over="ignore"):  # NaN/inf: the caller's policy decides
        return _separate_calls(a, b, n_fft, keep, threads, dtype)


def _separate_calls(a, b, n_fft, keep, threads, dtype):
    """:func:`convolve_fft` by forward transforms, a spectral product and an inverse."""
    if dtype.kind == "c":
        return _convolve_complex(a, b, n_fft, keep, threads, dtype)
    if a.ndim == 1 and b.ndim == 1:
        if threads >= 2 or n_fft > STACK_LIMIT:
            if threads >= 2:
                job = helper_thread().submit(_padded_spectrum, a, n_fft, dtype)
                fb = _padded_spectrum(b, n_fft, dtype)
                fa = job.result()
            else:
                fa, fb = _padded_spectrum(a, n_fft, dtype), _padded_spectrum(b, n_fft, dtype)
            fa *= fb
            return tf.irfft(fa, n_fft, -1, 1)[:keep]
        stacked = np.zeros((2, n_fft), dtype=dtype)
        stacked[0, : a.shape[0]] = a
        stacked[1, : b.shape[0]] = b
        spectra = tf.rfft(stacked, -1, 1)
        product = spectra[0]
        product *= spectra[1]
        return tf.irfft(product, n_fft, -1, 1)[:keep]
    fa = tf.rfft(tf.zero_padded(a, n_fft, dtype), -1, threads)
    fb = tf.rfft(tf.zero_padded(b, n_fft, dtype), -1, threads)
    product = spectral_product(fa, fb)
    return tf.irfft(product, n_fft, -1, threads)[..., :keep]


#: Largest kernel buffer kept between calls (entries): 8 MiB of float64.
SCRATCH_LIMIT = 2**20
_scratch = threading.local()


def borrow_kernel(b: np.ndarray, n_fft: int, dtype) -> np.ndarray:
    """``b`` zero padded to ``n_fft``, in this thread's kernel buffer when it has one.

    The fused call only reads its kernel (ducc0 copies it before transforming), so the buffer
    can serve the next product: only ``b`` is written again, and the entries a longer previous
    kernel left beyond it are cleared.  The buffer is taken out of the thread's slot while in
    use (a product started meanwhile in this thread, e.g. from a signal handler, gets its own
    array) and handed back by :func:`return_kernel`; one per thread (``threading.local``), at
    most :data:`SCRATCH_LIMIT` entries.
    """
    m = b.shape[0]
    held = getattr(_scratch, "kernel", None)
    _scratch.kernel = None
    if held is None or held[0].shape[0] != n_fft or held[0].dtype != dtype:
        kernel = np.zeros(n_fft, dtype)
        kernel[:m] = b
        return kernel
    kernel, used = held
    kernel[:m] = b
    if used > m:
        kernel[m:used] = 0
    return kernel


def return_kernel(kernel: np.ndarray, m: int) -> None:
    """Keep ``kernel`` (nonzero in its first ``m`` entries only) for this thread's next product."""
    if kernel.shape[0] <= SCRATCH_LIMIT:
        _scratch.kernel = (kernel, m)


def takes_fused(a_1d: bool, b_1d: bool, threads: int) -> bool:
    """Whether :func:`convolve_fft` uses the fused circular product: one operand 1-D, and a
    batch or one thread (two 1-D operands on two threads overlap their forward transforms)."""
    return tf.FUSED and (a_1d or b_1d) and (threads == 1 or not (a_1d and b_1d))


def _convolve_complex(a, b, n_fft, keep, threads, dtype):
    fa = tf.fft(tf.zero_padded(a, n_fft, dtype), -1, threads)
    fb = tf.fft(tf.zero_padded(b, n_fft, dtype), -1, threads)
    return tf.ifft(spectral_product(fa, fb), -1, threads)[..., :keep]


# ----------------------------------------------------------------------------- registry record
#
# Cost: ``t = c0 + r(N) N lg N w / s``: ``w`` transforms relative to one 1-D real product (batch
# sizes, 2x for complex), ``r`` read from the table measured per lg N, ``s`` the thread speed-up.


def thread_speedup(costs: dict, points: int, threads: int, batched: bool) -> float:
    """Predicted speed-up from threads for a transform job of ``points`` total points."""
    t = costs["threads"]
    if threads < 2 or points < t["min_points"]:
        return 1.0
    return t["speedup_batch"] if batched else t["speedup_1d"]


def predict_fft(costs: dict, n_fft: int, work: float, threads: int, batched: bool,
                fused: bool = False, negacyclic: bool = False) -> float:
    """Seconds for the fft engine: ``work`` counts 1-D real products of length ``n_fft``
    (``fused``: by the fused circular product, ``negacyclic``: by the negacyclic real product,
    each at its own measured constants when the table has them)."""
    c = costs["fft"]
    flops = n_fft * math.log2(n_fft) * work
    speed = thread_speedup(costs, int(n_fft * work), threads, batched)
    fused = fused or negacyclic
    overhead = c.get("fused_overhead", c["overhead"]) if fused else c["overhead"]
    table = c.get("negacyclic_rate_by_log2n") if negacyclic else None
    rate = value_at_size(table, n_fft) if table else fft_rate(costs, n_fft, fused)
    return overhead + rate * flops / speed


def takes_negacyclic(job: Job, n_fft: int, threads: int) -> bool:
    """Whether :func:`convolve_fft` runs the negacyclic real product for this job (two real
    1-D operands on one thread at a length it takes)."""
    return (job.kind == "real" and not job.batch_a and not job.batch_b and threads == 1
            and ng.eligible(n_fft))


def transform_work(job: Job) -> float:
    """1-D real transform products a float job costs (operand and output batches; complex 2x)."""
    rows_a = math.prod(job.batch_a) if job.batch_a else 1
    rows_b = math.prod(job.batch_b) if job.batch_b else 1
    return (rows_a + rows_b + job.rows) / 3.0 * (2.0 if job.kind == "complex" else 1.0)


def option(job: Job) -> Option:
    """The fft engine's offer: always possible.  Mode "valid" needs only ``max(n1, n2)`` points
    (the wrap-around lands in dropped entries)."""
    need = max(job.n1, job.n2) if job.mode == "valid" else job.full
    n_fft = tf.fast_length(need, real=job.kind != "complex")
    work = transform_work(job)
    batched = job.rows > 1
    speed = thread_speedup(job.costs, int(n_fft * work), job.threads, batched)
    threads = job.threads if speed > 1 else 1
    one_d = (not job.batch_a, not job.batch_b)
    seconds = predict_fft(job.costs, n_fft, work, threads, batched, takes_fused(*one_d, threads),
                          takes_negacyclic(job, n_fft, threads))
    if threads > 1 and not takes_fused(*one_d, threads) and takes_fused(*one_d, 1):
        alone = predict_fft(job.costs, n_fft, work, 1, batched, True,
                            takes_negacyclic(job, n_fft, 1))  # fused, one thread
        if alone < seconds:
            seconds, threads = alone, 1
    return Option(seconds, settings={"transform_length": n_fft, "threads": threads})


def run_planned(plan, a: np.ndarray, b: np.ndarray, keep: int) -> np.ndarray:
    """The first ``keep`` entries of the product at the plan's transform length."""
    return convolve_fft(a, b, plan.transform_length, keep, plan.threads)


ENGINE = Engine("fft", FLOAT_KINDS, option, run_planned, smears_nonfinite=True)
