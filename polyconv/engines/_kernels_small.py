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
* :func:`stream_bits` and :func:`stream_product`: one exact product of Python-int operands read
  from ``marshal.dumps(list, 2)`` streams: residues modulo the NTT primes, one NTT product per
  prime and Garner's recombination into a marshal stream, in one call (no byte rows, no Python
  per prime).
* :func:`product_mod_odd`: the coefficients modulo an odd ``m < 2^63`` as int64, the 192-bit
  sums reduced once per coefficient: ``w0 + w1 R + w2 R^2`` (``R = 2^64``) by Montgomery's
  reduction ``REDC(T) = T R^-1 mod m`` (P. L. Montgomery, "Modular multiplication without trial
  division", Math. Comp. 44 (1985) 519-521) of ``(w1 mod m)(R^2 mod m)`` and ``(w2 mod m)(R^3
  mod m)``.
"""

from __future__ import annotations

import numpy as np
from numba import njit, types

from . import jit_state as _jit
from ._kernels_arith import M32 as _M32
from ._kernels_batch import _product_128, mul_u128
from ._kernels_crt import BLOCK
from ._kernels_ntt import product_mod_prime
from ._kernels_stream import _digits15, _get_int32, _magnitudes, _start, _write, garner_stream

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
    return product_stream(ra, rb, buf)


@njit("int64(int64[:], int64[:], int64[::1], uint8[::1])", cache=CACHE)
def tiny_exact(a, b, out, buf):
    """:func:`tiny_auto` without a modulus (four arguments: a shorter dispatch)."""
    return tiny_auto(a, b, 0, _ZERO, _ZERO, _ZERO, out, buf)


@njit("UniTuple(uint64, 2)(int64[:], int64[:])", cache=CACHE)
def magnitudes(a, b):
    """``(max|a|, max|b|)`` as uint64 (one pass each; ``2^63`` for ``-2^63``)."""
    return _magnitude(a), _magnitude(b)


_RO_BYTES = types.Array(types.uint8, 1, "C", readonly=True)


@njit(inline="always")
def _list_bits(buf):
    """The bit length of the largest ``|v|`` of a marshal list of ints (a ``marshal.dumps(list,
    2)`` stream: ``[``, an int32 count, then per item ``i`` and an int32, or ``l``, the signed
    digit count and 15-bit digits, the top one nonzero), or -1 when the stream holds anything
    else (another item type, a zero digit count, a truncated stream)."""
    size = buf.shape[0]
    if size < 5 or buf[0] != 0x5B:
        return -1
    count = _get_int32(buf, 1)
    pos = 5
    top = 0
    for _ in range(count):
        if pos + 5 > size:
            return -1
        kind = buf[pos]
        n = _get_int32(buf, pos + 1)
        pos += 5
        if kind == 0x69:
            v = -n if n < 0 else n
            bits = 0
        elif kind == 0x6C and n != 0:
            nd = -n if n < 0 else n
            if pos + 2 * nd > size:
                return -1
            v = np.int64(buf[pos + 2 * nd - 2]) | (np.int64(buf[pos + 2 * nd - 1]) << 8)
            if v == 0 or v >= 1 << 15:
                return -1
            bits = 15 * (nd - 1)
            pos += 2 * nd
        else:
            return -1
        while v:
            bits += 1
            v >>= 1
        top = max(top, bits)
    return top if pos == size else -1


@njit(types.UniTuple(types.int64, 2)(_RO_BYTES, _RO_BYTES), cache=CACHE)
def stream_bits(da, db):
    """:func:`_list_bits` of two streams (bit lengths of ``max|a|`` and ``max|b|``; -1: not a
    list of ints)."""
    return _list_bits(da), _list_bits(db)


_MASK30 = (1 << 30) - 1


@njit(inline="always")
def _stream_residues(buf, primes, out):
    """``out[i, c] = v_c mod primes[i]`` for the ints ``v_c`` of a stream that
    :func:`_list_bits` accepted: the 15-bit digits are paired into 30-bit chunks, then per
    prime Horner's rule ``r <- (r 2^30 + w) mod p`` over all values at once, each remainder from
    a float64 quotient estimate (``r 2^30 + w < 2^60``, off by at most one; corrected), as
    :func:`polyconv.engines._kernels_crt.residues_from_rows` does with 32-bit words."""
    count = out.shape[1]
    pos = 5
    chunks = 2
    for _ in range(count):  # the longest value, in 30-bit chunks
        n = _get_int32(buf, pos + 1)
        pos += 5
        if buf[pos - 5] == 0x6C:
            nd = -n if n < 0 else n
            chunks = max(chunks, (nd + 1) // 2)
            pos += 2 * nd
    words = np.zeros((chunks, count), dtype=np.int64)
    negative = np.zeros(count, dtype=np.uint8)
    pos = 5
    for c in range(count):
        n = _get_int32(buf, pos + 1)
        negative[c] = 1 if n < 0 else 0
        pos += 5
        if buf[pos - 5] == 0x69:
            v = -n if n < 0 else n
            words[0, c] = v & _MASK30
            words[1, c] = v >> 30
        else:
            nd = -n if n < 0 else n
            for d in range(nd):
                digit = np.int64(buf[pos + 2 * d]) | (np.int64(buf[pos + 2 * d + 1]) << 8)
                words[d >> 1, c] |= digit << (15 * (d & 1))
            pos += 2 * nd
    acc = np.empty(count, dtype=np.int64)
    for i in range(primes.shape[0]):
        p = primes[i]
        inv = 1.0 / float(p)
        acc[:] = 0
        for w in range(chunks - 1, -1, -1):
            ww = words[w]
            for c in range(count):
                x = (acc[c] << 30) | ww[c]
                r = x - np.int64(float(x) * inv) * p
                r = r + p if r < 0 else r
                acc[c] = r - p if r >= p else r
        row = out[i]
        for c in range(count):
            row[c] = p - acc[c] if negative[c] and acc[c] else acc[c]


@njit(types.int64(_RO_BYTES, _RO_BYTES, types.uint32[:, :, ::1], types.uint64[:, ::1],
                  types.int64[:, :, ::1], types.uint32[::1], types.int64, types.uint8[::1]),
      cache=CACHE)
def stream_product(da, db, tab, consts, garner, modulus_words, count, out):
    """The first ``count`` coefficients of the exact product of the ints of two streams that
    :func:`stream_bits` accepted, written as a marshal list into ``out``; returns the bytes used.

    Prime ``i`` has the transform tables ``tab[:, i]`` (twiddles, Shoup quotients, inverse
    twiddles, theirs; ``tab.shape[2]``-point transforms, a power of two ``>= n1 + n2 - 1``) and
    the constants ``consts[:, i]`` (``p``, ``-p^-1 mod 2^32``, ``f``, ``f``'s quotient, as
    :func:`polyconv.engines._kernels_ntt.product_mod_prime` takes them); ``garner`` holds the
    Garner inverses and their quotients and ``modulus_words`` ``P``, as for
    :func:`polyconv.engines._kernels_stream.garner_stream` (``P > 2 max|c_k|``)."""
    k = consts.shape[1]
    n = tab.shape[2]
    primes = np.empty(k, dtype=np.int64)
    for i in range(k):
        primes[i] = np.int64(consts[0, i])
    ra = np.empty((k, _get_int32(da, 1)), dtype=np.int64)
    rb = np.empty((k, _get_int32(db, 1)), dtype=np.int64)
    _stream_residues(da, primes, ra)
    _stream_residues(db, primes, rb)
    res = np.empty((k, count), dtype=np.int64)
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    for i in range(k):
        product_mod_prime(ra[i], rb[i], consts[0, i], tab[0, i], tab[1, i], tab[2, i],
                          tab[3, i], consts[1, i], consts[2, i], consts[3, i], fa, fb, res[i])
    return garner_stream(res, primes, garner[0], garner[1], modulus_words, out)
