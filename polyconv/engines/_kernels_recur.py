"""Compiled (numba) kernels for the exact inverse of an integer power series by its recurrence.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); used by
:mod:`polyconv.algebra.series_recur`.  For ``a_0 = s = +-1`` the coefficients of ``b = 1/a``
satisfy ``b_k = -s sum_(i=1..k) a_i b_(k-i)`` (the coefficient comparison in ``a b = 1``;
Knuth, TAOCP vol. 2, 3rd ed., section 4.7).  The ``a_i`` are int64; the ``b_k`` grow by about
the width of ``a`` per term, so they are multi-digit integers here.

* :func:`inverse_digits`: the recurrence on *balanced* digits of 24 bits: ``b_j = sum_c
  d_(c,j) 2^(24 c)`` and ``a_i = sum_t e_(t,i) 2^(24 t)`` with every digit in ``[-2^23, 2^23)``
  (signed digits need no sign extension: a value's digits above its width are zero).  Digit
  ``c`` of the sum is ``S_c = sum_t sum_i e_(t,i) d_(c-t, k-i)``, a dot product along ``j = k -
  i`` of two contiguous int32 rows (the digits are stored one row per digit position, ``a``'s
  reversed), each product below ``2^46`` and at most ``3 k`` of them, so exact in int64 for
  ``k < 2^15``; then one carry pass makes ``b_k``'s digits balanced again (common practice for
  multi-digit sums with delayed carries, no source; Knuth 4.3.1 for the carries).  Widths come
  from the proof: a value with ``w`` balanced digits is below ``2^(24 w - 1)``, so ``|b_k| <=
  k max |a_i| |b_(k-i)| < 2^(24 (max(w_j + h_i) + 1) - 1)`` for ``k < 2^24`` (``h_i`` digits of
  ``a_i``): that many digits hold ``b_k``; the top zero digits are then dropped.
* :func:`digits_stream`: those columns as a ``marshal`` list of Python ints (the stream format of
  :mod:`polyconv.engines._kernels_stream`; CPython's Python/marshal.c, ``r_PyLong``).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit

CACHE = _jit.cache_enabled()

_HALF = 1 << 23
_MASK = (1 << 24) - 1

#: Most terms :func:`inverse_digits` accepts (its int64 digit sums are exact below ``2^15``).
MAX_TERMS = 1 << 14


@njit("int64(int64[::1], int64)", cache=CACHE)
def digit_count(a, n):
    """Balanced 24-bit digits ``D`` of the widest ``|a_i|`` (``1 <= i < n``; 1, 2 or 3), so
    that :func:`inverse_digits` needs digit rows ``1 + (n - 1) (D + 1)``."""
    most = 1
    for i in range(1, min(a.shape[0], n)):
        v = a[i]
        if v >= _HALF * (1 << 24) - _HALF or v < -(_HALF * (1 << 24)):
            most = 3
        elif (v >= _HALF or v < -_HALF) and most < 2:
            most = 2
    return most


@njit("int64(int64[::1], int64, int64, int32[:, ::1], int64[::1])", cache=CACHE)
def inverse_digits(a, n, depth, digits, width):
    """``b = 1/a mod x^n`` for ``a[0] = +-1`` (``a`` int64, ``n <= MAX_TERMS``): ``b_j =
    sum_c digits[c, j] 2^(24 c)`` for ``c < width[j]``, balanced digits; ``digits`` must be zero
    and have ``1 + (n - 1) (depth + 1)`` rows (``depth`` = :func:`digit_count`).  Returns the
    most digits of a ``b_j``."""
    na = min(a.shape[0], n)
    er = np.zeros(max(na - 1, 1) * depth, dtype=np.int32)  # digit t of a_i at (na-1-i) D + t
    h = np.zeros(na, dtype=np.int64)
    for i in range(1, na):
        x = a[i]
        for t in range(depth):
            q = x >> 24
            r = x & _MASK
            if r >= _HALF:
                r -= 1 << 24
                q += 1
            er[(na - 1 - i) * depth + t] = np.int32(r)
            if r != 0:
                h[i] = t + 1
            x = q
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
        for c in range(size):
            total = np.int64(0)
            lo = max(first[max(c - depth + 1, 0)], k - top)
            if lo < k:
                ar = er[(na - 1 - k + lo) * depth: (na - 1) * depth]
                br = digits[c, lo * depth: k * depth]
                for j in range((k - lo) * depth):
                    total += np.int64(ar[j]) * np.int64(br[j])
            v = (-total if flip else total) + carry
            q = v >> 24
            r = v & _MASK
            if r >= _HALF:
                r -= 1 << 24
                q += 1
            for t in range(depth):
                digits[c + t, k * depth + t] = np.int32(r)
            carry = q
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
    """Bits ``[15 d, 15 d + 15)`` of the unsigned 24-bit digits ``mag`` (a zero digit above)."""
    q = (15 * d) // 24
    off = (15 * d) % 24
    return ((mag[q] | (mag[q + 1] << 24)) >> off) & 0x7FFF


@njit("int64(int32[:, ::1], int64, int64[::1], uint8[::1])", cache=CACHE)
def digits_stream(digits, depth, width, out):
    """The values of :func:`inverse_digits` as a marshal list of Python ints into ``out`` (room
    for :func:`polyconv.engines._pyints.capacity` of ``len(width)`` values of ``24 max(width)``
    bits); returns the bytes used.  Each value's magnitude (its digits negated when the top one
    is negative) is made unsigned 24-bit digits by one borrow pass, then cut into 15-bit ones."""
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
            mag[c] = u + (1 << 24) if u < 0 else u
        mag[w] = 0
        nd = (24 * w + 14) // 15
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
