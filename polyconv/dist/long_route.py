"""Short transform routes and small products run in extended precision, with a-posteriori bounds.

On x86 ``numpy.longdouble`` is the 80-bit extended format (64-bit significand, unit roundoff
``u_L = 2^-64``, 2048 times below binary64's ``u = 2^-53``), and scipy.fft (pocketfft) transforms
it natively.  A route computed in it has an *a-priori* bound ``E_L`` (the same theorems as the
float route, :mod:`polyconv.dist.accuracy`, evaluated at ``u_L``) about 2000 times below the
float route's; rounding its result ``g_L`` to float64 then gives the returned ``g`` with

    ``|g_k - g_k(exact)| <= |g_k - g_L,k| + E_L,k``         (triangle inequality),

where ``|g_k - g_L,k|`` is known exactly (the difference of a longdouble and its rounding to
float64 is itself a longdouble, so it is computed without error).  Where ``g_L,k < 0`` and the
exact value is known to be ``>= 0`` the returned 0 errs by at most ``E_L,k``.  Hence the returned
probabilities carry per-point bounds that are ``u |g_k|`` plus a small ``E_L``: for exact inputs
(dyadic probabilities) and short lattices this is 100-1000 times below the float route's
worst-case constants.  The signed cumulative sums of ``g - g_L`` are computed too (in longdouble:
``sum_{j <= k}`` errs by at most ``(k + 1) u_L sum |g_j - g_L,j|``, Higham, *Accuracy and
Stability of Numerical Algorithms*, 2nd ed., section 4.2), so cdf bounds do not add rounding
errors that cancel.

Cost: a longdouble transform measured 2.3 times a float64 one at ``2^20`` points (scipy 1.17.1
here); it runs only up to :data:`LONG_MAX_FFT` points (larger grids keep the float route and
its a-priori bound) and where :func:`available` says the format is wider than float64.

Assumption (like the float route's, :mod:`polyconv.numerics.bounds`): pocketfft's longdouble
twiddles err by at most :data:`TWIDDLE_ERROR_LONG`; measured here from unit-impulse responses
against mpmath (worst 5.02 ``u_L`` over complex lengths 1000 .. 65536, 5-smooth and powers of
two: ``tests/dist/test_long_route.py`` rechecks it), not proven.
"""

from __future__ import annotations

import math

import numpy as np

from .enclosure import Enclosure

L = np.longdouble
UNIT_ROUNDOFF_LONG = float(np.finfo(L).eps) / 2
"""Unit roundoff ``u_L`` of numpy.longdouble (``2^-64`` on x86)."""

TWIDDLE_ERROR_LONG = 6 * UNIT_ROUNDOFF_LONG
"""Assumed twiddle error of pocketfft's longdouble transforms (measured 5.02 ``u_L`` at worst,
rounded up as for float64 in :mod:`polyconv.numerics.bounds`)."""

LONG_MAX_FFT = 1 << 16
"""Transform lengths up to which compound and n-fold routes run in longdouble."""

LONG_MAX_PRODUCT = 1 << 20
"""``len(a) * len(b)`` up to which an independent sum is also computed directly in longdouble."""

_U = 2.0 ** -53
_UL = UNIT_ROUNDOFF_LONG


def available() -> bool:
    """True when numpy.longdouble has a significand of at least 64 bits (x86 extended)."""
    return np.finfo(L).nmant >= 63


def transform_applies(n_fft: int, long_ok: bool) -> bool:
    """Run a transform route of length ``n_fft`` in longdouble?"""
    return long_ok and n_fft <= LONG_MAX_FFT and available()


def rfft(x: np.ndarray, n: int) -> np.ndarray:
    """Real forward transform of ``x`` zero-padded to ``n``, in longdouble (scipy.fft)."""
    from scipy import fft as sfft

    return sfft.rfft(np.asarray(x, dtype=L), n)


def irfft(spec: np.ndarray, n: int) -> np.ndarray:
    """Inverse real transform of length ``n`` in longdouble (scipy.fft, scaled by ``1/n``)."""
    from scipy import fft as sfft

    return sfft.irfft(spec, n)


def rounded(g_long: np.ndarray, apriori: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Round a longdouble result to float64 and bound each returned entry.

    Parameters
    ----------
    g_long : numpy.ndarray (longdouble)
        The extended-precision result, approximating exact values known to be ``>= 0``.
    apriori : numpy.ndarray
        ``E_L,k``: a bound of ``|g_long_k - exact_k|``.

    Returns
    -------
    (g, errors, cumulative)
        ``g`` = ``max(g_long, 0)`` rounded to float64; ``errors_k`` a bound of
        ``|g_k - exact_k|`` (module docstring, rounded up); ``cumulative`` a bound of
        ``max_k |sum_{j <= k} (g_j - exact_j)|`` (signed sums of ``g - g_long`` plus the
        running sum of ``E_L``).
    """
    pos = np.maximum(g_long, L(0))
    g = pos.astype(float)
    d = np.where(g_long < 0, L(0), g.astype(L) - pos)  # exact: no rounding in the difference
    ad = np.abs(d)
    run = np.cumsum(d)
    total_abs = float(np.sum(ad))
    n = g.size
    apriori = np.asarray(apriori, dtype=float)
    errors = (ad.astype(float) + apriori) * (1 + 4 * _U)
    signed = float(np.max(np.abs(run))) if n else 0.0
    cumulative = (signed + (n + 2) * _UL * total_abs + float(np.sum(apriori))) * (1 + 4 * _U)
    return g, errors, cumulative


def convolve(a: np.ndarray, b: np.ndarray) -> Enclosure:
    """``a * b`` of two non-negative float vectors computed directly in longdouble, with its
    radius: an :class:`~polyconv.dist.enclosure.Enclosure` of the exact product.

    Each longdouble output is a sum of at most ``m = min(len a, len b)`` products of
    non-negative numbers, so it errs by at most ``gamma_m (a * b)_k`` with ``gamma_m =
    m u_L / (1 - m u_L)`` (Higham, section 3.1, the dot-product bound; the product of two
    float64 numbers is exact in longdouble, which only helps), and the exact ``(a * b)_k`` is
    at most ``g_L,k / (1 - gamma_m)``.
    """
    g_long = np.convolve(np.asarray(a, dtype=L), np.asarray(b, dtype=L))
    m = min(a.size, b.size)
    gamma = m * _UL / (1 - m * _UL)
    radius = g_long.astype(float) * (gamma / (1 - gamma)) * (1 + 4 * _U) + 1e-320
    return Enclosure(g_long, radius)


def power(f: np.ndarray, n: int) -> Enclosure | None:
    """``f^{*n}`` of a non-negative float vector by binary powering of direct longdouble
    products, with its radius, or None when the products would cost more than
    ``4 LONG_MAX_PRODUCT`` multiplications.

    Non-negative data: a computed product of factors with componentwise relative errors
    ``rho_a``, ``rho_b`` is within ``(1 + rho_a)(1 + rho_b)(1 + gamma_m) - 1`` of the exact one,
    relative, componentwise (each output is a sum of non-negative terms; :func:`convolve`), so
    the relative bound composes along the powering and the radius is ``rho / (1 - rho)`` times
    the longdouble value.
    """
    cost, size, k = 0, f.size, n
    while k > 1:  # squarings and multiplications, in the order below
        cost += size * size
        size = 2 * size - 1
        k >>= 1
    if cost + n * f.size * (n * f.size) > 4 * LONG_MAX_PRODUCT or not available():
        return None
    result, rho_r = None, 0.0
    base, rho_b = np.asarray(f, dtype=L), 0.0
    while n:
        if n & 1:
            if result is None:
                result, rho_r = base, rho_b
            else:
                m = min(result.size, base.size)
                result = np.convolve(result, base)
                rho_r = _compose(rho_r, rho_b, m)
        n >>= 1
        if n:
            m = base.size
            base = np.convolve(base, base)
            rho_b = _compose(rho_b, rho_b, m)
    rho = rho_r * (1 + 1e-12)
    radius = result.astype(float) * (rho / (1 - rho)) * (1 + 4 * _U) + 1e-320
    return Enclosure(result, radius)


def _compose(rho_a: float, rho_b: float, m: int) -> float:
    """``(1 + rho_a)(1 + rho_b)(1 + gamma_m) - 1`` without losing the tiny terms to float64's
    ``1 + x`` (log1p / expm1, each within an ulp; the margin ``1e-12`` covers them)."""
    gamma = m * _UL / (1 - m * _UL)
    return math.expm1(math.log1p(rho_a) + math.log1p(rho_b) + math.log1p(gamma)) * (1 + 1e-12)


def l2_norm(errors: np.ndarray) -> float:
    """``||errors||_2`` of non-negative floats, rounded up (``n u`` for the sum of squares)."""
    n = errors.size
    return math.sqrt(float(np.sum(errors * errors)) * (1 + (n + 4) * _U)) * (1 + 2 * _U)
