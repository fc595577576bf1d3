"""Compiled (numba) kernels of the NTT engines: transforms and products modulo a prime.

Import this module only through :func:`polyconv.engines.jit_state.kernels`, which decides the
cache directory before numba is imported and records whether the kernels were compiled or loaded
from cache.
Every kernel has one explicit signature, so importing the module compiles (or loads) all of them
at once and no call ever waits for the compiler.

Arithmetic (all residues modulo primes ``p < 2^30``, stored in uint32 inside the transforms;
the lazy ``[0, 2p)`` reductions and Shoup's constant multiplication are
:mod:`polyconv.engines._kernels_arith`'s, and 16 lanes at a time
:mod:`polyconv.engines._kernels_simd`'s):

* Products of two variables use Montgomery's reduction with ``R = 2^32`` (P. L. Montgomery,
  "Modular multiplication without trial division", Math. Comp. 44 (1985) 519-521): for
  ``T = x y < 4p^2``, ``t = (T + ((T mod R) p') mod R) p) / R`` is ``x y R^-1`` in ``[0, 2p)``
  with ``p' = -p^-1 mod R``.  The factor ``R / n`` that undoes ``R^-1`` and scales the inverse
  transform is applied in the same pass by a Shoup multiplication.
* The forward transform is decimation in frequency (Gentleman-Sande: natural order in,
  bit-reversed out), the inverse decimation in time (Cooley-Tukey: bit-reversed in, natural out),
  so no permutation is performed.  Transforms of at least :data:`VECTOR_LENGTH` words run on
  16-lane vectors: stages of half-length ``>= 16`` three, two or one at a time (radix 8, 4, 2:
  fewer loads and stores), the stages 8..1 inside 32-word blocks in one pass; stages whose
  butterflies span more than :data:`BLOCK` words run over the whole array, the others block by
  block so that a block stays in the L1/L2 cache (common practice, no source).  In a product
  the second forward transform, the pointwise product and the inverse's first stages run block
  by block too, the stages 8..1 of all three in one pass (:func:`product_mod_prime`).
  Twiddles of the stage with half-length ``h`` sit at ``table[h:2h]`` (``w_{2h}^j``), so one
  table serves every transform length up to its own.
* Measured on the development machine (bench/ntt_stage_ab.py against the scalar-loop kernels
  this replaced): 0.20-0.27 ns per butterfly for 2^10-2^20-point transforms, against
  0.62-0.9 ns.
* The CRT kernels (:func:`garner_int64`, :func:`garner_words`, :func:`garner_mod`,
  :func:`residues_from_rows`) live in :mod:`polyconv.engines._kernels_crt` and are served from
  here too, so that ``jit_state.kernels("_kernels_ntt")`` hands the engines every kernel they use.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit
from ._kernels_arith import M32, add_2p, reduce_2p, shoup, twist
from ._kernels_crt import garner_int64, garner_mod, garner_words, residues_from_rows
from ._kernels_simd import (
    LANES,
    dif_oct,
    dif_pair,
    dif_quad,
    dif_short,
    dit_oct,
    dit_pair,
    dit_quad,
    dit_short,
    load_vector,
    pointwise_vector,
    product_short,
    square_short,
    store_vector,
)

__all__ = ["forward", "inverse", "load_residues", "pointwise", "store_residues",
           "product_mod_prime", "garner_int64", "garner_words", "garner_mod", "residues_from_rows"]

CACHE = _jit.cache_enabled()

#: Butterfly spans up to this many uint32 words run block by block (16 KiB blocks: L1-sized).
BLOCK = 1 << 12

#: Shortest transform of the vector kernels (two 16-lane vectors); shorter ones run scalar.
VECTOR_LENGTH = 2 * LANES


@njit(inline="always")
def _scalar_stages(x, p, tw, twq, dif):
    """Every stage of a short transform (``len(x) < VECTOR_LENGTH``), one butterfly at a time:
    Gentleman-Sande stages ``(u, v) -> (u + v, (u - v) w^j)`` for ``h = n/2, .., 1`` (values in
    ``[0, 2p)``) if ``dif``, else Cooley-Tukey stages ``(u, v) -> (u + v w^j, u - v w^j)`` for
    ``h = 1, .., n/2`` (``w`` the inverse roots; values in ``[0, 4p)``)."""
    n = x.shape[0]
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    h = (n >> 1) if dif else 1
    while h >= 1 and 2 * h <= n:
        for s in range(0, n, 2 * h):
            for j in range(h):
                u = x[s + j]
                v = x[s + h + j]
                if dif:
                    x[s + j] = add_2p(u, v, p2)
                    x[s + h + j] = np.uint32(twist(u + p2 - v, tw[h + j], twq[h + j], pp))
                else:
                    u = reduce_2p(u, p2)
                    t = np.uint32(twist(v, tw[h + j], twq[h + j], pp))
                    x[s + j] = u + t
                    x[s + h + j] = u + p2 - t
        h = (h >> 1) if dif else (h << 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dif_stages(x, p, tw, twq, h_first, h_last):
    """The forward (Gentleman-Sande) stages of half-lengths ``h = h_first, h_first/2, ..,
    h_last`` (``h_last >= 16``) over the whole of ``x``, three at a time (radix 8) while three
    are left, then two (radix 4) or one, 16 butterflies per vector step."""
    n = x.shape[0]
    h = h_first
    while h >= h_last:
        if h >= 4 * h_last:
            q = h >> 2
            for s in range(0, n, 2 * h):
                for j in range(0, q, LANES):
                    dif_oct(x, s + j, q, tw, twq, j, p)
            h >>= 3
        elif h >= 2 * h_last:
            q = h >> 1
            for s in range(0, n, 2 * h):
                for j in range(0, q, LANES):
                    dif_quad(x, s + j, q, tw, twq, j, p)
            h >>= 2
        else:
            for s in range(0, n, 2 * h):
                for j in range(0, h, LANES):
                    dif_pair(x, s + j, s + h + j, tw, h + j, twq, p)
            h >>= 1


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dit_stages(x, p, tw, twq, h_first, h_last):
    """The inverse (Cooley-Tukey) stages ``h = h_first, 2 h_first, .., h_last`` (``h_first
    >= 16``), three, two or one at a time as in :func:`_dif_stages`."""
    n = x.shape[0]
    h = h_first
    while h <= h_last:
        if 4 * h <= h_last:
            for s in range(0, n, 8 * h):
                for j in range(0, h, LANES):
                    dit_oct(x, s + j, h, tw, twq, j, p)
            h <<= 3
        elif 2 * h <= h_last:
            for s in range(0, n, 4 * h):
                for j in range(0, h, LANES):
                    dit_quad(x, s + j, h, tw, twq, j, p)
            h <<= 2
        else:
            for s in range(0, n, 2 * h):
                for j in range(0, h, LANES):
                    dit_pair(x, s + j, s + h + j, tw, h + j, twq, p)
            h <<= 1


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def _dif_block(x, p, tw, twq):
    """All forward stages of ``x`` (``VECTOR_LENGTH <= len(x) <= BLOCK``): half-lengths
    ``n/2 .. 16`` in vector steps, then ``8 .. 1`` inside 32-word blocks."""
    _dif_stages(x, p, tw, twq, x.shape[0] >> 1, LANES)
    dif_short(x, tw, twq, p)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def _dit_block(x, p, tw, twq):
    """All inverse stages of ``x`` (``VECTOR_LENGTH <= len(x) <= BLOCK``)."""
    dit_short(x, tw, twq, p)
    _dit_stages(x, p, tw, twq, LANES, x.shape[0] >> 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def forward(x, p, tw, twq):
    """In-place forward NTT of ``x`` (power-of-two length, entries in ``[0, 2p)``): DIF,
    bit-reversed output in ``[0, 2p)``.  Stages whose butterflies span more than
    :data:`BLOCK` words run over the whole array, the others block by block."""
    n = x.shape[0]
    if n < VECTOR_LENGTH:
        _scalar_stages(x, p, tw, twq, True)
    elif n <= BLOCK:
        _dif_block(x, p, tw, twq)
    else:
        _dif_stages(x, p, tw, twq, n >> 1, BLOCK)
        for s in range(0, n, BLOCK):
            _dif_block(x[s:s + BLOCK], p, tw, twq)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def inverse(x, p, itw, itwq):
    """In-place inverse NTT of ``x`` without the ``1/n`` factor: DIT, bit-reversed input in
    ``[0, 2p)``, natural-order output in ``[0, 4p)``."""
    n = x.shape[0]
    if n < VECTOR_LENGTH:
        _scalar_stages(x, p, itw, itwq, False)
    elif n <= BLOCK:
        _dit_block(x, p, itw, itwq)
    else:
        for s in range(0, n, BLOCK):
            _dit_block(x[s:s + BLOCK], p, itw, itwq)
        _dit_stages(x, p, itw, itwq, BLOCK, n >> 1)


@njit("void(uint32[::1], int64[::1], uint64)", cache=CACHE)
def load_residues(x, a, p):
    """``x[:len(a)] = a mod p`` for any int64 ``a``, zeros after (the transform's padding).

    16 entries at a time by :func:`polyconv.engines._kernels_simd.load_vector` (a float64
    quotient estimate, then one correction each way), the last few one by one the same way.
    """
    pi = np.int64(p)
    inv = 1.0 / float(p)
    m = a.shape[0]
    full = m - m % LANES
    for i in range(0, full, LANES):
        load_vector(x, a, i, pi, inv)
    for i in range(full, m):
        v = a[i]
        r = v - np.int64(float(v) * inv) * pi
        r = r + 2 * pi if r < 0 else r
        x[i] = np.uint32(r - pi if r >= pi else r)
    x[m:] = 0


@njit("void(uint32[::1], uint32[::1], uint64, uint64, uint64, uint64)", cache=CACHE)
def pointwise(x, y, p, p_neg_inv, f, fq):
    """``x <- x y f R^-1 mod p`` (Montgomery product, then a Shoup product by ``f``), in
    ``[0, 2p)``; inputs in ``[0, 2p)``."""
    n = x.shape[0]
    full = n - n % LANES
    for i in range(0, full, LANES):
        pointwise_vector(x, y, i, p, p_neg_inv, f, fq)
    for i in range(full, n):
        t = np.uint64(x[i]) * np.uint64(y[i])
        m = ((t & M32) * p_neg_inv) & M32
        r = (t + m * p) >> np.uint64(32)
        x[i] = np.uint32(shoup(r, f, fq, p))


@njit("void(uint32[::1], uint64, int64[::1])", cache=CACHE)
def store_residues(x, p, out):
    """``out[i] = x[i] mod p`` for entries of ``x`` in ``[0, 4p)``."""
    count = out.shape[0]
    full = count - count % LANES
    for i in range(0, full, LANES):
        store_vector(x, out, i, p)
    for i in range(full, count):
        v = np.uint64(x[i])
        while v >= p:
            v -= p
        out[i] = np.int64(v)


@njit("void(uint32[::1], uint32[::1], uint64, uint32[::1], uint32[::1], uint32[::1], "
      "uint32[::1], uint64, uint64, uint64, boolean)", cache=CACHE)
def _block_product(x, y, p, tw, twq, itw, itwq, p_neg_inv, f, fq, square):
    """One block (``VECTOR_LENGTH <= len <= BLOCK`` words) of a product whose stages wider than
    the block are done: ``y``'s forward stages down to 16, then, 32 words at a time, its stages
    8..1, the product by ``x`` and the inverse stages 1..8 (one pass:
    :func:`polyconv.engines._kernels_simd.product_short`), then the inverse stages 16 up.
    ``square``: ``y`` is ``x``, not yet transformed."""
    _dif_stages(y, p, tw, twq, y.shape[0] >> 1, LANES)
    if square:
        square_short(x, x, tw, twq, itw, itwq, p, p_neg_inv, f, fq)
    else:
        product_short(x, y, tw, twq, itw, itwq, p, p_neg_inv, f, fq)
    _dit_stages(x, p, itw, itwq, LANES, x.shape[0] >> 1)


@njit("void(int64[::1], int64[::1], uint64, uint32[::1], uint32[::1], uint32[::1], uint32[::1], "
      "uint64, uint64, uint64, uint32[::1], uint32[::1], int64[::1])", cache=CACHE)
def product_mod_prime(a, b, p, tw, twq, itw, itwq, p_neg_inv, f, fq, fa, fb, out):
    """``out = (a * b mod p)[:len(out)]`` for int64 ``a``, ``b`` (any values), using the
    transform buffers ``fa``, ``fb`` of power-of-two length ``>= len(a) + len(b) - 1``.

    ``f = R / n mod p`` (``R = 2^32``) with Shoup quotient ``fq`` undoes the Montgomery factor
    and scales the inverse transform.  ``a is b`` (a square) costs one forward transform less.
    The second forward transform, the pointwise product and the inverse run block by block
    (:func:`_block_product`) once the stages wider than :data:`BLOCK` are done.
    """
    n = fa.shape[0]
    square = a.shape[0] == b.shape[0] and a.ctypes.data == b.ctypes.data
    load_residues(fa, a, p)
    if n < VECTOR_LENGTH:
        forward(fa, p, tw, twq)
        if not square:
            load_residues(fb, b, p)
            forward(fb, p, tw, twq)
        pointwise(fa, fa if square else fb, p, p_neg_inv, f, fq)
        inverse(fa, p, itw, itwq)
        store_residues(fa, p, out)
        return
    y = fa
    if not square:
        forward(fa, p, tw, twq)
        load_residues(fb, b, p)
        y = fb
    if n <= BLOCK:
        _block_product(fa, y, p, tw, twq, itw, itwq, p_neg_inv, f, fq, square)
    else:
        _dif_stages(y, p, tw, twq, n >> 1, BLOCK)
        for s in range(0, n, BLOCK):
            _block_product(fa[s:s + BLOCK], y[s:s + BLOCK], p, tw, twq, itw, itwq, p_neg_inv,
                           f, fq, square)
        _dit_stages(fa, p, itw, itwq, BLOCK, n >> 1)
    store_residues(fa, p, out)
