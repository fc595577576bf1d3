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
from ._kernels_arith import twist as _twist

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


@njit("uint32[::1](int64[::1])", cache=CACHE, inline="always")
def pads32(primes):
    """:func:`_pads` in uint32 (every pad is below ``2^31``), as :func:`garner_block` takes them."""
    return _pads(primes).astype(np.uint32)


#: Columns per block in the block-wise kernels (their digits stay in the first-level cache).
BLOCK = 256


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], uint32[::1], int64, "
      "int64, uint32[:, ::1])", cache=CACHE, inline="always")
def garner_block(res, primes, inv, invq, pads, start, m, digits):
    """:func:`_digits` of columns ``start..start+m`` at once, prime by prime (loops over the
    block, which the compiler vectorises; ``pads`` from :func:`pads32`)."""
    for i in range(primes.shape[0]):
        p = np.uint32(primes[i])
        pad = pads[i]
        row = digits[i]
        for c in range(m):
            row[c] = np.uint32(res[i, start + c])
        for j in range(i):
            w, wq, prev = np.uint32(inv[i, j]), np.uint32(invq[i, j]), digits[j]
            for c in range(m):
                row[c] = _twist(np.uint32(row[c] + pad - prev[c]), w, wq, p)
        for c in range(m):
            row[c] = min(row[c], np.uint32(row[c] - p))


@njit("void(uint32[:, ::1], int64[::1], int64, uint8[::1], uint8[::1])", cache=CACHE,
      inline="always")
def negative_block(digits, primes, m, negative, decided):
    """``negative[c]``: the value of digits ``digits[:, c]`` exceeds ``floor(P/2)``, whose
    digits are ``(p_i - 1)/2`` (``P`` is odd), compared from the most significant."""
    negative[:m] = 0
    decided[:m] = 0
    for i in range(primes.shape[0] - 1, -1, -1):
        row, h = digits[i], np.uint32((primes[i] - 1) // 2)
        for c in range(m):
            above = np.uint8(1) if row[c] > h else np.uint8(0)
            negative[c] |= above & (decided[c] ^ np.uint8(1))
            decided[c] |= np.uint8(1) if row[c] != h else np.uint8(0)


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], int64[::1])", cache=CACHE)
def garner_int64(res, primes, inv, invq, out):
    """Signed CRT values that fit int64: ``out[c] = x`` or ``x - P`` computed modulo ``2^64``.

    ``inv[i, j] = p_j^-1 mod p_i`` (``j < i``) with Shoup quotients ``invq``; the caller
    guarantees ``|c| < min(2^63, P/2)``.  Block by block: the digits (:func:`garner_block`),
    Horner's rule modulo ``2^64``, the sign (:func:`negative_block`).
    """
    k = primes.shape[0]
    count = res.shape[1]
    total = np.uint64(1)  # P mod 2^64
    for i in range(k):
        total = total * np.uint64(primes[i])
    pads = pads32(primes)
    digits = np.empty((k, BLOCK), dtype=np.uint32)
    negative = np.empty(BLOCK, dtype=np.uint8)
    decided = np.empty(BLOCK, dtype=np.uint8)
    value = np.empty(BLOCK, dtype=np.uint64)
    for start in range(0, count, BLOCK):
        m = min(BLOCK, count - start)
        garner_block(res, primes, inv, invq, pads, start, m, digits)
        for c in range(m):
            value[c] = np.uint64(digits[k - 1, c])
        for i in range(k - 2, -1, -1):
            pi, row = np.uint64(primes[i]), digits[i]
            for c in range(m):
                value[c] = value[c] * pi + np.uint64(row[c])
        negative_block(digits, primes, m, negative, decided)
        for c in range(m):
            out[start + c] = np.int64(value[c] - total if negative[c] else value[c])


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
    count = res.shape[1]
    pads = pads32(primes)
    digits = np.empty((k, BLOCK), dtype=np.uint32)
    acc = np.empty(BLOCK, dtype=np.int64)
    inv_m = 1.0 / float(m)
    um = np.uint64(m)
    for start in range(0, count, BLOCK):
        n = min(BLOCK, count - start)
        garner_block(res, primes, inv, invq, pads, start, n, digits)
        acc[:n] = 0
        for i in range(k - 1, -1, -1):
            pi, row = primes[i], digits[i]
            fp = float(pi) * inv_m
            for c in range(n):
                r = acc[c]
                t = np.int64(np.uint64(r) * np.uint64(pi)
                             - np.uint64(np.int64(float(r) * fp)) * um)
                t = t + m if t < 0 else t
                t = t - m if t >= m else t
                d = np.int64(row[c])  # a digit below 2^30, possibly >= m
                t += d if d < m else d % m
                acc[c] = t - m if t >= m else t
        out[start:start + n] = acc[:n]


_RO_ROWS = types.Array(types.uint8, 2, "C", readonly=True)


@njit(types.void(_RO_ROWS, types.int64[::1], types.int64[::1], types.int64[:, ::1]), cache=CACHE)
def residues_from_rows(rows, primes, wrap, out):
    """``out[i, r] = value(rows[r]) mod primes[i]`` for little-endian two's-complement byte rows;
    ``wrap[i] = 2^(8 width) mod primes[i]`` corrects negative rows.

    A block of rows is read into 32-bit words once; then per prime Horner's rule ``r <- (r 2^32
    + w) mod p`` over the block, each remainder from a float64 quotient estimate (``r 2^32 + w <
    2^62`` and the quotient ``< 2^32``, so the estimate is off by at most one; corrected).
    """
    count, width = rows.shape
    nw = (width + 3) // 4
    block = 256
    words = np.zeros((max(nw, 1), block), dtype=np.int64)
    negative = np.zeros(block, dtype=np.uint8)
    acc = np.empty(block, dtype=np.int64)
    for start in range(0, count, block):
        m = min(block, count - start)
        for c in range(m):
            row = rows[start + c]
            for w in range(nw):
                v = np.int64(0)
                for b in range(min(4, width - 4 * w) - 1, -1, -1):
                    v = (v << np.int64(8)) | np.int64(row[4 * w + b])
                words[w, c] = v
            negative[c] = 1 if width and row[width - 1] >= 128 else 0
        for i in range(primes.shape[0]):
            p = primes[i]
            inv = 1.0 / float(p)
            acc[:m] = 0
            for w in range(nw - 1, -1, -1):
                ww = words[w]
                for c in range(m):
                    x = (acc[c] << np.int64(32)) | ww[c]
                    r = x - np.int64(float(x) * inv) * p
                    r = r + p if r < 0 else r
                    acc[c] = r - p if r >= p else r
            wr = wrap[i]
            for c in range(m):
                r = acc[c] - wr if negative[c] else acc[c]
                out[i, start + c] = r + p if r < 0 else r
