"""Compiled (numba) kernels for many short products in one call: one product per row.

Import this module only through :func:`polyconv.engines.jit_state.kernels` (it is one of
:data:`polyconv.engines.jit_state.KERNEL_MODULES`), like :mod:`polyconv.engines._kernels_ntt`,
whose transform kernels the NTT rows reuse.  Every kernel has one explicit signature.

* :func:`rows_ntt_mod`: row ``r`` of ``out`` is ``a[r] * b[r] mod p`` by one NTT product per row
  (the transforms, Montgomery pointwise product and scaling of ``_kernels_ntt``) with the
  buffers and twiddle tables shared by all rows: the per-product cost of a Python call is paid
  once per batch.
* :func:`rows_schoolbook_mod`: the same by schoolbook summation, for short rows where
  ``n1 n2`` multiply-adds are cheaper than three transforms.  Residues are below ``p < 2^30``,
  so a product is below ``2^60`` and 15 of them can be summed in a uint64 before one reduction
  modulo ``p`` (common practice, no source).
* :func:`rows_schoolbook_128`: the same in 128-bit two's complement, for products up to
  ``2^127`` (63-bit operands over a few terms, 40-bit ones over many), whose two words become
  Python ints faster than Garner rows do.
* :func:`primes_ntt`: one product modulo several primes in one call (the multi-prime engines'
  short products, where a Python call per prime costs as much as its transforms).
* :func:`rows_schoolbook_wrap`: exact integer products by schoolbook summation in wrapping
  64-bit arithmetic.  Arithmetic modulo ``2^64`` is a ring homomorphism of the integers, so every
  coefficient with ``|c| < 2^63`` comes out exact whatever the partial sums did (common practice,
  no source); uint64 is used because unsigned wrap-around is defined behaviour in LLVM.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit
from ._kernels_ntt import load_residues, product_mod_prime

CACHE = _jit.cache_enabled()

#: Products summed in a uint64 accumulator before it is reduced modulo ``p``: ``15 (p - 1)^2 +
#: p < 2^64`` for ``p < 2^30``.
_SUMS = 15


@njit("void(int64[:, ::1], int64[:, ::1], uint64, uint32[::1], uint32[::1], uint32[::1], "
      "uint32[::1], uint64, uint64, uint64, int64, int64[:, ::1])", cache=CACHE)
def rows_ntt_mod(a, b, p, tw, twq, itw, itwq, p_neg_inv, f, fq, n, out):
    """``out[r] = (a[r] * b[r] mod p)[:out.shape[1]]`` by ``n``-point NTT products (``n`` a power
    of two ``>= a.shape[1] + b.shape[1] - 1`` or ``>= out.shape[1]`` for a cyclic prefix that the
    caller has proved free of wrap-around); entries of ``a``, ``b`` any int64."""
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    for r in range(a.shape[0]):
        product_mod_prime(a[r], b[r], p, tw, twq, itw, itwq, p_neg_inv, f, fq, fa, fb, out[r])


@njit("void(int64[:, ::1], int64[:, ::1], uint64, int64[:, ::1])", cache=CACHE)
def rows_schoolbook_mod(a, b, p, out):
    """``out[r] = (a[r] * b[r] mod p)[:out.shape[1]]`` by schoolbook summation (``p < 2^30``;
    entries of ``a``, ``b`` any int64, reduced first)."""
    n1 = a.shape[1]
    n2 = b.shape[1]
    count = out.shape[1]
    ra = np.empty(n1, dtype=np.uint32)
    rb = np.empty(n2, dtype=np.uint32)
    acc = np.empty(count, dtype=np.uint64)
    for r in range(a.shape[0]):
        load_residues(ra, a[r], p)
        load_residues(rb, b[r], p)
        acc[:] = 0
        pending = 0
        for i in range(min(n1, count)):
            x = np.uint64(ra[i])
            if x == 0:
                continue
            top = min(n2, count - i)
            for j in range(top):
                acc[i + j] += x * np.uint64(rb[j])
            pending += 1
            if pending == _SUMS:
                for j in range(count):
                    acc[j] %= p
                pending = 0
        row = out[r]
        for j in range(count):
            row[j] = np.int64(acc[j] % p)


@njit("void(uint64[:, ::1], uint64[:, ::1], uint64[:, ::1])", cache=CACHE)
def rows_schoolbook_wrap(a, b, out):
    """``out[r] = (a[r] * b[r])[:out.shape[1]]`` modulo ``2^64`` (int64 rows viewed as uint64:
    exact for every coefficient below ``2^63`` in absolute value)."""
    n1 = a.shape[1]
    n2 = b.shape[1]
    count = out.shape[1]
    for r in range(a.shape[0]):
        row = out[r]
        row[:] = 0
        ar = a[r]
        br = b[r]
        for i in range(min(n1, count)):
            x = ar[i]
            if x == 0:
                continue
            top = min(n2, count - i)
            for j in range(top):
                row[i + j] += x * br[j]


@njit("void(int64[::1], int64[::1], uint64[::1], uint32[:, ::1], uint32[:, ::1], uint32[:, ::1], "
      "uint32[:, ::1], uint64[::1], uint64[::1], uint64[::1], int64[:, ::1])", cache=CACHE)
def primes_ntt(a, b, primes, tw, twq, itw, itwq, p_neg_inv, f, fq, out):
    """``out[i] = (a * b mod primes[i])[:out.shape[1]]`` for every prime in one call: row ``i``
    of the stacked tables (``tw.shape[1]``-point transforms, a power of two ``>= len(a) + len(b)
    - 1``) and constants belong to ``primes[i]``; entries of ``a``, ``b`` any int64."""
    n = tw.shape[1]
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    for i in range(primes.shape[0]):
        product_mod_prime(a, b, primes[i], tw[i], twq[i], itw[i], itwq[i], p_neg_inv[i], f[i],
                          fq[i], fa, fb, out[i])


@njit("void(int64[::1], int64[::1], uint32[:, ::1], uint64[::1], int64[::1])", cache=CACHE)
def one_ntt_mod(a, b, tab, consts, out):
    """``out = (a * b mod p)[:len(out)]``: :func:`product_mod_prime` with its arguments packed
    (``tab`` rows: twiddles, their Shoup quotients, inverse twiddles, theirs, ``tab.shape[1]``
    points; ``consts``: ``p``, ``-p^-1 mod 2^32``, ``f``, ``f``'s quotient), so that a short
    product pays the dispatch of five arguments instead of thirteen."""
    n = tab.shape[1]
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    product_mod_prime(a, b, consts[0], tab[0], tab[1], tab[2], tab[3], consts[1], consts[2],
                      consts[3], fa, fb, out)


_LOW32 = np.uint64(0xFFFFFFFF)


@njit(inline="always")  # no signature: inlined into the kernels that call it
def mul_u128(x, y):
    """``x y`` for uint64 ``x``, ``y`` as ``(high, low)`` uint64 words, from four 32 x 32-bit
    products (schoolbook on half words; common practice, no source)."""
    a0 = x & _LOW32
    a1 = x >> np.uint64(32)
    b0 = y & _LOW32
    b1 = y >> np.uint64(32)
    p00 = a0 * b0
    p01 = a0 * b1
    p10 = a1 * b0
    mid = (p00 >> np.uint64(32)) + (p01 & _LOW32) + (p10 & _LOW32)
    low = (p00 & _LOW32) | (mid << np.uint64(32))
    high = a1 * b1 + (p01 >> np.uint64(32)) + (p10 >> np.uint64(32)) + (mid >> np.uint64(32))
    return high, low


@njit(inline="always")  # no signature: inlined into the kernel below only
def _product_128(x, y):
    """``x y`` for int64 ``x``, ``y`` as a 128-bit two's-complement pair ``(high, low)`` of
    uint64 words: the magnitudes' product (:func:`mul_u128`), negated when the signs differ."""
    negative = (x < 0) != (y < 0)
    ux = np.uint64(-x) if x < 0 else np.uint64(x)  # -(-2^63) wraps to -2^63: 2^63 as uint64
    uy = np.uint64(-y) if y < 0 else np.uint64(y)
    high, low = mul_u128(ux, uy)
    if negative:
        low = ~low + np.uint64(1)
        high = ~high + (np.uint64(1) if low == 0 else np.uint64(0))
    return high, low


@njit("void(int64[:, ::1], int64[:, ::1], uint64[:, ::1], uint64[:, ::1])", cache=CACHE)
def rows_schoolbook_128(a, b, high, low):
    """``(high[r] 2^64 + low[r])`` = ``(a[r] * b[r])[:low.shape[1]]`` in 128-bit two's
    complement (sums modulo ``2^128``: exact for every coefficient below ``2^127`` in absolute
    value, as :func:`rows_schoolbook_wrap` is below ``2^63``)."""
    n1 = a.shape[1]
    n2 = b.shape[1]
    count = low.shape[1]
    for r in range(a.shape[0]):
        hr = high[r]
        lr = low[r]
        hr[:] = 0
        lr[:] = 0
        ar = a[r]
        br = b[r]
        for i in range(min(n1, count)):
            x = ar[i]
            if x == 0:
                continue
            top = min(n2, count - i)
            for j in range(top):
                ph, pl = _product_128(x, br[j])
                s = lr[i + j] + pl
                hr[i + j] += ph + (np.uint64(1) if s < pl else np.uint64(0))
                lr[i + j] = s
