"""A real linear product as one complex negacyclic product of half the length.

Two real sequences ``a``, ``b`` with ``n1 + n2 - 1 <= N = 2m`` have the linear product ``c``
equal to their negacyclic product modulo ``x^N + 1``.  Since ``x^N + 1 = (x^m - i)(x^m + i)``
and the residue of a real polynomial modulo ``x^m + i`` is the conjugate of its residue modulo
``x^m - i``, ``c`` is determined by ``w = c mod (x^m - i)``: writing ``c = c_lo + x^m c_hi``
(``deg c_lo, c_hi < m``), ``w = c_lo + i c_hi``, so ``c_lo = Re w`` and ``c_hi = Im w``
("right-angle convolution": R. Crandall and B. Fagin, "Discrete weighted transforms and
large-integer arithmetic", Math. Comp. 62 (1994) 305-324; Crandall & Pomerance, *Prime
Numbers*, 2nd ed., 2005, chapter 9; cited from memory).  The product modulo ``x^m - i`` is a
weighted cyclic product: with ``zeta = exp(i pi / (2m))`` (``zeta^m = i``), ``x = zeta y``
turns it into a cyclic product of length ``m`` of ``a_j zeta^j`` and ``b_j zeta^j``, untwisted by
``zeta^(-j)`` (the weighted transforms of Crandall & Fagin).  So one real product costs three
complex transforms of length ``m`` and no real-FFT post-processing pass: measured 0.4-0.9x the
time of ducc0's fused real product of length ``N`` from ``N = 2^13`` on (bench/RESULTS.md,
float2 section).

Long transforms are split ``m = R C`` as in the four-step method (D. H. Bailey, "FFTs in
external or hierarchical memory", J. Supercomputing 4 (1990) 23-35): ``R``-point transforms down
the columns of the ``(R, C)`` view (SIMD across columns), a twiddle product, ``C``-point
transforms along the rows.  The spectrum stays in the four-step's permuted order (bin
``k1 + R k2`` at ``[k1, k2]``), which a pointwise product does not mind, and the inverse runs the
same steps backwards, so no transposition is ever made.  The column part of the twist,
``zeta^(j2)``, commutes with the column transforms and is folded into the twiddle table; the
row part ``zeta^(C j1)`` is one scalar per row.  The ``1/m`` of the inverse is folded into the
second operand's twist (so no intermediate exceeds the size of the result, as in ducc0's fused
real product).  Unsplit, the inverse is a forward transform read backwards
(``F_k = m w_(-k)``), whose untwist is a product with the forward twist table itself.

Error (the certificate, :mod:`polyconv.numerics.bounds`).  Every table entry here is a root of
unity ``exp(2 pi i r / 4m)`` (times ``1/m``), a coarse root kept as a sum of two float64 from
long double times a fine one (argument reduction exact in integers), rounded once at the end:
error at most ``TABLE_ERROR = 1.25 eps`` in modulus (analysis in :func:`roots`; tests/numerics
check it against mpmath).  Counting Percival's factors along the chain (each of the library's
FFT levels ``L = (1+eps)(1+sqrt5 eps)(1+beta)``, ``n = log2 N``): a forward transform here is
one twist (real times complex ``(1+eps)(1+t)``, or complex ``(1+sqrt5 eps)(1+t)`` when the
operand is folded), ``n - 1`` levels and, when split, one twiddle product
``(1+sqrt5 eps)(1+t)``; the inverse is ``n - 1`` levels, a twiddle product when split and
the untwist (sign changes and the reversed read are exact).  Whenever
``(1+sqrt5 eps)(1+t)^2 <= (1+eps)(1+beta)`` (``t = TABLE_ERROR``; true for ``beta >= 3.75
eps``, so for both measured libraries, 5 and 6 eps; checked exactly by :func:`fits_percival`
at import), two table products fit in one level and each transform's factor is at most
``L^n``, so Percival's bound at length ``N`` with the library's ``beta`` covers the product:
the same theorem, constants and length as the fused real product.
"""

from __future__ import annotations

import threading
from fractions import Fraction

import numpy as np

from . import transforms as tf

#: pi to 40 digits, as a long double (common knowledge; checked against mpmath in the tests).
_PI = np.longdouble("3.141592653589793238462643383279502884197")
#: Long double has a 64-bit significand here (x87 extended): the tables' accuracy rests on it.
LONG_DOUBLE_OK = np.finfo(np.longdouble).nmant >= 63
#: Modulus error of every table entry, relative to eps = 2^-53 (see :func:`roots`).
TABLE_ERROR = Fraction(5, 4) * Fraction(1, 2**53)


def fits_percival(beta: Fraction, table_error: Fraction = TABLE_ERROR) -> bool:
    """Whether ``(1+sqrt5 eps)(1+t)^2 <= (1+eps)(1+beta)`` (module notes), exactly, with an
    upper bound of sqrt 5."""
    eps = Fraction(1, 2**53)
    sqrt5_up = Fraction(2236067977500, 10**12) + Fraction(1, 10**11)
    return (1 + sqrt5_up * eps) * (1 + table_error) ** 2 <= (1 + eps) * (1 + beta)


def roots(r: np.ndarray, order: int, scale: int = 1) -> np.ndarray:
    """``exp(2 pi i r / order) / scale`` as complex128, for integer ``r`` (any sign).

    ``r`` is reduced modulo ``order`` exactly in int64 and split ``r = B h + l`` with ``B =
    max(1, order // 1024)``.  The coarse roots ``H_h = exp(2 pi i B h / order) / scale`` are
    formed in long double (``cos``/``sin`` of a long-double angle: error below ``2^-61``) and
    kept as unevaluated sums ``hi + lo`` of two float64; the fine ones as ``d_l = exp(2 pi i l /
    order) - 1`` in float64 (``|d_l| < 2 pi / 1024 < 2^-7``, its rounding below ``2^-60``).
    Then ``H_h (1 + d_l) = hi + (lo + hi d_l)``: the correction is formed in float64 with an
    error below ``(sqrt5 + 2) 2^-7 eps + 2^-59`` (it is at most ``2^-7`` in size) and one final
    addition rounds the whole to float64 (at most ``eps`` per part).  So the modulus error is
    below ``eps (1 + 0.04) < 1.25 eps`` (:data:`TABLE_ERROR`); tests/numerics check it against
    mpmath.
    """
    r = np.asarray(r, dtype=np.int64)
    base = max(1, order // 1024)
    step = np.longdouble(2) * _PI / np.longdouble(order)
    coarse = np.arange(-(-order // base), dtype=np.longdouble) * (step * base)
    fine = np.arange(base, dtype=np.longdouble) * step
    s = np.longdouble(scale)
    parts = []
    for value in (np.cos(coarse) / s, np.sin(coarse) / s):
        hi = value.astype(np.float64)
        parts.append((hi, (value - hi).astype(np.float64)))
    his, los = parts[0][0] + 1j * parts[1][0], parts[0][1] + 1j * parts[1][1]
    ds = (np.cos(fine) - 1).astype(np.float64) + 1j * np.sin(fine).astype(np.float64)
    out = np.empty(r.shape, dtype=np.complex128)
    flat_r, flat_out = r.reshape(-1), out.reshape(-1)
    two = order & (order - 1) == 0  # then base is a power of two too: masks and shifts
    for start in range(0, flat_r.shape[0], 2**14):  # in pieces that stay in the cache
        piece = flat_r[start:start + 2**14]
        if two:
            piece = piece & (order - 1)
            hi_index, lo_index = piece >> (base.bit_length() - 1), piece & (base - 1)
        else:
            hi_index, lo_index = np.divmod(np.mod(piece, order), base)
        hi = his[hi_index]
        d = ds[lo_index]
        d *= hi
        d += los[hi_index]
        d += hi
        flat_out[start:start + 2**14] = d
    return out


def split(m: int) -> int:
    """Rows ``R`` of the four-step split of an ``m``-point transform (1: no split).

    A power of two dividing ``m`` (so at most one of the two sub-lengths is not a power of two,
    as the level count of mixed-radix lengths assumes): no split up to ``2^15`` points (one
    transform is as fast or faster: 0.58 against 0.64-0.74 of the lean recipe at ``2^15``),
    else about ``sqrt(m) / 4`` rows (measured best on the development machine from ``2^16`` to
    ``2^20``)."""
    if m <= SPLIT_FROM:
        return 1
    two = m & -m
    rows = 1 << max(4, (m.bit_length() - 1) // 2 - 2)
    return min(rows, two) if two >= 16 and m // min(rows, two) >= 16 else 1


#: Largest transform length done without the four-step split.
SPLIT_FROM = 2**15


class Tables:
    """The twist and twiddle tables of the ``m``-point negacyclic product with ``rows`` rows.

    The ``1/m`` of the inverse transform is folded into the second operand's twist
    (``twist_b``), so the spectrum product and every later value stay at the size of the
    result, as in the fused real product (no overflow a product of that size would not have).
    """

    def __init__(self, m: int, rows: int):
        self.m, self.rows, self.cols = m, rows, m // rows
        order, cols = 4 * m, m // rows
        j = np.arange(m if rows == 1 else rows, dtype=np.int64) * (1 if rows == 1 else cols)
        self.twist = roots(j, order)
        self.twist_b = roots(j, order, m) if m & (m - 1) else self.twist * (1.0 / m)
        if rows == 1:  # the inverse is a forward transform read backwards (see _real_product)
            return
        self.untwist = roots(-j, order)
        j1 = np.arange(rows, dtype=np.int64)[:, None]
        j2 = np.arange(cols, dtype=np.int64)[None, :]
        self.forward = roots(j2 - 4 * j2 * j1 % order, order)
        self.inverse = np.conj(self.forward)  # (exact)


_cache: dict = {}
_lock = threading.Lock()
#: Table entries kept in all (oldest dropped first): 2^22 complex128, 64 MiB; a table set of
#: ``m`` points holds about ``2 m``.
CACHE_ENTRIES = 2**22


def tables(m: int) -> Tables:
    """The cached :class:`Tables` for ``m`` points."""
    t = _cache.get(m)
    if t is None:
        t = Tables(m, split(m))
        with _lock:
            while _cache and 2 * (m + sum(_cache)) > CACHE_ENTRIES:
                _cache.pop(next(iter(_cache)))
            _cache[m] = t
    return t


def _twisted(a: np.ndarray, t: Tables, u: np.ndarray, twist: np.ndarray) -> np.ndarray:
    """``a`` folded to ``m`` complex points (``a_j + i a_(j+m)``) and twisted by ``zeta^j``
    (the row part only when split: the column part is in the twiddle table; ``twist`` is
    ``t.twist`` or ``t.twist_b``), written into ``u``.  (An unfolded real operand: one
    rounding per part, ``a_j Re zeta^j`` and ``a_j Im zeta^j``, its zero imaginary part
    contributing exact zeros.)"""
    m, n = t.m, a.shape[0]
    if t.rows == 1:
        if n <= m:
            np.multiply(twist[:n], a, out=u[:n])
            u[n:] = 0
            return u
        u.real, u.imag[: n - m], u.imag[n - m:] = a[:m], a[m:], 0
        u *= twist
        return u
    u2, c = u.reshape(t.rows, t.cols), t.cols
    if n <= m:
        q, r = divmod(n, c)
        np.multiply(a[: q * c].reshape(q, c), twist[:q, None], out=u2[:q])
        if r:
            np.multiply(a[q * c:], twist[q], out=u2[q, :r])
        u[n:] = 0
        return u
    u.real, u.imag[: n - m], u.imag[n - m:] = a[:m], a[m:], 0
    u2 *= twist[:, None]
    return u


#: Largest ``m`` whose two work arrays are kept between products (per thread: 8 MiB at most).
SCRATCH_POINTS = 2**18
_scratch = threading.local()


def _work_arrays(m: int) -> tuple[np.ndarray, np.ndarray]:
    """Two complex work arrays of ``m`` points: this thread's kept pair (taken out of its slot
    while in use, so a product started meanwhile, e.g. from a signal handler, gets new ones)
    or new arrays (fresh large arrays cost page faults on every product)."""
    held = getattr(_scratch, "pair", None)
    _scratch.pair = None
    if held is not None and held[0].shape[0] == m:
        return held
    return np.empty(m, dtype=np.complex128), np.empty(m, dtype=np.complex128)


def _forward(u: np.ndarray, t: Tables) -> None:
    if t.rows == 1:
        tf.c2c_inplace(u, 0, True)
        return
    u2 = u.reshape(t.rows, t.cols)
    tf.c2c_inplace(u2, 0, True)
    u2 *= t.forward
    tf.c2c_inplace(u2, 1, True)


def real_product(a: np.ndarray, b: np.ndarray, n_fft: int, keep: int,
                 passes=None) -> np.ndarray:
    """The first ``keep`` entries of the length-``n_fft`` negacyclic product of 1-D float64
    ``a`` and ``b`` (their linear product when ``n1 + n2 - 1 <= n_fft``); ``n_fft`` even.

    One thread; float64 only.  See the module notes for the method and its error.  NaN, inf
    and overflow spread as in any FFT product, without warnings (the caller's policy decides).
    ``passes``: a module with compiled twist / untwist passes computing the same expressions
    per element (:mod:`polyconv.engines._kernels_negacyclic`; the caller checked they give the
    same bits), or None for the numpy passes.
    """
    with np.errstate(all="ignore"):
        return _real_product(a, b, tables(n_fft // 2), keep, passes)


def _twist(a: np.ndarray, t: Tables, u: np.ndarray, twist: np.ndarray, passes) -> np.ndarray:
    if passes is None or not a.flags.c_contiguous:
        return _twisted(a, t, u, twist)
    if t.rows == 1:
        passes.twist_unsplit(a, twist, u)
    else:
        passes.twist_split(a, twist, u.reshape(t.rows, t.cols))
    return u


def _real_product(a: np.ndarray, b: np.ndarray, t: Tables, keep: int,
                  passes=None) -> np.ndarray:
    work = _work_arrays(t.m)
    u = _twist(a, t, work[0], t.twist, passes)
    _forward(u, t)
    v = _twist(b, t, work[1], t.twist_b, passes)  # (scaled by 1/m)
    _forward(v, t)
    u *= v
    m = t.m
    out = np.empty(keep, dtype=np.float64)
    low = min(keep, m)
    if passes is not None:
        if t.rows == 1:
            tf.c2c_inplace(u, 0, True)  # (the numpy branch below says why)
            passes.untwist_unsplit(u, t.twist, out)
        else:
            u2 = u.reshape(t.rows, t.cols)
            tf.c2c_inplace(u2, 1, False)
            u2 *= t.inverse
            tf.c2c_inplace(u2, 0, False)
            passes.untwist_split(u2, t.untwist, out)
    elif t.rows == 1:
        # the inverse as a forward transform: F_k = w_(-k), and w_j zeta^-j = -i F_(m-j)
        # zeta^(m-j) for j >= 1 (zeta^-m = -i), so one product with the forward twist gives
        # G = F zeta^k, and c_lo[j] = Im G[m-j], c_hi[j] = -Re G[m-j] (c_lo[0] + i c_hi[0] = G[0])
        tf.c2c_inplace(u, 0, True)
        u *= t.twist
        out[0] = u[0].real
        out[1:low] = u.imag[m - 1: m - low: -1]
        if keep > m:
            out[m] = u[0].imag
            np.negative(u.real[m - 1: 2 * m - keep: -1], out=out[m + 1:])
    else:
        u2 = u.reshape(t.rows, t.cols)
        tf.c2c_inplace(u2, 1, False)
        u2 *= t.inverse
        tf.c2c_inplace(u2, 0, False)
        u2 *= t.untwist[:, None]
        out[:low] = u.real[:low]
        if keep > m:
            out[m:] = u.imag[: keep - m]
    if m <= SCRATCH_POINTS:
        _scratch.pair = work
    return out


def _agrees() -> bool:
    """:func:`real_product` against numpy.convolve (an independent reference), split and not,
    folded and not (any failure: the fft engine keeps the fused real product)."""
    try:
        x = np.arange(1.0, 41.0) ** 0.5
        y = np.cos(np.arange(25.0))
        ok = True
        for n_fft, rows in ((64, 1), (64, 2), (96, 1)):
            _cache[n_fft // 2] = Tables(n_fft // 2, rows)
            ok &= np.allclose(real_product(x, y, n_fft, 64), np.convolve(x, y))
            ok &= np.allclose(real_product(x[:20], y[:9], n_fft, 28), np.convolve(x[:20], y[:9]))
        _cache.clear()
        return bool(ok)
    except Exception:  # noqa: BLE001 - any failure means: not used
        _cache.clear()
        return False


def _certifiable() -> bool:
    from .bounds import TWIDDLE_CERTIFIED, TWIDDLE_ERROR

    return not TWIDDLE_CERTIFIED or fits_percival(TWIDDLE_ERROR)


#: Whether the fft engine may use :func:`real_product`: ducc0 runs (the lengths and splits were
#: measured with it), long double is 80-bit, Percival's bound covers it (module notes) and it
#: passed its self-test.
USABLE = tf.LIBRARY == "ducc0" and LONG_DOUBLE_OK and _certifiable() and _agrees()
#: Real transform lengths ``N`` it is used for (measured faster than the fused real product of
#: ducc0 from 2^12 on: at 2^12, 33.6 us with the numpy passes and 28.4 us with the compiled ones
#: against 36.2 us, CPU time, 2026-12-03; at 2^11 slower, 20.7 against 18.7 us); above 2^21 its
#: tables would take over 64 MiB.
FROM, UP_TO = 2**12, 2**21


def eligible(n_fft: int) -> bool:
    """Whether :func:`real_product` is usable here at real length ``n_fft`` (even, in
    ``[FROM, UP_TO]``)."""
    return USABLE and not n_fft & 1 and FROM <= n_fft <= UP_TO


def ready(n_fft: int) -> bool:
    """Whether the fft engine runs :func:`real_product` at real length ``n_fft``: even and in
    ``[FROM, UP_TO]`` (a choice by length alone, so a product's last bits do not depend on
    what ran before), and the memory budget grants the tables eight times over.  The tables
    are made on first use (0.2-35 ms at ``N = 2^13 .. 2^21``, 1-3x one product there)."""
    if not eligible(n_fft):
        return False
    if n_fft // 2 in _cache:
        return True
    from .budget import memory_budget

    return 8 * 40 * (n_fft // 2) <= memory_budget()
