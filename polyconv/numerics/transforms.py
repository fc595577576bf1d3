"""The one place that knows which FFT library runs: ducc0, else pocketfft as shipped in scipy.

ducc0 (M. Reinecke's successor of pocketfft, C++ with SIMD across rows) is used whenever it can
be imported: the lean float recipe (two real transforms, a product, one inverse) measured here
0.53-0.63x scipy.fft's time at ``N = 2^12 .. 2^16``, 0.6-0.75x at ``2^18 .. 2^22``, about even at
``2^10`` and 1.3-1.6x at ``2^6 .. 2^8`` (a microsecond more per call; bench/RESULTS.md).  When
ducc0 cannot be imported, scipy's compiled pocketfft binding is called directly (public
``scipy.fft`` functions spend about 3 us per call on dispatch); failing that, the public
functions.  Either library passes a self-test at import against numpy.fft; scipy is imported
only when ducc0 is not used (it costs about 0.3 s).  ducc0 also has a fused circular product
(:func:`circular_product`: forward transform, product with a kernel's spectrum and inverse in
one call, :data:`FUSED`), which the float engines prefer when one operand is 1-D.

:data:`LIBRARY` and :data:`LIBRARY_VERSION` name what runs; error certificates
(:mod:`polyconv.numerics.bounds`) are issued only for a library and version range whose twiddle
error was measured.  No other module asks which library is present.

All functions transform along one axis of an array that is *already* at the transform length
(the caller zero pads), and return new arrays (save the ``*_into``/``*_inplace`` ones and
:func:`circular_product`, which write where they are told).
"""

from __future__ import annotations

import os

import numpy as np

try:
    if os.environ.get("POLYCONV_FFT", "").strip().lower() == "scipy":
        raise ImportError("POLYCONV_FFT=scipy")
    import ducc0 as _ducc0
    from ducc0 import fft as _dfft
except ImportError:  # fallback: scipy's pocketfft (scipy is imported only then: ~0.3 s)
    _ducc0 = _dfft = None

_sfft = _pp = None  # scipy.fft and its binding, loaded by _load_scipy() on the fallback path


def _rfft_public(x, axis, threads):
    return _sfft.rfft(x, axis=axis, workers=threads)


def _irfft_public(spec, n, axis, threads):
    return _sfft.irfft(spec, n, axis=axis, workers=threads)  # callers may reuse spec


def _fft_public(x, axis, threads):
    return _sfft.fft(x, axis=axis, workers=threads)


def _ifft_public(spec, axis, threads):
    return _sfft.ifft(spec, axis=axis, workers=threads)


def _rfft_direct(x, axis, threads):
    return _pp.r2c(_as_float(x), (axis % x.ndim,), True, 0, None, threads)


def _irfft_direct(spec, n, axis, threads):
    return _pp.c2r(spec, (axis % spec.ndim,), n, False, 2, None, threads)


def _fft_direct(x, axis, threads):
    return _pp.c2c(x, (axis % x.ndim,), True, 0, None, threads)


def _ifft_direct(spec, axis, threads):
    return _pp.c2c(spec, (axis % spec.ndim,), False, 2, None, threads)


def _as_float(x):
    """ducc0 transforms float32/float64 as they are; integers and bools go to float64."""
    return x if x.dtype.kind in "fc" else x.astype(np.float64)


def _rfft_ducc(x, axis, threads):
    return _dfft.r2c(_as_float(x), (axis % x.ndim,), True, 0, None, threads)


def _irfft_ducc(spec, n, axis, threads):
    return _dfft.c2r(spec, (axis % spec.ndim,), n, False, 2, None, threads)


def _fft_ducc(x, axis, threads):
    x = x if x.dtype.kind == "c" else x.astype(np.complex128)
    return _dfft.c2c(x, (axis % x.ndim,), True, 0, None, threads)


def _ifft_ducc(spec, axis, threads):
    spec = spec if spec.dtype.kind == "c" else spec.astype(np.complex128)
    return _dfft.c2c(spec, (axis % spec.ndim,), False, 2, None, threads)


def _agrees(kernels) -> bool:
    """The kernels against numpy.fft (an independent reference) on a small batch (any failure:
    no)."""
    try:
        rfft_k, irfft_k, fft_k, ifft_k = kernels
        x = np.arange(1.0, 13.0).reshape(2, 6) ** 0.5
        ok = np.allclose(rfft_k(x, -1, 1), np.fft.rfft(x, axis=-1))
        spec = np.fft.rfft(x, axis=-1)
        ok &= np.allclose(irfft_k(spec.copy(), 6, -1, 1), np.fft.irfft(spec, 6, axis=-1))
        z = x + 1j * x[::-1]
        ok &= np.allclose(fft_k(z, -1, 1), np.fft.fft(z, axis=-1))
        ok &= np.allclose(ifft_k(z.copy(), -1, 1), np.fft.ifft(z, axis=-1))
        return bool(ok)
    except Exception:  # noqa: BLE001 - any failure means: use another library
        return False


_DUCC = (_rfft_ducc, _irfft_ducc, _fft_ducc, _ifft_ducc)
_DIRECT = (_rfft_direct, _irfft_direct, _fft_direct, _ifft_direct)

def _load_scipy() -> None:
    """Import scipy's FFT (and its compiled binding) for the fallback path."""
    global _sfft, _pp
    from scipy import fft as _sfft

    try:  # the compiled binding behind scipy.fft (private: guarded and self-tested below)
        from scipy.fft._pocketfft import pypocketfft as _pp
    except ImportError:  # pragma: no cover - depends on scipy's layout
        _pp = None


if _dfft is not None and _agrees(_DUCC):
    LIBRARY, LIBRARY_VERSION = "ducc0", _ducc0.__version__
    BACKEND = f"ducc0 {LIBRARY_VERSION}"
    _kernels = _DUCC
else:  # ducc0 missing or wrong here: scipy's pocketfft
    _load_scipy()
    if _pp is not None and _agrees(_DIRECT):
        LIBRARY, LIBRARY_VERSION = "pocketfft-scipy", __import__("scipy").__version__
        BACKEND = f"pocketfft (scipy {LIBRARY_VERSION}'s compiled binding, called directly)"
        _kernels = _DIRECT
    else:  # pragma: no cover - depends on scipy's layout
        LIBRARY, LIBRARY_VERSION = "scipy.fft", __import__("scipy").__version__
        BACKEND = f"scipy.fft {LIBRARY_VERSION}"
        _kernels = (_rfft_public, _irfft_public, _fft_public, _ifft_public)

#: On one thread, scipy's pocketfft transforms a batch of rows several at a time (SIMD across
#: rows) with a scratch buffer of a few rows; once that buffer leaves the cache, row-by-row
#: calls are faster.
#: Lengths from which they are (measured on the development machine, 3-5 rows: batched irfft
#: 1.9x slower at 2^15, ifft 1.6x at 2^14, fft 1.6x at 2^15, rfft 1.2x at 2^17).  With two or
#: more threads pocketfft splits the batch between them, which is faster than a loop on one.
#: ducc0's batches were faster than row-by-row calls at every length measured (0.67-1.0x at
#: 2^15-2^17, 4 rows), so with ducc0 batches are never split.
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
    return (_kernels is not _DUCC and threads == 1 and x.ndim > 1
            and length >= ROW_BY_ROW_FROM[name] and axis % x.ndim == x.ndim - 1
            and x.size > x.shape[-1])


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


def rfft_into(x: np.ndarray, out: np.ndarray, threads: int) -> None:
    """Real forward FFT of ``x`` along its last axis written into ``out`` (a view is fine: the
    leading rows of a larger zero array are how N-D products pad without a copy)."""
    if _kernels is _DUCC:
        _dfft.r2c(_as_float(x), (x.ndim - 1,), True, 0, out, threads)
    elif _kernels is _DIRECT:
        _pp.r2c(x, (x.ndim - 1,), True, 0, out, threads)
    else:  # pragma: no cover - public scipy.fft only
        out[...] = _sfft.rfft(x, axis=-1, workers=threads)


def fft_inplace(x: np.ndarray, axis: int, forward: bool, threads: int) -> None:
    """Complex FFT of ``x`` along ``axis``, in place (the inverse scaled by ``1/n``): the
    passes of a row-column N-D transform after the first."""
    inorm = 0 if forward else 2
    if _kernels is _DUCC:
        _dfft.c2c(x, (axis % x.ndim,), forward, inorm, x, threads)
    elif _kernels is _DIRECT:
        _pp.c2c(x, (axis % x.ndim,), forward, inorm, x, threads)
    else:  # pragma: no cover - public scipy.fft only
        x[...] = (_sfft.fft if forward else _sfft.ifft)(x, axis=axis, workers=threads)


def c2c_inplace(x: np.ndarray, axis: int, forward: bool) -> None:
    """Unscaled complex FFT of complex128 ``x`` along ``axis``, in place, on one thread (the
    sign of the exponent negative when ``forward``): the passes of
    :mod:`polyconv.numerics.negacyclic`, which folds every scale into its tables."""
    if _kernels is _DUCC:
        _dfft.c2c(x, (axis,), forward, 0, x, 1)
    elif _kernels is _DIRECT:
        _pp.c2c(x, (axis,), forward, 0, x, 1)
    else:  # pragma: no cover - public scipy.fft only
        x[...] = (_sfft.fft if forward else _sfft.ifft)(x, axis=axis, norm="backward"
                                                       if forward else "forward")


def _fused_agrees() -> bool:
    """ducc0's fused circular product against numpy.convolve (any failure: no)."""
    try:
        x = np.zeros((2, 16))
        x[:, :7] = np.arange(1.0, 15.0).reshape(2, 7) ** 0.5
        k = np.zeros(16)
        k[:9] = np.arange(9.0, 0.0, -1.0)
        want = np.array([np.convolve(r[:7], k[:9]) for r in x])
        z = x[0] * (1 + 0.5j)
        got = _dfft.convolve_axis(x, x, 1, k, 1)[:, :15]
        gotc = _dfft.convolve_axis(z, z, 0, k.astype(np.complex128), 1)[:15]
        return bool(np.allclose(got, want) and np.allclose(gotc, want[0] * (1 + 0.5j)))
    except Exception:  # noqa: BLE001 - any failure means: transform, multiply and invert
        return False


#: ducc0's ``convolve_axis`` passed its self-test: one call does forward transform, product with
#: the kernel's spectrum and inverse (see :func:`circular_product`).
FUSED = _kernels is _DUCC and _fused_agrees()


def circular_product(x: np.ndarray, kernel: np.ndarray, threads: int,
                     out: np.ndarray | None = None) -> np.ndarray | None:
    """Circular convolution of every row of ``x`` with ``kernel`` in one library call.

    ``x`` (rows along the last axis, already at the transform length ``N``; overwritten unless
    ``out``, an array of ``x``'s shape not overlapping it, is given) and the 1-D ``kernel``
    (length ``N``, same dtype) are transformed by the same real (or complex) FFT plan as
    :func:`rfft` uses, multiplied bin by bin in the half-complex layout and transformed back,
    the ``1/N`` scale applied to the kernel's spectrum (exact for a power of two; else one
    rounding, as on the output in :func:`irfft`).  ducc0's ``convolve_axis`` with equal input
    and output lengths; the rows are transformed several at a time (SIMD across rows) and no
    spectrum array is allocated.

    Returns ``out`` (default ``x``) holding the products, or None when the running library has
    no such call (the caller then uses :func:`rfft`, a product and :func:`irfft`).
    """
    if not FUSED:
        return None
    return _dfft.convolve_axis(x, x if out is None else out, x.ndim - 1, kernel, threads)


def zero_padded(x: np.ndarray, length: int, dtype=None) -> np.ndarray:
    """A new array with ``x`` along the last axis followed by zeros up to ``length``."""
    out = np.zeros(x.shape[:-1] + (length,), dtype=dtype or x.dtype)
    out[..., : x.shape[-1]] = x
    return out


def fast_length(minimum: int, real: bool = True) -> int:
    """Smallest length ``>= minimum`` that the running library transforms fast (5-smooth for
    real transforms; ducc0's ``good_size`` or scipy's ``next_fast_len``)."""
    if _kernels is _DUCC:
        return int(_dfft.good_size(minimum, real))
    return _sfft.next_fast_len(minimum, real=real)
