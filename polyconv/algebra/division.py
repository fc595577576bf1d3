"""Polynomial division with remainder.

:func:`poly_divmod`: quotient from the reversed series inverse (von zur Gathen & Gerhard, *Modern
Computer Algebra*, 3rd ed., Algorithm 9.5), schoolbook long division for short quotients.  Over
the integers the quotient is computed modulo ``2^B`` when an a-priori bound (or a guess the full
product proves) keeps ``B`` near its true size; quotients whose coefficients grow (a divisor with
large roots and a dividend that is not a multiple) are computed exactly by halving the reversed
quotient (divide and conquer), so every product has the true sizes of its operands.
"""

from __future__ import annotations

import operator

import gmpy2
import numpy as np

from ..numerics.limits import max_abs
from .checks import _check_modulus, _combine, _sequence
from .exact_quotient import quotient_bits, quotient_halving
from .rings import (
    _INT64_LIMIT,
    _as_objects,
    _fit,
    _Integers,
    _Modular,
    _nonzero_positions,
    _not_invertible_message,
    _Ring,
    _ring_for,
)
from .series import _inverse

#: quotients at most this long are computed by schoolbook long division
_SCHOOLBOOK_QUOTIENT = 32


class ZeroDivisorError(ZeroDivisionError, ValueError):
    """Raised by :func:`poly_divmod` when the divisor is the zero polynomial."""


# ----------------------------------------------------------------------------- division


def poly_divmod(a, b, *, modulus: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Polynomial division with remainder: ``a = q b + r`` with ``deg r < deg b``.

    Parameters
    ----------
    a : array_like, 1-D
        Dividend, lowest degree first.
    b : array_like, 1-D
        Divisor.  Its highest-degree zeros (trailing zeros of the array) are stripped first; it
        must not be all zero.  Its leading coefficient must be invertible: ``+1`` or ``-1`` for
        exact integers, a unit mod ``modulus`` (any non-zero residue when ``modulus`` is prime),
        non-zero for floats.
    modulus : int, optional
        Integer ``a`` and ``b`` only: divide over the integers mod ``modulus``.

    Returns
    -------
    q : numpy.ndarray
        ``len(a) - len(b) + 1`` coefficients (``len(b)`` after stripping), or ``[0]`` when
        ``len(a) < len(b)``.
    r : numpy.ndarray
        ``len(b) - 1`` coefficients, at least one (``[0]`` when ``b`` is a constant).

    Raises
    ------
    ZeroDivisorError
        (a subclass of both ZeroDivisionError and ValueError) if ``b`` is the zero polynomial
        (mod ``modulus`` if given).
    ValueError
        If the leading coefficient of ``b`` is not invertible.  For exact integers this means it
        is not ``+-1``: the quotient would in general not have integer coefficients, and this
        function raises rather than returning rationals (pass floats, or a prime ``modulus``).
        Also for a bad ``a``, ``b`` or ``modulus``.
    TypeError
        For non-numeric input or a wrongly typed ``modulus``.

    Notes
    -----
    Short quotients (at most 32 coefficients) use schoolbook long division.  Longer ones use
    Modern Computer Algebra (von zur Gathen & Gerhard, 3rd ed.), Algorithm 9.5: with ``rev`` the
    coefficient reversal, ``rev(q) = rev(a) / rev(b) mod x^(deg a - deg b + 1)`` from
    :func:`inverse_series` and one truncated product, then ``r = a - q b`` needs only the low
    ``deg b`` coefficients (one more truncated product).

    Over the integers the inverse ``1/rev(b)`` can have much larger coefficients than ``q`` (its
    growth is set by the roots of ``b``), so the quotient is instead computed modulo ``2^B`` and
    lifted to the symmetric range; the full product ``q b`` then both proves it (``a - q b`` must
    vanish in degrees ``>= deg b``, and the quotient is unique since ``b``'s leading coefficient
    is a unit) and gives ``r``.  ``B`` starts at ``bits(max|a|) - bits(max|b|) + 4`` (the size of
    a typical quotient) and doubles until the check passes.

    Floats: the result is as accurate as the division problem allows; dividing by a ``b`` with
    roots of modulus above 1 amplifies rounding errors (with either algorithm).

    Examples
    --------
    >>> from polyconv.algebra import poly_divmod
    >>> q, r = poly_divmod([-1, 0, 0, 1], [-1, 1])    # (x^3 - 1) / (x - 1)
    >>> q.tolist(), r.tolist()
    ([1, 1, 1], [0])
    """
    arr_a, kind_a = _sequence(a, "a")
    arr_b, kind_b = _sequence(b, "b")
    kind = _combine([kind_a, kind_b])
    m = _check_modulus(modulus, kind, "a and b hold")
    ring = _ring_for(kind, m)
    x, y = ring.convert(arr_a), _strip(ring, ring.convert(arr_b))
    lead = ring.unit_inverse(y[-1])
    if lead is None:
        raise ValueError(_not_invertible_message("the leading coefficient of b", y[-1], ring,
                                                 "a / b"))
    q, r = _divmod(ring, x, y, lead)
    return ring.to_result(q), ring.to_result(r)


def _strip(ring: _Ring, y: np.ndarray) -> np.ndarray:
    """``y`` without its highest-degree zeros; the zero polynomial raises ZeroDivisorError."""
    nonzero = _nonzero_positions(ring, y)
    if nonzero.size == 0:
        where = f" modulo {ring.modulus}" if ring.modulus is not None else ""
        raise ZeroDivisorError(f"b is the zero polynomial{where}: division by zero")
    return y[: nonzero[-1] + 1]


def _divmod(ring: _Ring, a: np.ndarray, b: np.ndarray, lead) -> tuple[np.ndarray, np.ndarray]:
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    if qlen <= 0:
        return ring.zeros(1), _fit(a, max(d, 1))
    if d == 0:
        return ring.scale(a, lead), ring.zeros(1)
    if qlen <= _SCHOOLBOOK_QUOTIENT:
        return _divmod_schoolbook(ring, a, b, lead)
    if isinstance(ring, _Integers):
        return _divmod_integers(a, b)
    return _divmod_newton(ring, a, b)


def _divmod_schoolbook(ring: _Ring, a: np.ndarray, b: np.ndarray,
                       lead) -> tuple[np.ndarray, np.ndarray]:
    """Long division, one quotient coefficient per step (highest first)."""
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    r = a.copy()
    q = ring.zeros(qlen)
    for i in range(qlen - 1, -1, -1):
        c = ring.scale(r[i + d: i + d + 1], lead)
        q = _set(q, i, c[0])
        r = np.concatenate([r[:i], ring.sub(r[i: i + d + 1], ring.scale(b, c[0])), r[i + d + 1:]])
    return q, r[:d]


def _set(x: np.ndarray, i: int, value) -> np.ndarray:
    """``x`` with ``x[i] = value``, widened to Python ints if ``value`` does not fit int64."""
    if x.dtype == np.int64 and not -_INT64_LIMIT <= int(value) < _INT64_LIMIT:
        x = x.astype(object)
    x[i] = value
    return x


def _quotient_newton(ring: _Ring, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """MCA Algorithm 9.5: ``rev(q) = rev(a) / rev(b) mod x^qlen`` (``b``'s leading coefficient
    must be a unit of ``ring``)."""
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    rev_b = b[::-1][:qlen].copy()
    inv = _inverse(ring, rev_b, qlen, ring.unit_inverse(rev_b[0]))
    rev_q = ring.mul(a[::-1][:qlen].copy(), inv, length=qlen)
    return rev_q[::-1].copy()


def _divmod_newton(ring: _Ring, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    d = b.shape[0] - 1
    q = _quotient_newton(ring, a, b)
    r = ring.sub(a[:d], ring.mul(q, b, length=d))
    return q, r


def _divmod_integers(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact division by a ``b`` with leading coefficient ``+-1``.

    ``B`` bits suffice for the quotient modulo ``2^B`` when ``|q_k| < 2^(B-1)``.  The a-priori
    bound of :func:`quotient_bits` proves that; when it is no larger than twice the typical size
    (the guess below), one Newton quotient modulo ``2^B`` is the answer.  Otherwise the guess is
    tried once and proved by the full product ``q b``; if the proof fails the coefficients
    really grow, and :func:`~polyconv.algebra.exact_quotient.quotient_halving` computes the
    quotient exactly instead.
    """
    integers = _Integers()
    d = b.shape[0] - 1
    # the quotient's coefficients are typically about |a| / |b| (a = q b + r with random q, b:
    # |a| ~ sqrt(n) |q| |b|); 4 bits of margin
    guess = max(8, max_abs(a).bit_length() - max_abs(b).bit_length() + 4)
    proved = quotient_bits(a, b, limit=2 * guess) + 1
    if proved <= 2 * guess:
        q = _quotient_mod_power(a, b, proved)
        return q, integers.sub(a[:d], integers.mul(q[:d], b[:d], length=d))
    q = _quotient_mod_power(a, b, guess)
    diff = integers.sub(a, integers.mul(q, b))
    if not np.any(diff[d:] != 0):
        return q, diff[:d]
    sign = int(b[-1])  # +-1: divide sign*a by the monic sign*b, then r = sign * r'
    q = quotient_halving(_as_objects(a) * sign, _as_objects(b) * sign)
    if d and max_abs(b[:d]).bit_length() * _NARROW_FACTOR <= max_abs(q[:d]).bit_length():
        return q, _remainder_sums(a, q, b, d)
    r = integers.sub(a[:d], integers.mul(q[:d], b[:d], length=d))
    return q, r


#: The remainder of a quotient whose coefficients are this many times wider than the divisor's
#: is summed term by term (:func:`_remainder_sums`) rather than by one product.
_NARROW_FACTOR = 8


def _remainder_sums(a: np.ndarray, q: np.ndarray, b: np.ndarray, d: int) -> np.ndarray:
    """``r_k = a_k - sum_(i <= k) q_i b_(k-i)`` for ``k < d`` (the low ``d`` coefficients of
    ``a - q b``), each product of a wide ``q_i`` by a narrow ``b_j`` in GMP at their true sizes:
    a Kronecker product pads ``b``'s slots to the width of ``q``'s (measured, 100-bit operands,
    remainder alone: 300/121 7.5 -> 4.3 ms, 600/241 42 -> 27 ms, 1200/481 208 -> 189 ms)."""
    qs = list(map(gmpy2.mpz, q[:d].tolist()))
    bs = list(map(gmpy2.mpz, b[:d].tolist()))
    top = a[:d].tolist()
    out = np.empty(d, dtype=object)
    out[:] = [int(top[k] - sum(map(operator.mul, qs[:k + 1], bs[k::-1]))) for k in range(d)]
    return out


def _quotient_mod_power(a: np.ndarray, b: np.ndarray, bits: int) -> np.ndarray:
    """The quotient modulo ``2^bits`` by Newton's method, in ``[-2^(bits-1), 2^(bits-1))``."""
    ring = _Modular(1 << bits)
    return _symmetric(_quotient_newton(ring, ring.convert(a), ring.convert(b)), 1 << bits)


def _symmetric(x: np.ndarray, m: int) -> np.ndarray:
    """Residues ``x`` in ``[0, m)`` mapped to ``[-m/2, m/2)``."""
    half = m // 2
    if x.dtype == np.int64 and m < _INT64_LIMIT:
        return np.where(x >= half, x - np.int64(m), x)
    return np.array([int(v) - m if v >= half else int(v) for v in x], dtype=object)
