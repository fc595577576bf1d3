"""The one place that knows which FFT library runs: pocketfft, as shipped inside scipy.

Public ``scipy.fft`` functions spend about 3 us per call on argument handling and back-end
dispatch before any arithmetic (measured here); at transform lengths of a few thousand that is a
fifth of the work.  When scipy exposes its compiled pocketfft binding we call it directly, after a
self-test at import against the public functions; otherwise we use the public functions.  No other
module asks which is present.

All functions transform along one axis of an array that is *already* at the transform length
(the caller zero pads), and return new arrays.
"""

from __future__ import annotations

import numpy as np
from scipy import fft as _sfft

try:  # the compiled binding behind scipy.fft (private: guarded and self-tested below)
    from scipy.fft._pocketfft import pypocketfft as _pp
except ImportError:  # pragma: no cover - depends on scipy's layout
    _pp = None


def _rfft_public(x, axis, threads):
    return _sfft.rfft(x, axis=axis, workers=threads)


def _irfft_public(spec, n, axis, threads):
    return _sfft.irfft(spec, n, axis=axis, workers=threads, overwrite_x=True)


def _fft_public(x, axis, threads):
    return _sfft.fft(x, axis=axis, workers=threads)


def _ifft_public(spec, axis, threads):
    return _sfft.ifft(spec, axis=axis, workers=threads, overwrite_x=True)


def _rfft_direct(x, axis, threads):
    return _pp.r2c(x, (axis % x.ndim,), True, 0, None, threads)


def _irfft_direct(spec, n, axis, threads):
    return _pp.c2r(spec, (axis % spec.ndim,), n, False, 2, None, threads)


def _fft_direct(x, axis, threads):
    return _pp.c2c(x, (axis % x.ndim,), True, 0, None, threads)


def _ifft_direct(spec, axis, threads):
    return _pp.c2c(spec, (axis % spec.ndim,), False, 2, None, threads)


def _direct_binding_agrees() -> bool:
    if _pp is None:
        return False
    try:
        x = np.arange(1.0, 13.0).reshape(2, 6) ** 0.5
        ok = np.allclose(_rfft_direct(x, -1, 1), _rfft_public(x, -1, 1))
        spec = _rfft_public(x, -1, 1)
        ok &= np.allclose(_irfft_direct(spec, 6, -1, 1), _irfft_public(spec.copy(), 6, -1, 1))
        z = x + 1j * x[::-1]
        ok &= np.allclose(_fft_direct(z, -1, 1), _fft_public(z, -1, 1))
        ok &= np.allclose(_ifft_direct(z, -1, 1), _ifft_public(z.copy(), -1, 1))
        return bool(ok)
    except Exception:  # noqa: BLE001 - any failure means: use the public functions
        return False


if _direct_binding_agrees():
    BACKEND = "pocketfft (scipy's compiled binding, called directly)"
    _kernels = (_rfft_direct, _irfft_direct, _fft_direct, _ifft_direct)
else:  # pragma: no cover - depends on scipy's layout
    BACKEND = "scipy.fft"
    _kernels = (_rfft_public, _irfft_public, _fft_public, _ifft_public)

#: On one thread, pocketfft transforms a batch of rows several at a time (SIMD across rows) with a
#: scratch buffer of a few rows; once that buffer leaves the cache, row-by-row calls are faster.
#: Lengths from which they are (measured on the development machine, 3-5 rows: batched irfft
#: 1.9x slower at 2^15, ifft 1.6x at 2^14, fft 1.6x at 2^15, rfft 1.2x at 2^17).  With two or
#: more threads pocketfft splits the batch between them, which is faster than a loop on one.
ROW_BY_ROW_FROM = {"rfft": 2**17, "irfft": 2**15, "fft": 2**15, "ifft": 2**14}


def _by_rows(kernel, x: np.ndarray, *length) -> np.ndarray:
    """``kernel`` on one row of ``x`` (last axis) at a time, on one thread."""
    rows = x.reshape(-1, x.shape[-1])
    first = kernel(rows[0], *length, -1, 1)
    out = np.empty((rows.shape[0], first.shape[-1]), dtype=first.dtype)
    out[0] = first
    for i in range(1, rows.shape[0]):
        out[i] = kernel(rows[i], *length, -1, 1)
    return out.reshape(x.shape[:-1] + (first.shape[-1],))


def _several_long_rows(x: np.ndarray, axis: int, threads: int, length: int, name: str) -> bool:
    return (threads == 1 and x.ndim > 1 and length >= ROW_BY_ROW_FROM[name]
            and axis % x.ndim == x.ndim - 1 and x.size > x.shape[-1])


def rfft(x: np.ndarray, axis: int, threads: int) -> np.ndarray:
    if x.ndim > 1 and _several_long_rows(x, axis, threads, x.shape[axis], "rfft"):
        return _by_rows(_kernels[0], x)
    return _kernels[0](x, axis, threads)


def irfft(spec: np.ndarray, n: int, axis: int, threads: int) -> np.ndarray:
    if spec.ndim > 1 and _several_long_rows(spec, axis, threads, n, "irfft"):
        return _by_rows(_kernels[1], spec, n)
    return _kernels[1](spec, n, axis, threads)


def fft(x: np.ndarray, axis: int, threads: int) -> np.ndarray:
    if x.ndim > 1 and _several_long_rows(x, axis, threads, x.shape[axis], "fft"):
        return _by_rows(_kernels[2], x)
    return _kernels[2](x, axis, threads)


def ifft(spec: np.ndarray, axis: int, threads: int) -> np.ndarray:
    if spec.ndim > 1 and _several_long_rows(spec, axis, threads, spec.shape[axis], "ifft"):
        return _by_rows(_kernels[3], spec)
    return _kernels[3](spec, axis, threads)


rfft.__doc__ = "Real-input forward FFT along ``axis`` (input already at transform length)."
irfft.__doc__ = "Inverse of :func:`rfft` to ``n`` real points, scaled by ``1/n``."
fft.__doc__ = "Complex forward FFT along ``axis``."
ifft.__doc__ = "Complex inverse FFT along ``axis``, scaled by ``1/n``."


def zero_padded(x: np.ndarray, length: int, dtype=None) -> np.ndarray:
    """A new array with ``x`` along the last axis followed by zeros up to ``length``."""
    out = np.zeros(x.shape[:-1] + (length,), dtype=dtype or x.dtype)
    out[..., : x.shape[-1]] = x
    return out
