"""Short exact powers of int64 polynomials without planning: ``numpy.convolve`` while the
coefficients fit int64, the last squaring or multiplication in the compiled 128-bit rows.

For a length-16 polynomial to the 4th power the products themselves take a few microseconds;
the general route of :func:`polyconv.algebra.power` (work forms, per-product bounds and
dispatch) cost about as much again as python-flint's whole ``fmpz_poly ** k``.  This route
bounds every step once, up front: the coefficients of ``a^e`` are at most ``||a||_1^e`` (the
1-norm is submultiplicative), and so is every partial sum of a product forming them, so a product
whose bound is below ``2^63`` is exact in int64 (``numpy.convolve``), and one below ``2^127`` in
the 128-bit two's complement rows of :func:`polyconv.engines._kernels_batch.rows_schoolbook_128`
(sums modulo ``2^128``; a ring homomorphism, so every coefficient below ``2^127`` comes out
exact; common practice, no source).
"""

from __future__ import annotations

import math

import numpy as np

from ..engines import _pyints
from ..pipeline import small
from .checks import _check_chain
from .rings import _INT64_LIMIT, _Integers

__all__ = ["power_int64"]

#: Most multiply-adds of the final 128-bit product (its operands' lengths multiplied), as
#: :data:`polyconv.algebra.small_products.ROWS_128_WORK`: beyond it the planned engines win.
MAX_WORK = 128 * 128


def _chain(k: int) -> list[int]:
    """The exponents after each product of left-to-right binary powering of ``a^k`` (Knuth,
    TAOCP vol. 2, 3rd ed., section 4.6.3): a squaring per further bit, times ``a`` per set bit."""
    steps, e = [], 1
    for bit in bin(k)[3:]:
        e *= 2
        steps.append(e)
        if bit == "1":
            e += 1
            steps.append(e)
    return steps


def _log2_norm1(x: np.ndarray) -> float:
    """``log2 sum |x_i|`` of an integer array (0 for sums up to 1), rounded up slightly."""
    if x.dtype == object:
        total = sum(abs(int(v)) for v in x)
        return math.log2(total) if total > 1 else 0.0
    total = float(np.add.reduce(np.abs(x.astype(np.float64)))) * (1 + 2.0**-40)
    return math.log2(total) if total > 1 else 0.0


def power_int64(a: np.ndarray, k: int) -> np.ndarray | None:
    """``a^k`` (all ``k (len(a) - 1) + 1`` coefficients, as :func:`polyconv.algebra.power`
    returns them: int64 when every one fits, else Python ints) for 1-D int64 ``a`` with nonzero
    ends and ``k >= 2``, when each product but the last provably fits int64 and the last 128
    bits; None otherwise (the caller's general route).  The result's size is checked against
    the memory budget first, as there."""
    n = a.shape[0]
    if a.dtype != np.int64 or k < 2 or a.ndim != 1 or not n or a[0] == 0 or a[-1] == 0:
        return None
    log_norm = _log2_norm1(a)
    steps = _chain(k)
    last = steps[-1] * log_norm
    if last >= 126 or (len(steps) > 1 and steps[-2] * log_norm >= 62):
        return None  # the last product over 128 bits, or one before it over int64
    before = steps[-2] if len(steps) > 1 else 1  # the last product: a^before times a^after
    after = before if steps[-1] % 2 == 0 else 1
    if last >= 62 and ((before * (n - 1) + 1) * (after * (n - 1) + 1) > MAX_WORK
                       or small.batch_kernels() is None or _pyints.ready() is None):
        return None
    _check_chain(_Integers(), k * (n - 1) + 1, last + 1, f"power(a, k={k})")
    acc = a
    for e in steps[:-1]:
        acc = np.convolve(acc, acc if e % 2 == 0 else a)
    other = acc if after > 1 else a
    if last < 62:
        return np.convolve(acc, other)
    kernels = small.batch_kernels()
    count = acc.shape[0] + other.shape[0] - 1
    high = np.empty((1, count), dtype=np.uint64)
    low = np.empty((1, count), dtype=np.uint64)
    kernels.rows_schoolbook_128(np.ascontiguousarray(acc).reshape(1, -1),
                                np.ascontiguousarray(other).reshape(1, -1), high, low)
    out = _pyints.from_words128(high, low)
    values = out.tolist()
    if max(max(values), -min(values)) < _INT64_LIMIT:
        return np.array(values, dtype=np.int64)
    return out
