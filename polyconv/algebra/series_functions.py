"""Power series functions on top of the fast products: exp, log, sqrt and rational powers.

Each function returns the first ``length`` coefficients (lowest degree first) and follows the
arithmetic of its input as :mod:`polyconv.algebra` does:

* floats: float64 (complex128 for complex input);
* ``modulus=m`` (integer input): residues in ``[0, m)``;
* integers without a modulus: exact, *when the result has integer coefficients* (``sqrt(1-4x)``,
  ``(1-4x)^(-1/2)``, ``log`` or ``exp`` of suitable series); otherwise a ValueError says so.

The Newton kernels are in :mod:`polyconv.algebra.series_newton` (formulas and sources there);
costs are in ``U(n)``, the transform work of one full ``n x n`` product, as measured by
:func:`polyconv.algebra.counting_products` in ``bench/series_bench.py`` (bench/RESULTS.md).

Exact integers are computed modulo a prime ``P > 2^B`` and lifted to ``(-P/2, P/2)``; the lift
is then *proved* by an exact identity over the integers (``b' = a' b`` for ``exp``, ``a b' = a'``
for ``log``, ``q a b' = p a' b`` for ``a^(p/q)`` (``sqrt``: ``r = 1/2``), each with the constant
term), which together with the constant term determines the series uniquely.  ``B`` starts at 64
and doubles up to an a-priori bound on the size of an integral result (majorant series: with
``A = max_(k>=1) |a_k| / |a_0|`` every coefficient is at most ``|b_0| (1 + A)^k``, times
``C(2|r| + k - 1, k)`` for the power ``r``; Cauchy's method of majorants, e.g. Henrici, *Applied
and Computational Complex Analysis* vol. 1, section 1.3); a result that fails the identity at
that size does not have integer coefficients.  The first ``min(length, 32)`` coefficients are
tried first, so most non-integral results are refused at once.
"""

from __future__ import annotations

import math
import numbers
from fractions import Fraction

import numpy as np

from . import series_newton as sn
from .checks import _check_chain, _check_length, _check_modulus, _sequence
from .products import power
from .rings import _fit, _Floats, _Integers, _Modular, _Ring, _ring_for
from .series import inverse_series
from .series_exact import lift, proves_exp, proves_log, proves_power
from .series_roots import check_units, constant_root

__all__ = ["exp_series", "log_series", "sqrt_series", "power_series"]


# ----------------------------------------------------------------------------- public functions


def exp_series(a, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of ``exp(a)``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first; only the first ``length`` matter.  ``a[0]`` must be 0
        modulo ``modulus`` and for exact integers; floats allow any ``a[0]``
        (``exp(a) = e^(a[0]) exp(a - a[0])``).
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only.  ``exp`` divides coefficient ``k`` by ``k``, so every ``k < length``
        must be a unit: the smallest prime factor of ``modulus`` must be ``>= length``.

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients: float64/complex128, residues in ``[0, modulus)``, or exact
        integers (int64 when they fit, else Python ints).

    Raises
    ------
    ValueError
        For a bad ``a[0]``, a ``length`` the modulus cannot serve, a result without integer
        coefficients (integer ``a`` without modulus), or a bad argument.
    TypeError
        For non-numeric ``a`` or wrongly typed ``length``/``modulus``.

    Notes
    -----
    Newton iteration ``f <- f (1 + a - log f)`` with the inverse of ``f`` carried along at half
    precision (Brent 1976; Bernstein 2004): about ``4 U(n)``, measured in bench/series_bench.py.
    Integers: see the module docstring (computed mod a prime, proved by ``b' = a' b``).

    Examples
    --------
    >>> from polyconv.algebra.series_functions import exp_series
    >>> exp_series([0, 1], 5, modulus=101).tolist()   # 1, 1, 1/2, 1/6, 1/24 mod 101
    [1, 1, 51, 17, 80]
    """
    arr, ring, n = _prepare(a, length, modulus, units="exp_series")
    x = ring.convert(arr[:n])
    if isinstance(ring, _Floats):
        c = x[0]
        y = x.copy()
        y[0] = 0
        return np.exp(c) * sn.exp_newton(ring, y, n, sn.unit_inverses(ring, n))
    if not ring.is_zero(x[0]):
        where = f"0 modulo {ring.modulus}" if ring.modulus else "0 for integer coefficients"
        raise ValueError(f"a[0] must be {where} (exp(a[0]) is not an element of the ring); got "
                         f"a[0] = {x[0]}; pass float coefficients for exp(a[0]) != 1")
    if isinstance(ring, _Modular):
        return sn.exp_newton(ring, x, n, sn.unit_inverses(ring, n))
    return lift(lambda r, k: sn.exp_newton(r, r.convert(x[:k]), k, sn.unit_inverses(r, k)),
                 lambda b, k: proves_exp(x[:k], b), x, n, 0, 0, f"exp(a) (length={n})")


def log_series(a, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of ``log(a)``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first.  ``a[0]`` must be 1 modulo ``modulus`` and for exact
        integers; floats allow any non-zero ``a[0]`` (``log(a[0]) + log(a / a[0])``; a negative
        real ``a[0]`` needs complex input, giving the principal branch).
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only; its smallest prime factor must be ``>= length`` (``log`` divides by
        ``k < length``).

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients, constant term ``log(a[0])`` (0 unless floats).

    Raises
    ------
    ValueError, TypeError
        As :func:`exp_series`, for ``a[0]`` and the other arguments.

    Notes
    -----
    ``log a = integral(a' / a)``: one division (:func:`polyconv.algebra.series_newton.divide`,
    Newton inverse to half precision with the Karp-Markstein last step), about ``2.5 U(n)``.

    Examples
    --------
    >>> from polyconv.algebra.series_functions import log_series
    >>> log_series([1.0, 1.0], 5).round(12).tolist()   # log(1 + x)
    [0.0, 1.0, -0.5, 0.333333333333, -0.25]
    """
    arr, ring, n = _prepare(a, length, modulus, units="log_series")
    x = ring.convert(arr[:n])
    if isinstance(ring, _Floats):
        c = x[0]
        if c == 0:
            raise ValueError("a[0] must be non-zero: log(a) is not a power series when a[0] = 0")
        if ring.dtype.kind == "f" and c < 0:
            raise ValueError(f"a[0] = {c} is negative, so log(a) is complex; pass complex "
                             "coefficients (principal branch) or a positive a[0]")
        out = _log(ring, x / c, n)
        out[0] = np.log(c)
        return out
    if not ring.is_zero(int(x[0]) - 1):
        where = f"1 modulo {ring.modulus}" if ring.modulus else "1 for integer coefficients"
        raise ValueError(f"a[0] must be {where} (log(a[0]) is not an element of the ring); got "
                         f"a[0] = {x[0]}")
    if isinstance(ring, _Modular):
        return _log(ring, x, n)
    return lift(lambda r, k: _log(r, r.convert(x[:k]), k), lambda b, k: proves_log(x[:k], b),
                 x, n, 0, 0, f"log(a) (length={n})")


def sqrt_series(a, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of a square root of ``a``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first.  The first non-zero coefficient must sit at an even
        degree ``2v`` and be a square: a perfect square for exact integers, a quadratic residue
        mod a prime ``modulus`` (any modulus below ``2^20``), non-negative for real floats
        (complex input takes the principal root).  ``2 sqrt(a[2v])`` must be a unit.
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only.

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients of ``s`` with ``s^2 = a mod x^length``; the root with
        ``s[v] = +sqrt(a[2v])`` (integers, floats) or the smaller residue of the two (modulus).
        ``a = 0`` gives zeros.

    Raises
    ------
    ValueError, TypeError
        Naming ``a`` (its leading coefficient), ``length`` or ``modulus``.

    Notes
    -----
    Newton ``s <- s + (a - s^2) / (2 s)`` with ``1/s`` carried along at half precision, about
    ``3 U(n)`` (:func:`polyconv.algebra.series_newton.sqrt_newton`).

    Examples
    --------
    >>> from polyconv.algebra.series_functions import sqrt_series
    >>> sqrt_series([1, -4], 6).tolist()          # 1 - 2 x (1 + x + 2x^2 + 5x^3 + ...)
    [1, -2, -2, -4, -10, -28]
    """
    arr, ring, n = _prepare(a, length, modulus)
    x = ring.convert(arr[: 2 * n])  # a's coefficients up to degree n + v matter
    v = _valuation(ring, x)
    if v is None:
        return ring.to_result(ring.zeros(n))
    if v % 2:
        raise ValueError(f"a has its first non-zero coefficient at degree {v}, which is odd, so "
                         "a has no square root as a power series")
    shift, room = v // 2, n - v // 2
    u = x[v: v + room]
    root = constant_root(ring, u[0], 2, f"a[{v}]")
    if isinstance(ring, _Integers):
        body = lift(lambda r, k: sn.sqrt_newton(r, r.convert(u[:k]), k, root),
                     lambda b, k: proves_power(u[:k], b, Fraction(1, 2), root),
                     u, room, abs(root), Fraction(1, 2), f"sqrt(a) (length={n})")
    else:
        if ring.unit_inverse(2 * root if ring.modulus is None else 2 * root % ring.modulus) is None:
            raise ValueError(f"2 sqrt(a[{v}]) = {2 * root} is not invertible modulo "
                             f"{ring.modulus}: the square root cannot be lifted")
        body = sn.sqrt_newton(ring, _fit(u, room), room, root)
    return ring.to_result(_shifted(ring, body, shift, n))


def power_series(a, exponent, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of ``a^r`` for a rational (or, for floats, real) ``r``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first.  With first non-zero coefficient at degree ``v``,
        ``v r`` must be a non-negative integer; ``a[v]^r`` must exist in the ring (an exact
        ``q``-th power for integers, a ``q``-th power residue mod ``modulus``; positive for real
        floats and a non-integer ``r``).
    exponent : int, fractions.Fraction or float
        ``r``; a float only for float ``a``.  Integers ``r >= 0`` use binary powering
        (:func:`polyconv.algebra.power`), negative ones an inverse first.
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only; non-integer ``r = p/q`` needs ``q`` coprime to it and its smallest
        prime factor ``>= length``.

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients of ``a^r`` (the branch with constant term ``a[v]^r``: principal
        for floats, the root found for a modulus, the positive root for integers).

    Notes
    -----
    ``a^r = a_v^r x^(v r) exp(r log(a / (a_v x^v)))``: about ``6.5 U(n)`` (log then exp).

    Examples
    --------
    >>> from polyconv.algebra.series_functions import power_series
    >>> from fractions import Fraction
    >>> power_series([1, -4], Fraction(-1, 2), 5).tolist()   # central binomial coefficients
    [1, 2, 6, 20, 70]
    """
    arr, ring, n = _prepare(a, length, modulus)
    r = _check_exponent(exponent, ring)
    if isinstance(r, Fraction) and r.denominator == 1:
        k = int(r)
        if k >= 0:
            return power(arr, k, modulus=modulus, length=n)
        return power(inverse_series(arr, n, modulus=modulus), -k, modulus=modulus, length=n)
    x = ring.convert(arr[: 2 * n])  # a's coefficients up to degree n + v matter
    v = _valuation(ring, x)
    if v is None:
        if r > 0:
            return ring.to_result(ring.zeros(n))
        raise ValueError(f"a is zero, so a^({exponent}) is not a power series")
    if v and (r < 0 or (isinstance(r, Fraction) and (v * r).denominator != 1)):
        raise ValueError(f"a has its first non-zero coefficient at degree {v}, so a^({exponent}) "
                         f"would start at degree {v * r}: not a power series")
    shift = int(v * r)
    room = n - shift
    if room <= 0:
        return ring.to_result(ring.zeros(n))
    u = x[v: v + room]
    if isinstance(ring, _Floats):
        c = u[0]
        if ring.dtype.kind == "f" and c < 0:
            raise ValueError(f"a[{v}] = {c} is negative, so a^({exponent}) is complex; pass "
                             "complex coefficients (principal branch)")
        body = (c ** r) * _power_core(ring, u / c, float(r), room)
        return _shifted(ring, body, shift, n)
    q_root = constant_root(ring, u[0], r.denominator, f"a[{v}]")
    if isinstance(ring, _Modular):
        m = ring.modulus
        if math.gcd(r.denominator, m) != 1:
            raise ValueError(f"exponent {exponent}: its denominator {r.denominator} is not "
                             f"invertible modulo {m}")
        check_units(m, room - 1, f"power_series(a, {exponent}, length={n})")
        lead = pow(q_root, r.numerator, m)
        scaled = ring.scale(u, ring.unit_inverse(u[0]))
        r_mod = r.numerator * pow(r.denominator, -1, m) % m
        body = ring.scale(_power_core(ring, scaled, r_mod, room), lead)
        return ring.to_result(_shifted(ring, body, shift, n))
    if r.numerator < 0 and abs(q_root) != 1:
        raise ValueError(f"a[{v}]^({exponent}) = {q_root}^{r.numerator} is not an integer, so "
                         f"a^({exponent}) does not have integer coefficients")
    lead = q_root ** r.numerator if r.numerator >= 0 else q_root ** (-r.numerator)

    def compute(ring_p: _Modular, k: int) -> np.ndarray:
        m = ring_p.modulus
        w = ring_p.convert(u[:k])
        w = ring_p.scale(w, ring_p.unit_inverse(w[0]))
        r_mod = r.numerator * pow(r.denominator, -1, m) % m
        return ring_p.scale(_power_core(ring_p, w, r_mod, k), lead)

    body = lift(compute, lambda b, k: proves_power(u[:k], b, r, lead), u, room, abs(lead), r,
                 f"a^({exponent}) (length={n})")
    return ring.to_result(_shifted(ring, body, shift, n))


# ----------------------------------------------------------------------------- kernels


def _log(ring: _Ring, x: np.ndarray, n: int) -> np.ndarray:
    """``log(x) mod x^n`` for ``x[0] = 1``: ``integral(x' / x)``."""
    if n == 1:
        return ring.zeros(1)
    quotient = sn.divide(ring, sn.derivative(ring, _fit(x, n)), _fit(x, n), n - 1,
                         ring.unit_inverse(x[0]))
    return sn.integral(ring, quotient, sn.unit_inverses(ring, n - 1))


def _power_core(ring: _Ring, u: np.ndarray, r, n: int) -> np.ndarray:
    """``u^r mod x^n`` for ``u[0] = 1`` as ``exp(r log u)``."""
    logged = ring.scale(_log(ring, _fit(u, n), n), r)
    return sn.exp_newton(ring, logged, n, sn.unit_inverses(ring, n))


# ----------------------------------------------------------------------------- validation


def _prepare(a, length, modulus, units: str | None = None) -> tuple[np.ndarray, _Ring, int]:
    """Checked ``a``, its ring and the length; with ``units`` (the caller's name) also that
    ``1..length-1`` are units modulo the modulus (exp and log divide by them)."""
    arr, kind = _sequence(a, "a")
    n = _check_length(length, required=True)
    m = _check_modulus(modulus, kind, "a holds")
    ring = _ring_for(kind, m)
    _check_chain(ring, n, 0, f"series of length={n}")
    if units is not None and isinstance(ring, _Modular):
        check_units(ring.modulus, n - 1, f"{units}(a, length={n})")
    return arr, ring, n


def _check_exponent(exponent, ring: _Ring):
    if isinstance(exponent, bool) or not isinstance(exponent, numbers.Real):
        raise TypeError(f"exponent must be an int, a fractions.Fraction or (for float a) a "
                        f"float; got {type(exponent).__name__} {exponent!r}")
    if isinstance(exponent, numbers.Rational):
        return Fraction(int(exponent.numerator), int(exponent.denominator))
    if not math.isfinite(exponent):
        raise ValueError(f"exponent must be finite; got {exponent}")
    if float(exponent).is_integer():
        return Fraction(int(exponent))
    if not isinstance(ring, _Floats):
        raise TypeError(f"exponent={exponent} is a float: with integer coefficients or a modulus "
                        "pass an exact rational, e.g. fractions.Fraction(1, 3)")
    return float(exponent)


def _valuation(ring: _Ring, x: np.ndarray) -> int | None:
    """The degree of the first non-zero coefficient (None for zero)."""
    if x.dtype != object:
        nonzero = np.flatnonzero(x)
        return int(nonzero[0]) if nonzero.size else None
    for i, value in enumerate(x.tolist()):
        if not ring.is_zero(value):
            return i
    return None


def _shifted(ring: _Ring, body: np.ndarray, shift: int, n: int) -> np.ndarray:
    if shift == 0:
        return body[:n]
    out = ring.zeros(n).astype(body.dtype)
    out[shift:] = body[: n - shift]
    return out
