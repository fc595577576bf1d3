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
from numba import njit

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

