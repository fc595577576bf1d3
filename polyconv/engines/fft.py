"""Float FFT convolution with zero padding.

The circular convolution theorem ``DFT(a (*) b) = DFT(a) . DFT(b)`` gives the full linear
convolution when both operands are zero padded to a length ``N >= n1 + n2 - 1`` (common practice, no
source; see any signal-processing text, e.g. Oppenheim & Schafer, *Discrete-Time Signal
Processing*, section 8.7).  Real data go through real-input transforms, which do about half the
work of complex ones.  Transforms come from :mod:`polyconv.numerics.transforms` (pocketfft).
"""

from __future__ import annotations

import numpy as np

from ..numerics import transforms as tf
from ._threads import helper_thread

#: Up to this length both 1-D operands go through one batched transform call (saves a call's
#: overhead); beyond it the stacked array no longer fits in cache and separate calls are faster
#: (measured: 1.25x slower stacked at 2^17 points on one thread).
STACK_LIMIT = 2**15


def _padded_spectrum(x: np.ndarray, n_fft: int, dtype) -> np.ndarray:
    return tf.rfft(tf.zero_padded(x, n_fft, dtype), -1, 1)


def convolve_fft(a: np.ndarray, b: np.ndarray, n_fft: int, keep: int, threads: int = 1):
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
        batched transforms are split by pocketfft.

    Returns
    -------
    numpy.ndarray
        Shape ``batch + (keep,)``, dtype of the real or complex result.
    """
    dtype = np.result_type(a, b)
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
    product = _multiply(fa, fb)
    return tf.irfft(product, n_fft, -1, threads)[..., :keep]


def _multiply(fa: np.ndarray, fb: np.ndarray) -> np.ndarray:
    """``fa * fb`` with broadcasting, in place in ``fa`` when its shape allows."""
    if fa.shape == np.broadcast_shapes(fa.shape, fb.shape):
        fa *= fb
        return fa
    return fa * fb


def _convolve_complex(a, b, n_fft, keep, threads, dtype):
    fa = tf.fft(tf.zero_padded(a, n_fft, dtype), -1, threads)
    fb = tf.fft(tf.zero_padded(b, n_fft, dtype), -1, threads)
    return tf.ifft(_multiply(fa, fb), -1, threads)[..., :keep]
