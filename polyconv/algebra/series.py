"""Inverse of a power series by Newton iteration.

:func:`inverse_series`: Newton iteration ``b <- b (2 - a b) mod x^(2k)`` (von zur Gathen & Gerhard,
*Modern Computer Algebra*, 3rd ed., Algorithm 9.3; Brent & Kung, J. ACM 25 (1978)), with each step
written as one *middle product* (the coefficients ``k..2k-1`` of ``a b``, a "valid"-mode
convolution) and one truncated product (Hanrot, Quercia & Zimmermann, "The middle product
algorithm I", AAECC 14 (2004)); a schoolbook recurrence for the first terms.
"""

from __future__ import annotations

import operator

import numpy as np

from ..numerics.limits import max_abs
from .checks import _check_chain, _check_length, _check_modulus, _sequence
from .exact_quotient import series_inverse
from .rings import _INT64_LIMIT, _fit, _Integers, _not_invertible_message, _Ring, _ring_for
from .series_recur import inverse_compiled

# ----------------------------------------------------------------------------- inverse series


def inverse_series(a, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of the power series ``1 / a``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients of ``a``, lowest degree first; only the first ``length`` matter.  ``a[0]``
        must be invertible: ``+1`` or ``-1`` for exact integers (otherwise ``1/a`` does not have
        integer coefficients), a unit mod ``modulus``, non-zero for floats.
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only: compute mod ``modulus`` (any modulus; ``a[0]`` must be coprime to it).

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients ``b`` with ``a b = 1 mod x**length``: exact integers (int64 when
        every coefficient fits), ``[0, modulus)``, or float64/complex128.

    Raises
    ------
    ValueError
        If ``a[0]`` is not invertible (the message says why), or for a bad ``a``, ``length`` or
        ``modulus``.
    TypeError
        For non-numeric ``a`` or wrongly typed ``length``/``modulus``.

    Notes
    -----
    Newton iteration ``b <- b (2 - a b) mod x^(2k)``, doubling the precision each step (von zur
    Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed., Algorithm 9.3; Brent & Kung, "Fast
    algorithms for manipulating formal power series", J. ACM 25 (1978)).  Since ``a b = 1 + x^k e``
    the step is ``b <- b - x^k (b e mod x^k)``: the ``k`` needed coefficients ``e`` of ``a b`` are
    one middle product (a "valid"-mode convolution of length ``2k`` by ``k``, which needs a
    transform of length only ``2k``; Hanrot, Quercia & Zimmermann, AAECC 14 (2004)) and ``b e``
    one truncated product.  The precisions are ``length``, ``ceil(length/2)``, ... so no step
    overshoots; total cost about two products of length ``length``.

    Examples
    --------
    >>> from polyconv.algebra import inverse_series
    >>> inverse_series([1, -1, -1], 8).tolist()   # Fibonacci numbers
    [1, 1, 2, 3, 5, 8, 13, 21]
    """
    arr, kind = _sequence(a, "a")
    n = _check_length(length, required=True)
    m = _check_modulus(modulus, kind, "a holds")
    ring = _ring_for(kind, m)
    _check_chain(ring, n, 0, f"inverse_series(a, length={n})")
    x = ring.convert(arr[:n])
    first = ring.unit_inverse(x[0])
    if first is None:
        raise ValueError(_not_invertible_message("a[0]", x[0], ring, "1/a"))
    if isinstance(ring, _Integers):  # (already as a result: int64 when every value fits)
        compiled = inverse_compiled(x, n)
        if compiled is not None:
            return compiled
    return ring.to_result(_inverse(ring, x, n, first))


def _precisions(n: int) -> list[int]:
    """``[1, ..., ceil(n/4), ceil(n/2), n]``: the Newton steps that end exactly at ``n``."""
    steps = [n]
    while steps[-1] > 1:
        steps.append((steps[-1] + 1) // 2)
    return steps[::-1]


#: Up to this many terms the inverse comes from the schoolbook recurrence on Python numbers:
#: about 500 multiply-adds, cheaper than the five Newton steps (ten products) it replaces.
_BASE_TERMS = 32


def _inverse_base(ring: _Ring, a: np.ndarray, n: int, first) -> np.ndarray:
    """``1/a mod x^n`` for small ``n`` by ``b_k = -b_0 sum_(i=1..k) a_i b_(k-i)`` (the
    coefficient comparison in ``a b = 1``; Knuth, TAOCP vol. 2, 4.7)."""
    coeffs = a[:n].tolist() + [0] * max(0, n - a.shape[0])
    m = ring.modulus
    b = [first]
    tail = coeffs[1:n]  # map stops at the shorter: a_i b_(k-i) for i = 1..k
    for _ in range(1, n):
        value = -first * sum(map(operator.mul, tail, reversed(b)))
        b.append(value % m if m is not None else value)
    if isinstance(ring, _Integers):  # Python ints: int64 when every one fits
        if max(max(b), -min(b)) < _INT64_LIMIT:
            return np.array(b, dtype=np.int64)
        out = np.empty(n, dtype=object)
        out[:] = b
        return out
    return ring.to_result(ring.convert(np.array(b, dtype=object)))


def _check_inverse_growth(ring: _Ring, b: np.ndarray, target: int, n: int) -> None:
    """Integer inverses grow: refuse a step to ``target`` terms whose coefficients, their bits
    extrapolated linearly from the ``len(b)`` computed so far, are over the memory budget."""
    if isinstance(ring, _Integers):
        bits = max_abs(b).bit_length() * target / b.shape[0]
        _check_chain(ring, target, bits, f"inverse_series(a, length={n}), whose "
                     f"coefficients grow, at its step to {target} terms")


def _inverse(ring: _Ring, a: np.ndarray, n: int, first) -> np.ndarray:
    """``1/a mod x^n`` by Newton iteration, given ``first = 1/a[0]``; exact integers by the
    recurrence in blocks of :func:`polyconv.algebra.exact_quotient.series_inverse` (products of
    the narrow ``a_i`` by the growing ``b_j`` at their true sizes; measured 3-6x faster than
    Newton's Kronecker products at 64-256 terms, which pad ``a`` to the width of ``b``); int64
    ``a`` by the compiled recurrence when the kernels are loaded
    (:func:`polyconv.algebra.series_recur.inverse_compiled`)."""
    if isinstance(ring, _Integers) and first in (1, -1):
        compiled = inverse_compiled(a, n)
        if compiled is not None:
            return compiled
    b = _inverse_base(ring, a, min(n, _BASE_TERMS), first)
    if n > b.shape[0]:  # up front: the last step's size, before any Newton step runs
        _check_inverse_growth(ring, b, n, n)
        if isinstance(ring, _Integers):
            return ring.to_result(series_inverse(a, n))
    for target in _precisions(n)[1:]:
        if target <= b.shape[0]:
            continue
        k = b.shape[0]
        _check_inverse_growth(ring, b, target, n)
        # a b = 1 + x^k e + O(x^target): e = coefficients k..target-1 of a b (middle product)
        middle = ring.mul(_fit(a, target), b, mode="valid")
        e = middle[1:]
        correction = ring.mul(b[: target - k], e, length=target - k)
        b = np.concatenate([b, ring.neg(correction)])
    return b
