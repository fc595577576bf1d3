"""Exact integer results of the series functions: computed modulo a prime, lifted, proved.

See :mod:`polyconv.algebra.series_functions` (module docstring) for the method and the bound
on ``B``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from fractions import Fraction

import gmpy2
import numpy as np

from ..numerics.limits import max_abs
from .checks import _check_chain
from .division import _symmetric
from .rings import _fit, _Integers, _Modular

__all__ = ["lift", "proves_exp", "proves_log", "proves_power"]


def lift(compute: Callable, proves: Callable, x: np.ndarray, n: int, lead: int, r,
          what: str) -> np.ndarray:
    """Exact integer result of ``compute`` (run mod primes) proved by ``proves`` (see the module
    docstring); ``lead`` bounds ``|b_0|`` and ``r`` is the exponent (0 for exp/log)."""
    for k in sorted({min(n, 32), n}):
        top = max_abs(x[1:k]) if k > 1 else 0
        scale = max(abs(int(x[0])), 1)
        growth = math.log2(1 + top / scale if lead else 1 + top)
        extra = 0.0
        if r:
            s = 2 * abs(float(r))
            extra = (math.lgamma(s + k) - math.lgamma(k + 1) - math.lgamma(s)) / math.log(2)
        limit = int(math.log2(max(lead, 1)) + (k - 1) * growth + extra) + 4
        bits = 64
        while True:
            bits = min(bits, max(limit, 64))
            ring_p = _Modular(int(gmpy2.next_prime(2**bits)))
            _check_chain(ring_p, k, bits, f"{what}, computed modulo a {bits}-bit prime")
            candidate = _symmetric(compute(ring_p, k), ring_p.modulus)
            if proves(candidate, k):
                break
            if bits >= limit:
                raise ValueError(f"{what} does not have integer coefficients (its first {k} do "
                                 "not all exist over the integers); pass float coefficients or "
                                 "a modulus")
            bits *= 2
    return _Integers().to_result(candidate)


def _int_derivative(x: np.ndarray) -> np.ndarray:
    k = np.arange(1, max(x.shape[0], 2), dtype=np.int64)
    if x.shape[0] <= 1:
        return np.zeros(1, dtype=np.int64)
    if x.dtype == np.int64 and max_abs(x) * x.shape[0] < 2**62:
        return x[1:] * k
    return x[1:].astype(object) * k.astype(object)


def _equal(x: np.ndarray, y: np.ndarray, n: int) -> bool:
    pairs = zip(_fit(x, n).tolist(), _fit(y, n).tolist(), strict=True)
    return all(int(p) == int(q) for p, q in pairs)


def proves_exp(a: np.ndarray, b: np.ndarray) -> bool:
    n = b.shape[0]
    rhs = _Integers().mul(_int_derivative(a), b, length=n - 1) if n > 1 else b[:0]
    return int(b[0]) == 1 and _equal(_int_derivative(b), rhs, n - 1)


def proves_log(a: np.ndarray, b: np.ndarray) -> bool:
    n = b.shape[0]
    lhs = _Integers().mul(_fit(a, n), _int_derivative(b), length=n - 1) if n > 1 else b[:0]
    return int(b[0]) == 0 and _equal(lhs, _int_derivative(a), n - 1)


def proves_power(a: np.ndarray, b: np.ndarray, r: Fraction, lead: int) -> bool:
    """``b_0 = lead`` and ``q a b' = p a' b`` (``r = p/q``), i.e. ``b = lead (a/a_0)^r``."""
    n = b.shape[0]
    if int(b[0]) != lead:
        return False
    if n == 1:
        return True
    ints = _Integers()
    lhs = ints.scale(ints.mul(_fit(a, n), _int_derivative(b), length=n - 1), r.denominator)
    rhs = ints.scale(ints.mul(_int_derivative(a), b, length=n - 1), r.numerator)
    return _equal(lhs, rhs, n - 1)

