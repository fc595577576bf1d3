"""Compiled (numba) kernels for the exact inverse of an integer power series by its recurrence.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); used by
:mod:`polyconv.algebra.series_recur`.  For ``a_0 = s = +-1`` the coefficients of ``b = 1/a``
satisfy ``b_k = -s sum_(i=1..k) a_i b_(k-i)`` (the coefficient comparison in ``a b = 1``;
Knuth, TAOCP vol. 2, 3rd ed., section 4.7).  The ``a_i`` are int64; the ``b_k`` grow by about
the width of ``a`` per term, so they are multi-digit integers here.

* :func:`inverse_digits`: the recurrence on *balanced* digits of 32 bits: ``b_j = sum_c
  d_(c,j) 2^(32 c)`` and ``a_i = sum_t e_(t,i) 2^(32 t)`` with every digit in ``[-2^31, 2^31)``
  (signed digits need no sign extension: a value's digits above its width are zero).  Digit
  ``c`` of the sum is ``S_c = sum_t sum_i e_(t,i) d_(c-t, k-i)``: one dot product of two
  contiguous int32 rows (``a``'s digits reversed, ``b``'s stored so that the ``D`` digit
  positions ``c - t`` of each ``b_j`` lie side by side).  When ``max|e| D n < 2^31`` the int64
  sum is exact; otherwise it is exact modulo ``2^64`` (wrapping) and a float64 sum of the same
  products, off by less than ``3 n 2^-53 sum|terms| < 2^41`` for ``n <= 2^14`` (rounding error
  of a sum, Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2),
  gives the multiple of ``2^64`` (common practice, no source).  Then one carry pass makes
  ``b_k``'s digits balanced again (Knuth 4.3.1).  Widths come from the proof: ``w`` balanced
  digits hold values below ``2^(32 w - 1)``, so ``|b_k| <= k max |a_i| |b_(k-i)| <
  2^(32 (max(w_j + h_i) + 1) - 1)`` for ``k < 2^31`` (``h_i`` digits of ``a_i``); the top zero
  digits are then dropped.
* :func:`digits_stream`: those values as a ``marshal`` list of Python ints (the stream format of
  :mod:`polyconv.engines._kernels_stream`; CPython's Python/marshal.c, ``r_PyLong``).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit

CACHE = _jit.cache_enabled()

_HALF = 1 << 31
_MASK = (1 << 32) - 1
_TWO64 = 2.0**64

#: Most terms :func:`inverse_digits` accepts (the float64 error bound above).
MAX_TERMS = 1 << 14


@njit("int64(int64[::1], int64)", cache=CACHE)
def digit_count(a, n):
    """Balanced 32-bit digits ``D`` of the widest ``a_i`` (``1 <= i < n``; 1, 2 or 3)."""
    most = 1
    for i in range(1, min(a.shape[0], n)):
        v = a[i]
        if v >= (1 << 63) - _HALF:  # (2^31 - 1)(2^32 + 1) is the largest with 2 digits
            most = 3
        elif (v >= _HALF or v < -_HALF) and most < 2:
            most = 2
    return most


def rows_needed(n: int, depth: int) -> int:
    """Digit positions :func:`inverse_digits` may write: ``b_k`` is computed on at most ``1 + k
    (D + 1)`` of them, each written to ``D`` interleaved rows, read in groups of ``_GROUP``."""
    return (n - 1) * (depth + 1) + 1 + depth + _GROUP


@njit("UniTuple(int64, 2)(int64, int64)", cache=CACHE, inline="always")
def _split(v, carry):
    """``v = r + 2^32 q`` with ``r`` balanced; returns ``(r, q + carry)``."""
    q = v >> 32
    r = v & _MASK
    if r >= _HALF:
        r -= 1 << 32
        q += 1
    return r, q + carry


#: Digit positions summed in one pass over ``a``'s digits (the rows share its loads).
_GROUP = 4


@njit("void(int32[::1], int32[:, ::1], int64, int64, int64, int64, int64, boolean, int64[::1], "
      "float64[::1])", cache=CACHE, fastmath={"reassoc", "contract"}, inline="always")
def _column_sums(er, digits, g, lo, k, na, depth, exact, sums, approx):
    """``sums[u]`` (and, unless ``exact``, its float64 value ``approx[u]``): the dot product of
    ``a``'s reversed digits with row ``g + u`` of ``digits`` over the terms ``lo .. k - 1``
    (rows with no digit there contribute zeros)."""
    for u in range(_GROUP):
        sums[u] = 0
        approx[u] = 0.0
    if lo >= k:
        return
    m = (k - lo) * depth
    ar = er[(na - 1 - k + lo) * depth: (na - 1) * depth]
    r0 = digits[g, lo * depth: k * depth]
    r1 = digits[g + 1, lo * depth: k * depth]
    r2 = digits[g + 2, lo * depth: k * depth]
    r3 = digits[g + 3, lo * depth: k * depth]
    s0 = s1 = s2 = s3 = np.int64(0)
    if exact:
        for j in range(m):
            x = np.int64(ar[j])
            s0 += x * np.int64(r0[j])
            s1 += x * np.int64(r1[j])
            s2 += x * np.int64(r2[j])
            s3 += x * np.int64(r3[j])
    else:
        f0 = f1 = f2 = f3 = 0.0
        for j in range(m):
            x = np.int64(ar[j])
            y = np.float64(ar[j])
            s0 += x * np.int64(r0[j])
            s1 += x * np.int64(r1[j])
            s2 += x * np.int64(r2[j])
            s3 += x * np.int64(r3[j])
            f0 += y * np.float64(r0[j])
            f1 += y * np.float64(r1[j])
            f2 += y * np.float64(r2[j])
            f3 += y * np.float64(r3[j])
        approx[0], approx[1], approx[2], approx[3] = f0, f1, f2, f3
    sums[0], sums[1], sums[2], sums[3] = s0, s1, s2, s3


@njit("int64(int64[::1], int64, int64, int32[:, ::1], int64[::1])", cache=CACHE,
      fastmath={"reassoc", "contract"})
def inverse_digits(a, n, depth, digits, width):
    """``b = 1/a mod x^n`` for ``a[0] = +-1`` (``a`` int64, ``n <= MAX_TERMS``): ``b_j =
    sum_c digits[c, D j] 2^(32 c)`` for ``c < width[j]`` (``digits[c + t, D j + t]`` holds the
    same digit for ``t < D``), balanced digits; ``digits`` must be zero, with
    :func:`rows_needed` rows and ``D n`` columns (``D = depth`` = :func:`digit_count`).  Returns
    the most digits of a ``b_j``."""
    na = min(a.shape[0], n)
    er = np.zeros(max(na - 1, 1) * depth, dtype=np.int32)  # digit t of a_i at (na-1-i) D + t
    h = np.zeros(na, dtype=np.int64)
    biggest = 0
    for i in range(1, na):
        x = a[i]
        for t in range(depth):
            r, x = _split(x, 0)
            er[(na - 1 - i) * depth + t] = np.int32(r)
            if r != 0:
                h[i] = t + 1
            biggest = max(biggest, abs(r))
    exact = biggest * depth * n < _HALF
    first = np.full(digits.shape[0], n, dtype=np.int64)  # first j with a digit in that row
    flip = a[0] > 0  # b_k = -s * sum: negate the sum when s = +1
    for t in range(depth):
        digits[t, t] = 1 if a[0] > 0 else -1
    width[0] = 1
    first[0] = 0
    most = 1
    for k in range(1, n):
        top = min(k, na - 1)
        size = 1
        for i in range(1, top + 1):
            if h[i] and width[k - i] + h[i] + 1 > size:
                size = width[k - i] + h[i] + 1
        carry = np.int64(0)
        w = 0
        sums = np.zeros(_GROUP, dtype=np.int64)
        approx = np.zeros(_GROUP, dtype=np.float64)
        for g in range(0, size, _GROUP):
            _column_sums(er, digits, g, max(first[max(g - depth + 1, 0)], k - top), k, na,
                         depth, exact, sums, approx)
            for c in range(g, min(g + _GROUP, size)):
                total, f = sums[c - g], approx[c - g]
                if flip:
                    total, f = -total, -f
                if exact:
                    r, carry = _split(total + carry, 0)
                else:  # the true sum is total + a multiple of 2^64 (total wrapped)
                    low = total + carry
                    above = np.int64(np.round((f + np.float64(carry) - np.float64(low))
                                              / _TWO64))
                    r, carry = _split(low, above << 32)
                for t in range(depth):
                    digits[c + t, k * depth + t] = np.int32(r)
                if r != 0:
                    w = c + 1
        w = max(w, 1)
        width[k] = w
        for c in range(w):
            if first[c] > k:
                first[c] = k
        most = max(most, w)
    return most


@njit("int64(uint8[::1], int64, int64)", cache=CACHE, inline="always")
def _int32(out, pos, v):
    """Little-endian int32 ``v`` at ``out[pos:pos + 4]``; returns ``pos + 4``."""
    u = np.uint64(v)
    for s in range(4):
        out[pos + s] = np.uint8((u >> np.uint64(8 * s)) & np.uint64(0xFF))
    return pos + 4


@njit("int64(int64[::1], int64)", cache=CACHE, inline="always")
def _digit15(mag, d):
    """Bits ``[15 d, 15 d + 15)`` of the unsigned 32-bit digits ``mag`` (a zero digit above)."""
    q = (15 * d) >> 5
    off = (15 * d) & 31
    return ((mag[q] >> off) | (mag[q + 1] << (32 - off))) & 0x7FFF


@njit("int64(int32[:, ::1], int64, int64[::1], uint8[::1])", cache=CACHE)
def digits_stream(digits, depth, width, out):
    """The values of :func:`inverse_digits` as a marshal list of Python ints into ``out`` (room
    for :func:`polyconv.engines._pyints.capacity` of ``len(width)`` values of ``32 max(width)``
    bits); returns the bytes used.  Each value's magnitude (its digits negated when the top one
    is negative) is made unsigned 32-bit digits by one borrow pass, then cut into 15-bit ones."""
    count = width.shape[0]
    most = 1
    for k in range(count):
        most = max(most, width[k])
    mag = np.zeros(most + 1, dtype=np.int64)
    out[0] = 0x5B  # "[" and the int32 count
    pos = _int32(out, 1, count)
    for k in range(count):
        w = width[k]
        negative = digits[w - 1, k * depth] < 0
        borrow = np.int64(0)
        for c in range(w):
            d = np.int64(digits[c, k * depth])
            u = (-d if negative else d) + borrow
            borrow = -1 if u < 0 else 0
            mag[c] = u + (1 << 32) if u < 0 else u
        mag[w] = 0
        nd = (32 * w + 14) // 15
        while nd > 0 and _digit15(mag, nd - 1) == 0:
            nd -= 1
        if nd <= 2:  # below 2^30: an int32 item
            v = _digit15(mag, 0) | (_digit15(mag, 1) << 15) if nd else np.int64(0)
            out[pos] = 0x69
            pos = _int32(out, pos + 1, -v if negative else v)
        else:
            out[pos] = 0x6C
            pos = _int32(out, pos + 1, -nd if negative else nd)
            for d in range(nd):
                v = _digit15(mag, d)
                out[pos] = np.uint8(v & 0xFF)
                out[pos + 1] = np.uint8(v >> 8)
                pos += 2
    return pos
