"""Compiled (numba) kernels for one short product of 64-bit operands with wide sums.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`, after
:mod:`polyconv.engines._kernels_stream`, whose stream writer they reuse); called by
:mod:`polyconv.pipeline.small`.  A product of two int64 sequences of at most ``2^12`` terms has
coefficients below ``2^12 2^126 = 2^138``, so schoolbook sums in 192-bit two's complement (three
uint64 words) are exact (sums modulo ``2^192``; common practice, no source).

* :func:`product_stream`: the exact coefficients, written straight as a ``marshal`` list of
  Python ints (one ``marshal.loads`` makes them all; see :mod:`polyconv.engines._pyints`).
* :func:`tiny_auto`: either of these, or int64 sums when they fit, with the pipeline's
  dtype rule decided in the kernel (one call per tiny product of two int64 arrays).
* :func:`product_mod_odd`: the coefficients modulo an odd ``m < 2^63`` as int64, the 192-bit
  sums reduced once per coefficient: ``w0 + w1 R + w2 R^2`` (``R = 2^64``) by Montgomery's
  reduction ``REDC(T) = T R^-1 mod m`` (P. L. Montgomery, "Modular multiplication without trial
  division", Math. Comp. 44 (1985) 519-521) of ``(w1 mod m)(R^2 mod m)`` and ``(w2 mod m)(R^3
  mod m)``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit
from ._kernels_arith import M32 as _M32
from ._kernels_batch import _product_128, mul_u128
from ._kernels_crt import BLOCK
from ._kernels_stream import _digits15, _magnitudes, _put_int32, _start, _write

CACHE = _jit.cache_enabled()

_ONE = np.uint64(1)
_ZERO = np.uint64(0)
_ALL = np.uint64(0xFFFFFFFFFFFFFFFF)


@njit(inline="always")  # no signature: inlined into the kernels below only
def _add_192(s0, s1, s2, k, high, low, extend):
    """``s[k] += (extend 2^128 + high 2^64 + low)`` in 192-bit words (modulo ``2^192``)."""
    t = s0[k] + low
    c0 = _ONE if t < low else _ZERO
    s0[k] = t
    u = s1[k] + high
    c1 = _ONE if u < high else _ZERO
    v = u + c0
    if v < c0:
        c1 += _ONE
    s1[k] = v
    s2[k] += extend + c1


@njit(inline="always")
def _sums_192(a, b, s0, s1, s2):
    """The full product of int64 ``a`` and ``b`` as 192-bit two's complement words."""
    s0[:] = 0
    s1[:] = 0
    s2[:] = 0
    n2 = b.shape[0]
    for i in range(a.shape[0]):
        x = a[i]
        if x == 0:
            continue
        for j in range(n2):
            high, low = _product_128(x, b[j])
            _add_192(s0, s1, s2, i + j, high, low, _ALL if high >> np.uint64(63) else _ZERO)


@njit("int64(int64[:], int64[:], uint8[::1])", cache=CACHE)
def product_stream(a, b, out):
    """The exact full product of int64 ``a`` and ``b`` written as a marshal list of Python ints
    into ``out`` (:func:`polyconv.engines._pyints.capacity` of ``len(a) + len(b) - 1`` values of
    192 bits); returns the bytes used."""
    count = a.shape[0] + b.shape[0] - 1
    s0 = np.empty(count, dtype=np.uint64)
    s1 = np.empty(count, dtype=np.uint64)
    s2 = np.empty(count, dtype=np.uint64)
    _sums_192(a, b, s0, s1, s2)
    nw = 6
    blk = min(BLOCK, count)  # (tiny products: small buffers, allocated in far less time)
    x = np.zeros((nw + 1, blk), dtype=np.uint64)
    carry = np.empty(blk, dtype=np.uint64)
    negative = np.empty(blk, dtype=np.uint8)
    dg = np.empty(((32 * nw + 14) // 15, blk), dtype=np.uint16)
    pos = _start(out, count)
    for start in range(0, count, blk):
        m = min(blk, count - start)
        for c in range(m):
            k = start + c
            w0, w1, w2 = s0[k], s1[k], s2[k]
            x[0, c] = w0 & _M32
            x[1, c] = w0 >> np.uint64(32)
            x[2, c] = w1 & _M32
            x[3, c] = w1 >> np.uint64(32)
            x[4, c] = w2 & _M32
            x[5, c] = w2 >> np.uint64(32)
            negative[c] = np.uint8(1) if w2 >> np.uint64(63) else np.uint8(0)
            carry[c] = np.uint64(negative[c])
        _magnitudes(x, nw, m, negative, carry)
        _digits15(x, m, dg)
        pos = _write(dg, negative, m, out, pos)
    return pos


@njit(inline="always")
def _redc(high, low, m, m_neg_inv):
    """``(high 2^64 + low) 2^-64 mod m`` for ``high < m < 2^63`` odd (Montgomery's REDC)."""
    u = low * m_neg_inv
    uh, _ = mul_u128(u, m)
    t = high + uh + (_ONE if low != _ZERO else _ZERO)  # low + (u m mod 2^64) is 0 or 2^64
    return t - m if t >= m else t


@njit("void(int64[:], int64[:], uint64, uint64, uint64, uint64, int64[::1])", cache=CACHE)
def product_mod_odd(a, b, m, m_neg_inv, r2, r3, out):
    """``out = a * b mod m`` (full product) for residues ``a``, ``b`` in ``[0, m)``, ``m < 2^63``
    odd; ``m_neg_inv = -m^-1 mod 2^64``, ``r2 = 2^128 mod m``, ``r3 = 2^192 mod m``."""
    count = out.shape[0]
    s0 = np.empty(count, dtype=np.uint64)
    s1 = np.empty(count, dtype=np.uint64)
    s2 = np.empty(count, dtype=np.uint64)
    _sums_192(a, b, s0, s1, s2)  # non-negative operands: no sign words
    for k in range(count):
        h1, l1 = mul_u128(s1[k] % m, r2)
        h2, l2 = mul_u128(s2[k] % m, r3)
        t = _redc(h1, l1, m, m_neg_inv) + _redc(h2, l2, m, m_neg_inv)  # each < m < 2^63
        t = t - m if t >= m else t
        t += s0[k] % m
        out[k] = np.int64(t - m if t >= m else t)


#: Products of at most this many coefficients plus one are summed and written one coefficient
#: at a time (:func:`_stream_direct`: no work arrays; measured 3 x 2, 63-bit: 0.5 us against
#: 0.7 us for :func:`product_stream`).
DIRECT_COUNT = 12


@njit(inline="always")
def _put_192(out, pos, w0, w1, w2):
    """Write the 192-bit two's complement value ``w2 2^128 + w1 2^64 + w0`` (below ``2^191`` in
    magnitude) as one marshal item at ``out[pos:]`` (up to 31 bytes: the digits are written in
    place first, the header after); returns the position after it."""
    negative = w2 >> np.uint64(63) != _ZERO
    if negative:  # the magnitude: ~w + 1
        w0 = ~w0 + _ONE
        c = _ONE if w0 == _ZERO else _ZERO
        w1 = ~w1 + c
        c = _ONE if (c != _ZERO and w1 == _ZERO) else _ZERO
        w2 = ~w2 + c
    top = 0
    first = _ZERO
    for d in range(13):  # 15-bit digits of at most 192 bits
        bit = 15 * d
        word = bit >> 6
        off = np.uint64(bit & 63)
        lo = w0 if word == 0 else (w1 if word == 1 else w2)
        v = lo >> off
        if off > np.uint64(49) and word < 2:
            v |= (w1 if word == 0 else w2) << (np.uint64(64) - off)
        v &= np.uint64(0x7FFF)
        if d < 2:
            first |= v << np.uint64(15 * d)
        out[pos + 5 + 2 * d] = np.uint8(v & np.uint64(0xFF))
        out[pos + 6 + 2 * d] = np.uint8(v >> np.uint64(8))
        if v:
            top = d + 1
    if top <= 2:  # below 2^30: an int32 item
        out[pos] = 0x69
        v = np.int64(first)
        return _put_int32(out, pos + 1, -v if negative else v)
    out[pos] = 0x6C
    _put_int32(out, pos + 1, -top if negative else top)
    return pos + 5 + 2 * top


@njit(inline="always")
def _stream_direct(a, b, out):
    """:func:`product_stream` one coefficient at a time (the sums in three words, then
    :func:`_put_192`), for the tiniest products."""
    n1 = a.shape[0]
    n2 = b.shape[0]
    count = n1 + n2 - 1
    pos = _start(out, count)
    for k in range(count):
        w0 = _ZERO
        w1 = _ZERO
        w2 = _ZERO
        for i in range(max(0, k - n2 + 1), min(k, n1 - 1) + 1):
            high, low = _product_128(a[i], b[k - i])
            t = w0 + low
            c0 = _ONE if t < low else _ZERO
            w0 = t
            u = w1 + high
            c1 = _ONE if u < high else _ZERO
            v = u + c0
            if v < c0:
                c1 += _ONE
            w1 = v
            w2 += (_ALL if high >> np.uint64(63) else _ZERO) + c1
        pos = _put_192(out, pos, w0, w1, w2)
    return pos


@njit(inline="always")
def _magnitude(a):
    """``max|a|`` of an int64 array as a uint64 (``2^63`` for ``-2^63``)."""
    top = _ZERO
    for i in range(a.shape[0]):
        x = a[i]
        u = np.uint64(-x) if x < 0 else np.uint64(x)
        if u > top:
            top = u
    return top


@njit(inline="always")
def _rounded(u):
    """``2^bits(u) - 1`` (``R(v)`` of :func:`polyconv.pipeline.facts.integer_facts`)."""
    r = _ZERO
    while r < u:
        r = (r << _ONE) | _ONE
    return r


@njit("int64(int64[:], int64[:], int64, uint64, uint64, uint64, int64[::1], uint8[::1])",
      cache=CACHE)
def tiny_auto(a, b, m, m_neg_inv, r2, r3, out, buf):
    """The full product of int64 ``a`` and ``b`` (any strides), with the pipeline's dtype rule
    decided here: ``m = 0``: int64 into ``out`` (returns -1) when ``min(n1, n2) R(max|a|)
    R(max|b|) < 2^63``, else the Python ints as a marshal stream into ``buf`` (returns its
    length, as :func:`product_stream`); odd ``m < 2^63`` (constants as for
    :func:`product_mod_odd`): the residues into ``out`` (returns -1)."""
    n1 = a.shape[0]
    n2 = b.shape[0]
    if m > 0:
        ra = np.empty(n1, dtype=np.int64)
        rb = np.empty(n2, dtype=np.int64)
        for i in range(n1):
            ra[i] = a[i] % m  # (Python's sign rule: in [0, m))
        for j in range(n2):
            rb[j] = b[j] % m
        ma = _magnitude(ra)
        mb = _magnitude(rb)
    else:
        ra = a
        rb = b
        ma = _rounded(_magnitude(a))
        mb = _rounded(_magnitude(b))
    high, low = mul_u128(ma, mb)
    terms = np.uint64(min(n1, n2))
    if high == _ZERO and low <= np.uint64(0x7FFFFFFFFFFFFFFF) // terms:  # bound < 2^63
        out[:] = 0
        for i in range(n1):
            x = ra[i]
            if x == 0:
                continue
            for j in range(n2):
                out[i + j] += x * rb[j]
        if m > 0:
            for k in range(out.shape[0]):
                out[k] %= m
        return -1
    if m > 0:
        product_mod_odd(ra, rb, np.uint64(m), m_neg_inv, r2, r3, out)
        return -1
    if n1 + n2 <= DIRECT_COUNT:
        return _stream_direct(ra, rb, buf)
    return product_stream(ra, rb, buf)


@njit("int64(int64[:], int64[:], int64[::1], uint8[::1])", cache=CACHE)
def tiny_exact(a, b, out, buf):
    """:func:`tiny_auto` without a modulus (four arguments: a shorter dispatch)."""
    return tiny_auto(a, b, 0, _ZERO, _ZERO, _ZERO, out, buf)


@njit("UniTuple(uint64, 2)(int64[:], int64[:])", cache=CACHE)
def magnitudes(a, b):
    """``(max|a|, max|b|)`` as uint64 (one pass each; ``2^63`` for ``-2^63``)."""
    return _magnitude(a), _magnitude(b)



#: Entries below this in magnitude have exact float64 squares (``< 2^52``).
_SQUARE_LIMIT = 1 << 26
#: Sums of squares below this are exact in float64 whatever the order of summation.
_SUM_LIMIT = 1 << 53


@njit("int64(int64[:])", cache=CACHE)
def square_sum(a):
    """``sum a_i^2`` exactly, or -1 when some ``|a_i| >= 2^26`` or the sum reaches ``2^53`` (then
    a float64 sum of the squares could round; below, every partial sum is an integer under
    ``2^53``, so any float64 summation gives exactly this value)."""
    total = 0
    for i in range(a.shape[0]):
        x = a[i]
        if x >= _SQUARE_LIMIT or x <= -_SQUARE_LIMIT:
            return -1
        total += x * x
        if total >= _SUM_LIMIT:
            return -1
    return total
