"""Compiled (numba) kernels for the exact inverse of an integer power series by its recurrence.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); used by
:mod:`polyconv.algebra.series_recur`.  For ``a_0 = s = +-1`` the coefficients of ``b = 1/a``
satisfy ``b_k = -s sum_(i=1..k) a_i b_(k-i)`` (the coefficient comparison in ``a b = 1``;
Knuth, TAOCP vol. 2, 3rd ed., section 4.7).  The ``a_i`` are int64, the ``b_k`` grow by about
the width of ``a`` per term, so they are multi-word integers here:

* :func:`inverse_words`: the recurrence on two's complement rows of 32-bit words (uint32).
  A product ``|a_i| b_j`` is summed word by word without carries into two int64 columns, the
  low and the high halves of the 64-bit word products (each below ``2^32``, so ``2^31`` of
  them fit an int64), and a negative ``b_j = U - 2^(32 w)`` adds ``-|a_i| 2^(32 w)`` (common
  practice for schoolbook multi-word sums, no source; Knuth 4.3.1 for the carries); the
  carries run once per term.  The terms of positive and of negative ``a_i`` are summed into
  separate columns (:func:`_pair`, :func:`_single`: no sign per product; the carry pass
  subtracts; measured at 64 terms of 64 bits: 87 -> 64 us), two terms at a time (each column
  read and written once per two word products), a 64-bit ``|a_i|`` as two 32-bit halves so
  that the compiler vectorises 32 x 32 -> 64-bit products (measured once, busy machine: about
  15% faster than 64-bit multipliers at 256 64-bit terms; pairs 10-20% faster than single
  terms at 16 bits), both halves in the same pass over the words (:func:`_pair64`: column
  ``c`` takes the high-half products of words ``c - 1``; 64 terms of 64 bits 1.39-1.44x ->
  1.25-1.33x python-flint's series inverse).
  Widths come from the proof: with ``|a_i| < 2^(32 h_i)`` and ``|b_j| < 2^(32 w_j - 1)``,
  ``|b_k| <= k max |a_i| |b_(k-i)| < 2^(32 (max(w_j + h_i) + 1) - 1)`` for ``k < 2^32``, so
  that many words hold ``b_k`` exactly; each row is then trimmed to its shortest two's
  complement form.
* :func:`words_stream`: those rows as a ``marshal`` list of Python ints (the stream format of
  :mod:`polyconv.engines._kernels_stream`; CPython's Python/marshal.c, ``r_PyLong``);
* :func:`inverse_stream`: both in one call (one dispatch: most of the cost at 16 terms).
"""

from __future__ import annotations

import sys

import numpy as np
from numba import njit

from . import jit_state as _jit
from ._kernels_arith import M32 as _M32

CACHE = _jit.cache_enabled()

_SIGN = np.uint64(0x80000000)
_LITTLE = sys.byteorder == "little"


@njit("UniTuple(int64, 2)(uint32[::1], int64, int64)", cache=CACHE, inline="always")
def _trim(row, start, width):
    """Shortest two's complement width of the ``width`` words at ``row[start:]`` (at least 1)
    and whether the value is negative (1) or not (0)."""
    top = np.uint64(row[start + width - 1])
    neg = 1 if top & _SIGN else 0
    fill = np.uint32(0xFFFFFFFF) if neg else np.uint32(0)
    w = width
    while w > 1 and row[start + w - 1] == fill and ((row[start + w - 2] & _SIGN) != 0) == neg:
        w -= 1
    return w, neg


@njit("void(uint32[::1], int64, int64, uint32, int64[::1], int64[::1])", cache=CACHE,
      inline="always")
def _single(row, lo, hi, m32, cl, ch):
    """``m`` times words ``lo .. hi - 1`` of ``row`` into the columns (``m`` a uint32, so that
    the compiler multiplies 32 x 32 -> 64 bits)."""
    m = np.uint64(m32)
    for c in range(lo, hi):
        p = m * np.uint64(row[c])
        cl[c] += np.int64(p & _M32)
        ch[c] += np.int64(p >> np.uint64(32))


@njit("void(uint32[::1], int64[::1], int64[::1], int64, int64, uint32, uint32, int64[::1], "
      "int64[::1])", cache=CACHE, inline="always")
def _pair(words, start, width, ja, jb, ma32, mb32, cl, ch):
    """``ma b_ja + mb b_jb`` (their words ``U``) into the columns in one pass over both rows
    (each column read and written once for two word products); the two terms have one sign,
    whose columns the caller passes."""
    ra = words[start[ja]: start[ja] + width[ja]]
    rb = words[start[jb]: start[jb] + width[jb]]
    both = min(width[ja], width[jb])
    ma, mb = np.uint64(ma32), np.uint64(mb32)
    for c in range(both):
        p = ma * np.uint64(ra[c])
        q = mb * np.uint64(rb[c])
        cl[c] += np.int64((p & _M32) + (q & _M32))
        ch[c] += np.int64((p >> np.uint64(32)) + (q >> np.uint64(32)))
    _single(ra, both, width[ja], ma32, cl, ch)
    _single(rb, both, width[jb], mb32, cl, ch)


@njit("void(uint32[::1], int64, int64, uint32, uint32, int64[::1], int64[::1])", cache=CACHE,
      inline="always")
def _tail64(row, lo, w, mlo32, mhi32, cl, ch):
    """Columns ``lo .. w`` of ``(mlo + 2^32 mhi)`` times the ``w`` words of ``row`` (``1 <= lo
    <= w``): column ``c`` takes the low-word product of word ``c`` and the high-word product of
    word ``c - 1``."""
    ml, mh = np.uint64(mlo32), np.uint64(mhi32)
    for c in range(lo, w):
        p = ml * np.uint64(row[c])
        q = mh * np.uint64(row[c - 1])
        cl[c] += np.int64((p & _M32) + (q & _M32))
        ch[c] += np.int64((p >> np.uint64(32)) + (q >> np.uint64(32)))
    q = mh * np.uint64(row[w - 1])
    cl[w] += np.int64(q & _M32)
    ch[w] += np.int64(q >> np.uint64(32))


@njit("void(uint32[::1], int64[::1], int64[::1], int64, int64, uint32, uint32, uint32, uint32, "
      "int64[::1], int64[::1])", cache=CACHE, inline="always")
def _pair64(words, start, width, ja, jb, al32, ah32, bl32, bh32, cl, ch):
    """:func:`_pair` for two 64-bit multipliers ``al + 2^32 ah`` and ``bl + 2^32 bh``: both
    32-bit halves in the same pass (column ``c`` takes the low-half products of words ``c`` and
    the high-half products of words ``c - 1``), so each column is read and written once for
    four word products."""
    ra = words[start[ja]: start[ja] + width[ja]]
    rb = words[start[jb]: start[jb] + width[jb]]
    both = min(width[ja], width[jb])
    al, ah, bl, bh = np.uint64(al32), np.uint64(ah32), np.uint64(bl32), np.uint64(bh32)
    p, q = al * np.uint64(ra[0]), bl * np.uint64(rb[0])
    cl[0] += np.int64((p & _M32) + (q & _M32))
    ch[0] += np.int64((p >> np.uint64(32)) + (q >> np.uint64(32)))
    for c in range(1, both):
        p = al * np.uint64(ra[c])
        q = bl * np.uint64(rb[c])
        u = ah * np.uint64(ra[c - 1])
        v = bh * np.uint64(rb[c - 1])
        cl[c] += np.int64((p & _M32) + (q & _M32) + (u & _M32) + (v & _M32))
        ch[c] += np.int64((p >> np.uint64(32)) + (q >> np.uint64(32)) + (u >> np.uint64(32))
                          + (v >> np.uint64(32)))
    _tail64(ra, both, width[ja], al32, ah32, cl, ch)
    _tail64(rb, both, width[jb], bl32, bh32, cl, ch)


@njit("void(uint32[::1], int64, uint32, uint32, int64[::1], int64[::1])", cache=CACHE,
      inline="always")
def _single64(row, w, mlo32, mhi32, cl, ch):
    """:func:`_pair64` for one term."""
    p = np.uint64(mlo32) * np.uint64(row[0])
    cl[0] += np.int64(p & _M32)
    ch[0] += np.int64(p >> np.uint64(32))
    _tail64(row, 1, w, mlo32, mhi32, cl, ch)


@njit("int64(int64[::1], int64, uint32[::1], int64[::1], int64[::1], uint8[::1])", cache=CACHE)
def inverse_words(a, n, words, start, width, negative):
    """``b = 1/a mod x^n`` for ``a[0] = +-1`` (``a`` int64, any length ``>= 1``) as rows of
    32-bit two's complement words: row ``k`` is ``words[start[k]:start[k] + width[k]]``, its
    sign ``negative[k]``.  ``words`` must have room for :func:`word_capacity` words.  Returns
    the number of words used."""
    na = min(a.shape[0], n)
    lo = np.empty(na, dtype=np.uint32)  # |a_i| in 32-bit halves
    hi = np.empty(na, dtype=np.uint32)
    neg_a = np.empty(na, dtype=np.uint8)
    h = np.empty(na, dtype=np.int64)    # words of |a_i| (0 for a_i = 0)
    for i in range(na):
        v = a[i]
        m = np.uint64(v) if v >= 0 else np.uint64(0) - np.uint64(v)
        lo[i], hi[i] = np.uint32(m & _M32), np.uint32(m >> np.uint64(32))
        neg_a[i] = 1 if v < 0 else 0
        h[i] = 0 if m == 0 else (1 if hi[i] == 0 else 2)
    wide = False
    for i in range(1, na):
        wide = wide or h[i] == 2
    flip = a[0] > 0  # b_k = -s * sum: negate the sum when s = +1
    cap = words.shape[0]
    col_lo = np.zeros(cap + 3, dtype=np.int64)
    col_hi = np.zeros(cap + 3, dtype=np.int64)
    neg_lo = np.zeros(cap + 3, dtype=np.int64)  # the same sums for the negative a_i
    neg_hi = np.zeros(cap + 3, dtype=np.int64)
    words[0] = np.uint32(1) if a[0] > 0 else np.uint32(0xFFFFFFFF)
    start[0], width[0], negative[0] = 0, 1, 0 if a[0] > 0 else 1
    used = 1
    for k in range(1, n):
        top = min(k, na - 1)
        size = 1
        for i in range(1, top + 1):
            if h[i] and width[k - i] + h[i] + 1 > size:
                size = width[k - i] + h[i] + 1
        for c in range(size + 1):
            col_lo[c] = 0
            col_hi[c] = 0
        for i in range(1, top + 1):  # b_j = U - 2^(32 w) when negative: -|a_i| 2^(32 w)
            j = k - i
            if h[i] and negative[j]:
                sign = np.int64(1) if neg_a[i] else np.int64(-1)
                col_lo[width[j]] += sign * np.int64(lo[i])
                col_lo[width[j] + 1] += sign * np.int64(hi[i])
        for c in range(size + 1):
            neg_lo[c] = 0
            neg_hi[c] = 0
        for sign in range(2):  # pairs of terms of one sign (64-bit a_i: both halves at once)
            cl = col_lo if sign == 0 else neg_lo
            ch = col_hi if sign == 0 else neg_hi
            pending = 0
            for i in range(1, top + 1):
                if h[i] == 0 or neg_a[i] != sign:
                    continue
                if pending == 0:
                    pending = i
                    continue
                if wide:
                    _pair64(words, start, width, k - pending, k - i, lo[pending], hi[pending],
                            lo[i], hi[i], cl, ch)
                else:
                    _pair(words, start, width, k - pending, k - i, lo[pending], lo[i], cl, ch)
                pending = 0
            if pending:
                j = k - pending
                row = words[start[j]: start[j] + width[j]]
                if wide:
                    _single64(row, width[j], lo[pending], hi[pending], cl, ch)
                else:
                    _single(row, 0, width[j], lo[pending], cl, ch)
        carry = np.int64(0)
        at = used
        for c in range(size):
            t = col_lo[c] - neg_lo[c] + ((col_hi[c - 1] - neg_hi[c - 1]) if c else np.int64(0))
            t = (-t if flip else t) + carry
            words[at + c] = np.uint32(np.uint64(t) & _M32)
            carry = t >> 32
        w, neg = _trim(words, at, size)
        start[k], width[k], negative[k] = at, w, neg
        used = at + w
    return used


@njit("int64(int64[::1], int64)", cache=CACHE)
def word_capacity(a, n):
    """Words :func:`inverse_words` may need: row ``k`` takes at most ``1 + k (H + 1)`` words
    while it is computed (``H`` the most words of an ``|a_i|``, ``i >= 1``), so ``1 + sum_k``."""
    most = 1
    for i in range(1, min(a.shape[0], n)):
        v = a[i]
        if v >= 2**32 or v <= -(2**32):
            most = 2
    return n + (most + 1) * (n * (n - 1) // 2) + 2 * most + 4


@njit("uint64(uint64[::1], int64)", cache=CACHE, inline="always")
def _digit(mag, d):
    """Bits ``[15 d, 15 d + 15)`` of the 32-bit words ``mag`` (one zero word above the top)."""
    w = (15 * d) >> 5
    off = np.uint64((15 * d) & 31)
    return ((mag[w] | (mag[w + 1] << np.uint64(32))) >> off) & np.uint64(0x7FFF)


@njit("int64(uint8[::1], int64, int64)", cache=CACHE, inline="always")
def _int32(out, pos, v):
    """Little-endian int32 ``v`` at ``out[pos:pos + 4]``; returns ``pos + 4``."""
    u = np.uint64(v)
    for s in range(4):
        out[pos + s] = np.uint8((u >> np.uint64(8 * s)) & np.uint64(0xFF))
    return pos + 4


@njit("int64(uint32[::1], int64[::1], int64[::1], uint8[::1], uint8[::1])", cache=CACHE)
def words_stream(words, start, width, negative, out):
    """The rows of :func:`inverse_words` as a marshal list of Python ints into ``out`` (room for
    :func:`polyconv.engines._pyints.capacity` of ``len(start)`` values of ``32 max(width)``
    bits); returns the bytes used."""
    count = start.shape[0]
    most = 1
    for k in range(count):
        most = max(most, width[k])
    mag = np.empty(most + 1, dtype=np.uint64)
    out[0] = 0x5B  # "[" and the int32 count
    pos = _int32(out, 1, count)
    for k in range(count):
        w = width[k]
        s = start[k]
        carry = np.uint64(1) if negative[k] else np.uint64(0)
        for c in range(w):  # |b_k|: ~x + 1 for a negative row
            x = np.uint64(words[s + c])
            t = ((x ^ _M32) + carry) if negative[k] else x
            mag[c] = t & _M32
            carry = t >> np.uint64(32)
        mag[w] = 0
        digits = (32 * w + 14) // 15
        while digits > 0 and _digit(mag, digits - 1) == 0:
            digits -= 1
        if digits <= 2:  # below 2^30: an int32 item
            v = np.int64(mag[0] & np.uint64(0x3FFFFFFF))
            out[pos] = 0x69
            pos = _int32(out, pos + 1, -v if negative[k] else v)
        else:
            out[pos] = 0x6C
            pos = _int32(out, pos + 1, -digits if negative[k] else digits)
            if _LITTLE:  # one 16-bit store per digit (the stream's words are little-endian)
                dst = out[pos:pos + 2 * digits].view(np.uint16)
                for d in range(digits):
                    dst[d] = np.uint16(_digit(mag, d))
                pos += 2 * digits
            else:
                for d in range(digits):
                    v = _digit(mag, d)
                    out[pos] = np.uint8(v & np.uint64(0xFF))
                    out[pos + 1] = np.uint8(v >> np.uint64(8))
                    pos += 2
    return pos


@njit("uint8[::1](int64[::1], int64)", cache=CACHE)
def inverse_stream(a, n):
    """The marshal stream of ``1/a mod x^n`` (:func:`inverse_words`, then
    :func:`words_stream` into a buffer of the exact size its rows need; at most about
    ``4 word_capacity(a, n)`` bytes, which the caller checks against the memory budget)."""
    words = np.empty(word_capacity(a, n), dtype=np.uint32)
    start = np.empty(n, dtype=np.int64)
    width = np.empty(n, dtype=np.int64)
    negative = np.empty(n, dtype=np.uint8)
    inverse_words(a, n, words, start, width, negative)
    size = 5
    for k in range(n):  # a type byte, an int32, two bytes per 15-bit digit
        size += 5 + 2 * ((32 * width[k] + 14) // 15)
    out = np.empty(size, dtype=np.uint8)
    used = words_stream(words, start, width, negative, out)
    return out[:used]
