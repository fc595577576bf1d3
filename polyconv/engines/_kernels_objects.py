"""Compiled (numba) kernels for one short exact product of Python-int operands.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`, after
:mod:`polyconv.engines._kernels_stream` and :mod:`polyconv.engines._kernels_ntt`, whose stream
reader, Garner writer and NTT product they reuse); called by :mod:`polyconv.engines.ntt_stream`.
The operands come in as ``marshal.dumps(list, 2)`` streams (CPython's Python/marshal.c,
``w_PyLong``: ``[``, an int32 count, then per item ``i`` and an int32, or ``l``, the signed digit
count and the little-endian 15-bit digits, the top one nonzero).

* :func:`stream_bits`: checks that two streams are lists of ints and measures them (the bit
  length of the largest magnitude of each).
* :func:`stream_product`: residues modulo the NTT primes, one NTT product per prime
  (:func:`polyconv.engines._kernels_ntt.product_mod_prime`) and Garner's recombination (Knuth,
  TAOCP vol. 2, section 4.3.2) written as a marshal stream of Python ints
  (:func:`polyconv.engines._kernels_stream.garner_stream`), in one call: no byte rows, no
  Python per prime.
"""

from __future__ import annotations

import numpy as np
from numba import njit, types

from . import jit_state as _jit
from ._kernels_ntt import product_mod_prime
from ._kernels_stream import _get_int32, garner_stream

CACHE = _jit.cache_enabled()


_RO_BYTES = types.Array(types.uint8, 1, "C", readonly=True)


@njit(inline="always")
def _list_bits(buf):
    """``(bits, negative)``: the bit length of the largest ``|v|`` of a marshal list of ints (a
    ``marshal.dumps(list, 2)`` stream: ``[``, an int32 count, then per item ``i`` and an int32,
    or ``l``, the signed digit count and 15-bit digits, the top one nonzero) and 1 when some
    ``v < 0`` (else 0); ``(-1, 0)`` when the stream holds anything else (another item type, a
    zero digit count, a truncated stream)."""
    size = buf.shape[0]
    if size < 5 or buf[0] != 0x5B:
        return -1, 0
    count = _get_int32(buf, 1)
    pos = 5
    top = 0
    negative = 0
    for _ in range(count):
        if pos + 5 > size:
            return -1, 0
        kind = buf[pos]
        n = _get_int32(buf, pos + 1)
        pos += 5
        if n < 0:
            negative = 1
        if kind == 0x69:
            v = -n if n < 0 else n
            bits = 0
        elif kind == 0x6C and n != 0:
            nd = -n if n < 0 else n
            if pos + 2 * nd > size:
                return -1, 0
            v = np.int64(buf[pos + 2 * nd - 2]) | (np.int64(buf[pos + 2 * nd - 1]) << 8)
            if v == 0 or v >= 1 << 15:
                return -1, 0
            bits = 15 * (nd - 1)
            pos += 2 * nd
        else:
            return -1, 0
        while v:
            bits += 1
            v >>= 1
        top = max(top, bits)
    return (top, negative) if pos == size else (-1, 0)


@njit(types.UniTuple(types.int64, 4)(_RO_BYTES, _RO_BYTES), cache=CACHE)
def stream_bits(da, db):
    """:func:`_list_bits` of two streams: ``(bits_a, bits_b, negative_a, negative_b)`` (bit
    lengths of ``max|a|`` and ``max|b|``, -1: not a list of ints; 1 where an entry is
    negative)."""
    bits_a, neg_a = _list_bits(da)
    bits_b, neg_b = _list_bits(db)
    return bits_a, bits_b, neg_a, neg_b


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
