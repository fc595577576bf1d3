"""Exact quotients over the integers whose coefficients grow: the a-priori size bound, and the
quotient by halving with recurrence blocks.

* :func:`quotient_bits`: a bound on the quotient's coefficients from a root bound of the
  divisor (Fujiwara, Monatsh. Math. 1916, refined by bisection);
* :func:`quotient_halving`: ``rev(a) / rev(b) mod x^qlen`` exactly, for a monic ``b``: blocks of
  up to :data:`_HALVING_BASE` terms by the coefficient recurrence ``Q_k = A_k - sum_i B_i
  Q_(k-i)`` (products of a narrow by a wide integer, in GMP at their true sizes), longer ones
  halved, the carry between halves one product (von zur Gathen & Gerhard, *Modern Computer
  Algebra*, 3rd ed., section 9.1, recursive division);
* :func:`series_inverse`: ``1/a mod x^n`` over the integers the same way (the quotient of
  ``x^(n-1+d)`` by the reversal of ``a``: its recurrence is the one of MCA Algorithm 9.3's
  base case), used by :func:`polyconv.algebra.inverse_series` for exact integers.
"""

from __future__ import annotations

import operator

import gmpy2
import numpy as np

from ..numerics.limits import max_abs
from .rings import _as_objects, _Integers

#: Reversed quotients at most this long are solved by their recurrence (the blocks' products of
#: a narrow by a wide integer cost GMP their true sizes, where a Kronecker product pads both to
#: the widest slot).  Measured, poly_divmod of 100-bit operands / flint, interleaved, best of
#: rounds (busy machine): block 32, 192, 384, whole: 300/121 1.98, 1.16, 1.16, 1.15; 600/241
#: 1.69, 1.16, 0.88, 0.73; 1200/481 2.04, 1.68, 1.18, 1.54 (a second run: 0.82, 0.83 for 192,
#: 384); inverse_series over Z at 256 terms, 16/64-bit: block 32 7.8/49 ms, 256 3.0/17 ms.
_HALVING_BASE = 256


def quotient_bits(a: np.ndarray, b: np.ndarray, limit: int | None = None) -> int:
    """A bound ``beta`` with ``|q_k| < 2^beta`` for the quotient of ``a`` by ``b`` (leading
    coefficient ``+-1``).

    With ``rev(b) = +-(1 + c_1 x + ... + c_d x^d)`` the reversed quotient is
    ``rev(a) h mod x^qlen`` with ``h = 1 / (1 + c_1 x + ...)``, whose coefficients satisfy
    ``|h_k| <= sum_i |c_i| |h_(k-i)|``.  For any ``rho >= 1`` with ``sum_i |c_i| rho^-i <= 1``
    this gives ``|h_k| <= rho^k`` by induction, hence ``|q_k| <= ||a||_1 rho^(qlen - 1)``.
    ``rho = 2 max_i |c_i|^(1/i)`` qualifies (each term is at most ``2^-i``; Fujiwara's root
    bound, Monatsh. Math. 1916); the smallest qualifying ``rho`` is found by bisection on
    ``log2 rho`` between ``max_i log2|c_i| / i`` and that, each test keeping a relative margin
    of ``2^-20`` over float rounding.  With ``limit``, the bisection is skipped when even its
    lower end would give more than ``limit`` bits: the (valid, looser) Fujiwara bound is
    returned then.
    """
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    index, logs = _log2_coefficients(b[:d][::-1])  # i and log2|c_i| of the nonzero c_i
    r = 0.0
    norm_bits = max_abs(a).bit_length() + a.shape[0].bit_length()  # ||a||_1 <= n max|a|
    if index.size:
        low = float(np.max(logs / index))
        high = low + 1.0  # Fujiwara: sum <= 1 - 2^-d there
        steps = 0 if limit is not None and norm_bits + low * (qlen - 1) > limit else 40
        for _ in range(steps):
            mid = 0.5 * (low + high)
            if _sum_terms(logs, index, mid) <= 1.0 - 2.0**-20:
                high = mid
            else:
                low = mid
        r = max(high, 0.0)
    return norm_bits + int(np.ceil(r * (qlen - 1) * (1 + 2.0**-30))) + 1


def _log2_coefficients(c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Positions ``i >= 1`` and ``log2|c_(i-1)|`` (rounded up) of the nonzero entries of ``c``;
    vectorised for int64 (float64 log2 of values below 2^63, relative margin ``2^-40``)."""
    if c.dtype == np.int64:
        nonzero = np.flatnonzero(c)
        values = np.abs(c[nonzero].astype(np.float64))
        logs = np.log2(values)
        return (nonzero + 1).astype(np.float64), logs + np.abs(logs) * 2.0**-40 + 2.0**-40
    coeffs = [abs(int(v)) for v in c.tolist()]
    index = np.array([i for i, v in enumerate(coeffs, start=1) if v], dtype=np.float64)
    return index, np.array([_log2_up(v) for v in coeffs if v], dtype=np.float64)


def _log2_up(c: int) -> float:
    """``log2 c`` rounded up by a relative ``2^-40`` (exact powers of two stay close)."""
    bits = c.bit_length()
    if bits > 1000:  # float(c) would overflow: scale first
        return bits - 1000 + _log2_up(c >> (bits - 1000)) + 2.0**-40
    value = np.log2(float(c))
    return float(value + abs(value) * 2.0**-40 + 2.0**-40)


def _sum_terms(logs: np.ndarray, index: np.ndarray, r: float) -> float:
    """``sum_i 2^(log2|c_i| - i r)`` (the terms over ``rho = 2^r``), rounded up slightly."""
    return float(np.sum(np.exp2(np.minimum(logs - index * r, 60.0)))) * (1 + 2.0**-30)


def quotient_halving(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The exact quotient of ``a`` by a monic ``b`` (object arrays), from the reversed series
    ``Q = rev(a) / rev(b) mod x^qlen`` computed by halving: the low half ``Q_lo`` first, then
    ``Q_hi = (rev(a) - rev(b) Q_lo) / x^k / rev(b)`` (divide and conquer on the coefficient
    recurrence ``Q_k = A_k - sum_i B_i Q_(k-i)``, as in recursive division; von zur Gathen &
    Gerhard, *Modern Computer Algebra*, 3rd ed., section 9.1).  Each product multiplies the
    operands at their true sizes, so growing quotients cost what their coefficients hold."""
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    rev_b = np.fromiter(map(gmpy2.mpz, b[::-1].tolist()), dtype=object, count=d + 1)
    rev_q = _halve(a[::-1][:qlen].copy(), rev_b, qlen, _Integers())
    out = np.empty(qlen, dtype=object)
    out[:] = [int(v) for v in rev_q[::-1].tolist()]  # Python ints out, as everywhere
    return out


def _halve(top: np.ndarray, rev_b: np.ndarray, m: int, integers: _Integers) -> np.ndarray:
    """``top / rev_b mod x^m`` exactly (``rev_b[0] = 1``; gmpy2.mpz entries, whose products
    of a wide by a narrow integer the base-case recurrence does in GMP; object arrays of mpz
    are built by ``numpy.fromiter``: filling one from a list costs ~0.8 us per entry)."""
    if m <= _HALVING_BASE:
        tail = rev_b[1:m].tolist()
        q: list = []
        for v in top[:m].tolist():  # Q_k = A_k - sum_(i >= 1) B_i Q_(k-i)
            q.append(v - sum(map(operator.mul, tail, reversed(q))))
        return np.fromiter(q, dtype=object, count=m)
    k = m // 2
    low = _halve(top, rev_b, k, integers)
    carry = integers.mul(rev_b[:m], low, length=m)
    high = _halve(_as_objects(top[k:m]) - _as_objects(carry[k:m]), rev_b, m - k, integers)
    return np.concatenate([low, high])


def series_inverse(a: np.ndarray, n: int) -> np.ndarray:
    """``1/a mod x^n`` exactly for integer ``a`` with ``a[0] = +-1`` (Python ints out).

    ``b = 1/a`` satisfies ``b_k = -a_0 sum_(i=1..k) a_i b_(k-i)`` (the coefficient comparison in
    ``a b = 1``; Knuth, TAOCP vol. 2, 4.7); with ``a_0 = +-1``, ``b = a_0 / (a_0 a)`` and
    ``a_0 a`` has constant term 1, which is :func:`_halve` with the dividend ``1``."""
    sign = int(a[0])
    count = min(n, a.shape[0])
    rev_b = np.fromiter((gmpy2.mpz(int(v) * sign) for v in a[:count].tolist()), dtype=object,
                        count=count)
    top = np.zeros(n, dtype=object)
    top[0] = sign
    q = _halve(top, rev_b, n, _Integers())
    out = np.empty(n, dtype=object)
    out[:] = [int(v) for v in q.tolist()]
    return out
