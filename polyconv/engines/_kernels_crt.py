"""Compiled (numba) kernels between integers and their residues modulo several primes.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`; the NTT engines
reach them as attributes of :mod:`polyconv.engines._kernels_ntt`).  Every kernel has one explicit
signature.

* :func:`residues_from_rows`: two's-complement byte rows to residues, by Horner's rule on 32-bit
  words (common practice, no source).
* Garner's algorithm (Knuth, TAOCP vol. 2, 3rd ed., section 4.3.2) turns the residues modulo
  ``p_0..p_{k-1}`` into mixed-radix digits ``t_i < p_i``, ``x = t_0 + p_0 (t_1 + p_1 (...))``;
  the signed value is ``x`` or ``x - P`` (``P = prod p_i``), whichever has absolute value below
  ``P/2``.  :func:`garner_int64` (values that fit int64), :func:`garner_words` (32-bit words of
  any width), :func:`garner_mod` (the value modulo ``m``).
"""

from __future__ import annotations

import numpy as np
from numba import njit, types

from . import jit_state as _jit
from ._kernels_arith import M32 as _M32
from ._kernels_arith import shoup as _shoup

CACHE = _jit.cache_enabled()


@njit("uint64[::1](int64[::1])", cache=CACHE, inline="always")
def _pads(primes):
    """``pad_i = ceil(2^30 / p_i) p_i`` (see :func:`_digits`)."""
    pads = np.empty(primes.shape[0], dtype=np.uint64)
    for i in range(primes.shape[0]):
        p = np.uint64(primes[i])
        pads[i] = (np.uint64(1 << 30) + p - np.uint64(1)) // p * p
    return pads


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], uint64[::1], int64, "
      "uint64[::1])", cache=CACHE, inline="always")
def _digits(res, primes, inv, invq, pads, c, digits):
    """Garner's mixed-radix digits of column ``c``: ``t_i = (..((r_i - t_0) p_0^-1 - t_1)
    p_1^-1 ..) mod p_i``.

    Every digit is below ``2^30``, so ``t + pad_i - t_j`` with ``pad_i = ceil(2^30 / p_i) p_i``
    (a multiple of ``p_i`` of at most ``2^30 + p_i``) stays non-negative and, for ``t < 2 p_i``,
    below ``2^32`` as Shoup's product needs: no division in the loop.
    """
    for i in range(primes.shape[0]):
        p = np.uint64(primes[i])
        pad = pads[i]
        t = np.uint64(res[i, c])
        for j in range(i):
            t = _shoup(t + pad - digits[j], np.uint64(inv[i, j]), np.uint64(invq[i, j]), p)
        if t >= p:
            t -= p
        digits[i] = t


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], int64[::1])", cache=CACHE)
def garner_int64(res, primes, inv, invq, out):
    """Signed CRT values that fit int64: ``out[c] = x`` or ``x - P`` computed modulo ``2^64``.

    ``inv[i, j] = p_j^-1 mod p_i`` (``j < i``) with Shoup quotients ``invq``; the caller
    guarantees ``|c| < min(2^63, P/2)``.  The sign is decided by comparing the mixed-radix digits
    with those of ``floor(P/2)`` from the most significant.
    """
    k = primes.shape[0]
    half = np.empty(k, dtype=np.uint64)
    total = np.uint64(1)  # P mod 2^64
    for i in range(k):
        total = total * np.uint64(primes[i])
    # digits of floor(P/2): P is odd, floor(P/2) = (P - 1)/2 has digits (p_i - 1)/2
    for i in range(k):
        half[i] = np.uint64((primes[i] - 1) // 2)
    digits = np.empty(k, dtype=np.uint64)
    pads = _pads(primes)
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, pads, c, digits)
        value = np.uint64(0)
        above = False
        decided = False
        for i in range(k - 1, -1, -1):
            value = value * np.uint64(primes[i]) + digits[i]
            if not decided and digits[i] != half[i]:
                above = digits[i] > half[i]
                decided = True
        if above:
            value -= total
        out[c] = np.int64(value)


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], uint32[::1], "
      "uint32[:, ::1])", cache=CACHE)
def garner_words(res, primes, inv, invq, modulus_words, out):
    """Signed CRT values as little-endian two's-complement 32-bit words (rows of ``out``).

    ``modulus_words`` holds ``P``; ``out`` has at least one word more than ``P`` needs, so the
    sign bit of ``x - P < 0`` lands in the top word.  Digits and sign as in :func:`garner_int64`.
    """
    k = primes.shape[0]
    words = out.shape[1]
    half = np.empty(k, dtype=np.uint64)
    for i in range(k):
        half[i] = np.uint64((primes[i] - 1) // 2)
    digits = np.empty(k, dtype=np.uint64)
    pads = _pads(primes)
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, pads, c, digits)
        row = out[c]
        for w in range(words):
            row[w] = 0
        above = False
        decided = False
        used = 1
        for i in range(k - 1, -1, -1):
            # row <- row * p_i + t_i over the words in use
            carry = digits[i]
            pi = np.uint64(primes[i])
            for w in range(used):
                t = np.uint64(row[w]) * pi + carry
                row[w] = np.uint32(t & _M32)
                carry = t >> np.uint64(32)
            if carry and used < words:
                row[used] = np.uint32(carry)
                used += 1
            if not decided and digits[i] != half[i]:
                above = digits[i] > half[i]
                decided = True
        if above:  # row <- row - P  (two's complement over all words)
            borrow = np.uint64(0)
            for w in range(words):
                t = np.uint64(row[w]) - np.uint64(modulus_words[w]) - borrow
                row[w] = np.uint32(t & _M32)
                borrow = np.uint64(1) if (t >> np.uint64(63)) else np.uint64(0)


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], int64, int64[::1])",
      cache=CACHE)
def garner_mod(res, primes, inv, invq, m, out):
    """``out[c] = x mod m`` for the CRT value ``0 <= x < P`` (non-negative products), ``m < 2^62``.

    Horner's rule ``r <- r p_i + t_i (mod m)``; each ``r p_i`` is reduced with a float64
    quotient estimate, exact to within one unit because ``r p_i / m < 2^31``, and the remainder
    ``r p_i - q m`` (in ``[-m, 2m)``) is formed in wrapping 64-bit arithmetic and corrected.
    """
    k = primes.shape[0]
    digits = np.empty(k, dtype=np.uint64)
    pads = _pads(primes)
    inv_m = 1.0 / float(m)
    um = np.uint64(m)
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, pads, c, digits)
        r = np.int64(0)
        for i in range(k - 1, -1, -1):
            pi = primes[i]
            q = np.int64(float(r) * float(pi) * inv_m)
            t = np.int64(np.uint64(r) * np.uint64(pi) - np.uint64(q) * um)
            while t < 0:
                t += m
            while t >= m:
                t -= m
            t += np.int64(digits[i]) % m if np.int64(digits[i]) >= m else np.int64(digits[i])
            if t >= m:
                t -= m
            r = t
        out[c] = r


@njit("void(uint8[:, ::1], int64[::1], int64[::1], int64[:, ::1])", cache=CACHE)
def residues_from_rows(rows, primes, wrap, out):
    """``out[i, r] = value(rows[r]) mod primes[i]`` for little-endian two's-complement byte rows;
    ``wrap[i] = 2^(8 width) mod primes[i]`` corrects negative rows."""
    count, width = rows.shape
    lead = width % 4
    for i in range(primes.shape[0]):
        p = np.uint64(primes[i])
        for r in range(count):
            row = rows[r]
            acc = np.uint64(0)
            top = width
            if lead:
                for b in range(width - 1, width - lead - 1, -1):
                    acc = (acc << np.uint64(8)) | np.uint64(row[b])
                top = width - lead
            acc = acc % p
            for w in range(top - 4, -1, -4):
                word = ((np.uint64(row[w + 3]) << np.uint64(24))
                        | (np.uint64(row[w + 2]) << np.uint64(16))
                        | (np.uint64(row[w + 1]) << np.uint64(8)) | np.uint64(row[w]))
                acc = ((acc << np.uint64(32)) | word) % p
            if width and row[width - 1] >= 128:
                acc = (acc + p - np.uint64(wrap[i])) % p
            out[i, r] = np.int64(acc)


# ------------------------------------------------------------------ Python ints by marshal
#
# The fastest route measured from machine words to Python ints is CPython's own ``marshal.loads``
# of a list (its C loop allocates each int from 15-bit digits; 25 ns per 130-bit value against
# 130-180 ns for ``int.from_bytes`` per row).  These kernels write that stream: ``[`` and an
# int32 count, then per value ``i`` and an int32 (|x| < 2^31), or ``l``, the signed int32 digit
# count and the little-endian 15-bit digits with a nonzero top digit (CPython's
# Python/marshal.c, ``w_PyLong``/``r_PyLong``).  :mod:`polyconv.engines._pyints` checks the
# format against ``marshal.loads`` once per process before trusting it.

_RO_ROWS = types.Array(types.uint8, 2, "C", readonly=True)


@njit("int64(uint8[::1], int64, int64)", cache=CACHE, inline="always")
def _put_int32(out, pos, v):
    """Little-endian int32 ``v`` at ``out[pos:pos + 4]``; returns ``pos + 4``."""
    u = np.uint64(v)
    for s in range(4):
        out[pos + s] = np.uint8((u >> np.uint64(8 * s)) & np.uint64(0xFF))
    return pos + 4


@njit("int64(uint32[::1], int64, boolean, uint8[::1], int64)", cache=CACHE, inline="always")
def _emit(mag, nwords, negative, out, pos):
    """Write ``(-1)^negative * sum mag[w] 2^(32 w)`` (``w < nwords``) at ``out[pos:]``; returns the
    position after it."""
    while nwords > 0 and mag[nwords - 1] == 0:
        nwords -= 1
    if nwords == 0 or (nwords == 1 and mag[0] < np.uint32(1 << 31)):
        v = np.int64(mag[0]) if nwords else np.int64(0)
        out[pos] = 0x69
        return _put_int32(out, pos + 1, -v if negative else v)
    q = pos + 5
    acc = np.uint64(0)
    bits = np.uint64(0)
    for w in range(nwords):
        acc |= np.uint64(mag[w]) << bits
        bits += np.uint64(32)
        while bits >= np.uint64(15):
            out[q] = np.uint8(acc & np.uint64(0xFF))
            out[q + 1] = np.uint8((acc >> np.uint64(8)) & np.uint64(0x7F))
            q += 2
            acc >>= np.uint64(15)
            bits -= np.uint64(15)
    if acc:
        out[q] = np.uint8(acc & np.uint64(0xFF))
        out[q + 1] = np.uint8(acc >> np.uint64(8))
        q += 2
    while out[q - 1] == 0 and out[q - 2] == 0:  # the top word is nonzero: this stops
        q -= 2
    out[pos] = 0x6C
    count = (q - pos - 5) // 2
    _put_int32(out, pos + 1, -count if negative else count)
    return q


@njit("int64(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], uint32[::1], uint8[::1])",
      cache=CACHE)
def garner_stream(res, primes, inv, invq, modulus_words, out):
    """Signed CRT values (as :func:`garner_int64`) written as a marshal list into ``out``;
    returns the bytes used.

    ``modulus_words`` holds ``P`` in exactly as many 32-bit words as it needs.  The digits are
    computed a block of columns at a time, prime by prime (loops the compiler vectorises); each
    value is then built by Horner's rule over 32-bit words, and a value above ``floor(P/2)`` is
    written as ``-(P - x)``.
    """
    k = primes.shape[0]
    count = res.shape[1]
    words = modulus_words.shape[0]
    block = 256
    digits = np.empty((k, block), dtype=np.uint64)
    pads = _pads(primes)
    half = np.empty(k, dtype=np.uint64)
    for i in range(k):
        half[i] = np.uint64((primes[i] - 1) // 2)
    mag = np.zeros(words + 1, dtype=np.uint32)
    out[0] = 0x5B
    pos = _put_int32(out, 1, count)
    for start in range(0, count, block):
        m = min(block, count - start)
        for i in range(k):
            p = np.uint64(primes[i])
            pad = pads[i]
            row = digits[i]
            for c in range(m):
                row[c] = np.uint64(res[i, start + c])
            for j in range(i):
                w, wq, prev = np.uint64(inv[i, j]), np.uint64(invq[i, j]), digits[j]
                for c in range(m):
                    row[c] = _shoup(row[c] + pad - prev[c], w, wq, p)
            for c in range(m):
                row[c] = row[c] - p if row[c] >= p else row[c]
        for c in range(m):
            mag[0] = np.uint32(digits[k - 1, c])
            used = 1
            for i in range(k - 2, -1, -1):
                carry = digits[i, c]
                pi = np.uint64(primes[i])
                for w in range(used):
                    t = np.uint64(mag[w]) * pi + carry
                    mag[w] = np.uint32(t & _M32)
                    carry = t >> np.uint64(32)
                if carry:
                    mag[used] = np.uint32(carry)
                    used += 1
            above = False
            for i in range(k - 1, -1, -1):
                if digits[i, c] != half[i]:
                    above = digits[i, c] > half[i]
                    break
            if above:  # mag <- P - mag
                for w in range(used, words):
                    mag[w] = 0
                borrow = np.uint64(0)
                for w in range(words):
                    t = np.uint64(modulus_words[w]) - np.uint64(mag[w]) - borrow
                    mag[w] = np.uint32(t & _M32)
                    borrow = t >> np.uint64(63)
                used = words
            pos = _emit(mag, used, above, out, pos)
    return pos


@njit(types.int64(_RO_ROWS, types.boolean, types.boolean, types.uint8[::1]), cache=CACHE)
def rows_stream(rows, signed, borrowed, out):
    """The integers of little-endian byte rows written as a marshal list into ``out``; returns
    the bytes used.

    ``signed``: rows are two's complement.  ``borrowed``: row ``r`` stands for its signed value
    plus the top bit of row ``r - 1`` (Kronecker slots, :func:`polyconv.engines._intpack
    .unpack_signed`).  Each row is read into 32-bit words sign-extended by one word, so adding
    the borrow cannot overflow.
    """
    count, width = rows.shape
    nw = width // 4 + 1
    mag = np.zeros(nw, dtype=np.uint32)
    out[0] = 0x5B
    pos = _put_int32(out, 1, count)
    for r in range(count):
        row = rows[r]
        fill = np.uint32(0xFFFFFFFF) if signed and width and row[width - 1] >= 128 else np.uint32(0)
        for w in range(nw):
            mag[w] = fill
        full = width // 4
        for w in range(full):
            mag[w] = (np.uint32(row[4 * w]) | (np.uint32(row[4 * w + 1]) << np.uint32(8))
                      | (np.uint32(row[4 * w + 2]) << np.uint32(16))
                      | (np.uint32(row[4 * w + 3]) << np.uint32(24)))
        if width % 4:
            v = np.uint32(fill)
            for b in range(width - 1, 4 * full - 1, -1):
                v = (v << np.uint32(8)) | np.uint32(row[b])
            mag[full] = v
        if borrowed and r > 0 and rows[r - 1, width - 1] >= 128:
            for w in range(nw):
                mag[w] = np.uint32((np.uint64(mag[w]) + np.uint64(1)) & _M32)
                if mag[w] != 0:
                    break
        negative = signed and mag[nw - 1] >= np.uint32(1 << 31)
        if negative:  # magnitude of a two's complement value: ~x + 1
            carry = np.uint64(1)
            for w in range(nw):
                v = (np.uint64(mag[w]) ^ _M32) + carry
                mag[w] = np.uint32(v & _M32)
                carry = v >> np.uint64(32)
        pos = _emit(mag, nw, negative, out, pos)
    return pos
