"""Compiled (numba) kernels of the NTT engines: transforms, products, Garner CRT, residues.

Import this module only through :func:`polyconv.jit.kernels`, which decides the cache directory
before numba is imported and records whether the kernels were compiled or loaded from cache.
Every kernel has one explicit signature, so importing the module compiles (or loads) all of them
at once and no call ever waits for the compiler.

Arithmetic (all residues modulo primes ``p < 2^30``, stored in uint32 inside the transforms):

* Butterflies keep values in ``[0, 2p)`` ("delayed" or lazy reduction, D. Harvey, "Faster
  arithmetic for number-theoretic transforms", J. Symbolic Comput. 60 (2014) 113-119, section
  2); ``4p < 2^32`` so every sum fits a 32-bit word.
* Multiplication by a known constant ``w`` uses Shoup's precomputed quotient
  ``w' = floor(w 2^32 / p)``: for ``t < 2^32``, ``q = (t w') >> 32`` and ``r = t w - q p`` lies in
  ``[0, 2p)`` (V. Shoup, NTL; Harvey 2014, Algorithm 1).
* Products of two variables use Montgomery's reduction with ``R = 2^32`` (P. L. Montgomery,
  "Modular multiplication without trial division", Math. Comp. 44 (1985) 519-521): for
  ``T = x y < 4p^2``, ``t = (T + ((T mod R) p') mod R) p) / R`` is ``x y R^-1`` in ``[0, 2p)``
  with ``p' = -p^-1 mod R``.  The factor ``R / n`` that undoes ``R^-1`` and scales the inverse
  transform is applied in the same pass by a Shoup multiplication.
* The forward transform is decimation in frequency (Gentleman-Sande: natural order in,
  bit-reversed out), the inverse decimation in time (Cooley-Tukey: bit-reversed in, natural out),
  so no permutation is performed; stages whose butterflies span more than :data:`BLOCK` words run
  over the whole array, the others block by block so that a block stays in the L1/L2 cache
  (common practice, no source).  Twiddles of the stage with half-length ``h`` sit at
  ``table[h:2h]`` (``w_{2h}^j``), so one table serves every transform length up to its own.
* Garner's algorithm (Knuth, TAOCP vol. 2, 3rd ed., section 4.3.2) turns the residues modulo
  ``p_0..p_{k-1}`` into mixed-radix digits ``t_i < p_i``, ``x = t_0 + p_0 (t_1 + p_1 (...))``;
  the signed value is ``x`` or ``x - P`` (``P = prod p_i``), whichever has absolute value below
  ``P/2``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .. import jit as _jit

CACHE = _jit.cache_enabled()

#: Butterfly spans up to this many uint32 words run block by block (16 KiB blocks: L1-sized).
BLOCK = 1 << 12

_M32 = np.uint64(0xFFFFFFFF)


@njit("uint64(uint64, uint64, uint64, uint64)", cache=CACHE, inline="always")
def _shoup(t, w, wq, p):
    """``t w mod p`` in ``[0, 2p)`` for ``t < 2^32`` (Shoup)."""
    q = (t * wq) >> np.uint64(32)
    return t * w - q * p


@njit(inline="always")  # no signature: inlined into callers only
def _reduce_2p(a, p2):
    """``a mod 2p`` for ``a < 4p`` in uint32: ``min(a, a - 2p)`` (the difference wraps above ``a``
    when ``a < 2p``): the add/conditional-subtract step shared by every butterfly."""
    return min(a, a - p2)


@njit(inline="always")  # no signature: inlined into callers only
def _add_2p(u, v, p2):
    """``u + v`` reduced into ``[0, 2p)`` for ``u, v < 2p``."""
    return _reduce_2p(u + v, p2)


@njit(inline="always")  # no signature: inlined into callers only
def _sub_2p(u, v, p2):
    """``u - v`` reduced into ``[0, 2p)`` for ``u, v < 2p`` (computed as ``u + 2p - v``)."""
    return _reduce_2p(u + p2 - v, p2)


@njit(inline="always")  # no signature: inlined into callers only
def _twist(d, w, wq, pp):
    """``d w mod p`` in ``[0, 2p)`` for ``d < 2^32`` by Shoup's quotient ``wq`` in uint32 words
    (the remainder ``d w - q p`` is exact modulo ``2^32``)."""
    q = np.uint32((np.uint64(d) * np.uint64(wq)) >> np.uint64(32))
    return d * w - q * pp


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dif_stages(x, p, tw, twq, h_first, h_last):
    """Gentleman-Sande stages ``(u, v) -> (u + v, (u - v) w^j)`` over the whole of ``x``, for
    half-lengths ``h = h_first, h_first/2, .., h_last``; values stay in ``[0, 2p)``.

    Arithmetic is on uint32 words with wrap-around (``min(a, a - 2p)`` is ``a mod 2p`` for
    ``a < 4p``; the Shoup remainder is exact modulo ``2^32``), which lets the compiler
    vectorise the inner loop (measured: 3x faster than uint64 temporaries).
    """
    n = x.shape[0]
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    h = h_first
    while h >= h_last:
        w = tw[h:2 * h]
        wq = twq[h:2 * h]
        for s in range(0, n, 2 * h):
            xu = x[s:s + h]
            xv = x[s + h:s + 2 * h]
            for j in range(h):
                u = xu[j]
                v = xv[j]
                xu[j] = _add_2p(u, v, p2)
                xv[j] = _twist(u + p2 - v, w[j], wq[j], pp)
        h >>= 1


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def _dif_last_two(x, p, tw, twq):
    """The stages ``h = 2`` and ``h = 1`` of :func:`_dif_stages` fused, four words at a time
    (twiddles 1, 1, ``w_4``): the generic loop is 3x slower on such short spans (measured)."""
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    w = tw[3]
    wq = twq[3]
    for s in range(0, x.shape[0], 4):
        a0 = x[s]
        a1 = x[s + 1]
        a2 = x[s + 2]
        a3 = x[s + 3]
        b0 = _add_2p(a0, a2, p2)
        b2 = _sub_2p(a0, a2, p2)
        b1 = _add_2p(a1, a3, p2)
        b3 = _twist(a1 + p2 - a3, w, wq, pp)
        x[s] = _add_2p(b0, b1, p2)
        x[s + 1] = _sub_2p(b0, b1, p2)
        x[s + 2] = _add_2p(b2, b3, p2)
        x[s + 3] = _sub_2p(b2, b3, p2)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64)", cache=CACHE)
def _dif_from(x, p, tw, twq, h_first):
    """Stages ``h_first .. 1`` of the forward transform on ``x``."""
    if x.shape[0] >= 4:
        _dif_stages(x, p, tw, twq, h_first, 4)
        _dif_last_two(x, p, tw, twq)
    elif x.shape[0] == 2:
        _dif_stages(x, p, tw, twq, 1, 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dit_stages(x, p, tw, twq, h_first, h_last):
    """Cooley-Tukey stages ``(u, v) -> (u + v w^j, u - v w^j)`` over the whole of ``x``, for
    half-lengths ``h = h_first, 2 h_first, .., h_last`` (``w`` the inverse roots); inputs in
    ``[0, 4p)``, outputs in ``[0, 4p)``; uint32 arithmetic as in :func:`_dif_stages`."""
    n = x.shape[0]
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    h = h_first
    while h <= h_last:
        w = tw[h:2 * h]
        wq = twq[h:2 * h]
        for s in range(0, n, 2 * h):
            xu = x[s:s + h]
            xv = x[s + h:s + 2 * h]
            for j in range(h):
                u = _reduce_2p(xu[j], p2)
                t = _twist(xv[j], w[j], wq[j], pp)
                xu[j] = u + t
                xv[j] = u + p2 - t
        h <<= 1


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def _dit_first_two(x, p, tw, twq):
    """The stages ``h = 1`` and ``h = 2`` of :func:`_dit_stages` fused, four words at a time."""
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    w = tw[3]
    wq = twq[3]
    for s in range(0, x.shape[0], 4):
        a0 = _reduce_2p(x[s], p2)
        a1 = _reduce_2p(x[s + 1], p2)
        a2 = _reduce_2p(x[s + 2], p2)
        a3 = _reduce_2p(x[s + 3], p2)
        b0 = _add_2p(a0, a1, p2)
        b1 = _sub_2p(a0, a1, p2)
        b2 = _add_2p(a2, a3, p2)
        t = _twist(a2 + p2 - a3, w, wq, pp)
        x[s] = b0 + b2
        x[s + 2] = b0 + p2 - b2
        x[s + 1] = b1 + t
        x[s + 3] = b1 + p2 - t


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64)", cache=CACHE)
def _dit_to(x, p, tw, twq, h_last):
    """Stages ``1 .. h_last`` of the inverse transform on ``x``."""
    if x.shape[0] >= 4:
        _dit_first_two(x, p, tw, twq)
        _dit_stages(x, p, tw, twq, 4, h_last)
    elif x.shape[0] == 2:
        _dit_stages(x, p, tw, twq, 1, 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def forward(x, p, tw, twq):
    """In-place forward NTT of ``x`` (power-of-two length, entries in ``[0, 2p)``): DIF,
    bit-reversed output in ``[0, 2p)``."""
    n = x.shape[0]
    if n <= BLOCK:
        _dif_from(x, p, tw, twq, n >> 1)
        return
    _dif_stages(x, p, tw, twq, n >> 1, BLOCK)  # spans wider than a block: whole array
    for s in range(0, n, BLOCK):
        _dif_from(x[s:s + BLOCK], p, tw, twq, BLOCK >> 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def inverse(x, p, itw, itwq):
    """In-place inverse NTT of ``x`` without the ``1/n`` factor: DIT, bit-reversed input in
    ``[0, 2p)``, natural-order output in ``[0, 4p)``."""
    n = x.shape[0]
    if n <= BLOCK:
        _dit_to(x, p, itw, itwq, n >> 1)
        return
    for s in range(0, n, BLOCK):
        _dit_to(x[s:s + BLOCK], p, itw, itwq, BLOCK >> 1)
    _dit_stages(x, p, itw, itwq, BLOCK, n >> 1)


@njit("void(uint32[::1], int64[::1], uint64)", cache=CACHE)
def load_residues(x, a, p):
    """``x[:len(a)] = a mod p`` for any int64 ``a``, zeros after (the transform's padding).

    Entries already in ``[0, p)`` are copied; others are reduced with a float64 quotient
    estimate ``q ~ a / p`` (off by at most a few units for ``|a| < 2^63``) and corrected.
    """
    pi = np.int64(p)
    inv = 1.0 / float(p)
    m = a.shape[0]
    for i in range(m):
        v = a[i]
        if v < 0 or v >= pi:
            v -= np.int64(float(v) * inv) * pi
            while v < 0:
                v += pi
            while v >= pi:
                v -= pi
        x[i] = np.uint32(v)
    for i in range(m, x.shape[0]):
        x[i] = 0


@njit("void(uint32[::1], uint32[::1], uint64, uint64, uint64, uint64)", cache=CACHE)
def pointwise(x, y, p, p_neg_inv, f, fq):
    """``x <- x y f R^-1 mod p`` (Montgomery product, then a Shoup product by ``f``), in
    ``[0, 2p)``; inputs in ``[0, 2p)``."""
    for i in range(x.shape[0]):
        t = np.uint64(x[i]) * np.uint64(y[i])
        m = ((t & _M32) * p_neg_inv) & _M32
        r = (t + m * p) >> np.uint64(32)
        x[i] = np.uint32(_shoup(r, f, fq, p))


@njit("void(uint32[::1], uint64, int64[::1])", cache=CACHE)
def store_residues(x, p, out):
    """``out[i] = x[i] mod p`` for entries of ``x`` in ``[0, 4p)``."""
    for i in range(out.shape[0]):
        v = np.uint64(x[i])
        while v >= p:
            v -= p
        out[i] = np.int64(v)


@njit("void(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], int64, uint64[::1])",
      cache=CACHE, inline="always")
def _digits(res, primes, inv, invq, c, digits):
    """Garner's mixed-radix digits of column ``c``: ``t_i = (..((r_i - t_0) p_0^-1 - t_1)
    p_1^-1 ..) mod p_i``."""
    for i in range(primes.shape[0]):
        p = np.uint64(primes[i])
        t = np.uint64(res[i, c])
        for j in range(i):
            d = digits[j]
            if d >= p:
                d = d % p
            t = _shoup(t + p - d, np.uint64(inv[i, j]), np.uint64(invq[i, j]), p)
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
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, c, digits)
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


@njit("void(int64[::1], int64[::1], uint64, uint32[::1], uint32[::1], uint32[::1], uint32[::1], "
      "uint64, uint64, uint64, uint32[::1], uint32[::1], int64[::1])", cache=CACHE)
def product_mod_prime(a, b, p, tw, twq, itw, itwq, p_neg_inv, f, fq, fa, fb, out):
    """``out = (a * b mod p)[:len(out)]`` for int64 ``a``, ``b`` (any values), using the
    transform buffers ``fa``, ``fb`` of power-of-two length ``>= len(a) + len(b) - 1``.

    ``f = R / n mod p`` (``R = 2^32``) with Shoup quotient ``fq`` undoes the Montgomery factor
    and scales the inverse transform.  ``a is b`` (a square) costs one forward transform less.
    """
    load_residues(fa, a, p)
    forward(fa, p, tw, twq)
    if a.shape[0] == b.shape[0] and a.ctypes.data == b.ctypes.data:
        pointwise(fa, fa, p, p_neg_inv, f, fq)
    else:
        load_residues(fb, b, p)
        forward(fb, p, tw, twq)
        pointwise(fa, fb, p, p_neg_inv, f, fq)
    inverse(fa, p, itw, itwq)
    store_residues(fa, p, out)


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
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, c, digits)
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
    inv_m = 1.0 / float(m)
    um = np.uint64(m)
    for c in range(res.shape[1]):
        _digits(res, primes, inv, invq, c, digits)
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
