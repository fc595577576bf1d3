"""Compiled (numba) kernels of the NTT engines: transforms and products modulo a prime.

Import this module only through :func:`polyconv.engines.jit_state.kernels`, which decides the
cache directory before numba is imported and records whether the kernels were compiled or loaded
from cache.
Every kernel has one explicit signature, so importing the module compiles (or loads) all of them
at once and no call ever waits for the compiler.

Arithmetic (all residues modulo primes ``p < 2^30``, stored in uint32 inside the transforms;
the lazy ``[0, 2p)`` reductions and Shoup's constant multiplication are
:mod:`polyconv.engines._kernels_arith`'s):

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
* The CRT kernels (:func:`garner_int64`, :func:`garner_words`, :func:`garner_mod`,
  :func:`residues_from_rows`) live in :mod:`polyconv.engines._kernels_crt` and are served from
  here too, so that ``jit_state.kernels("_kernels_ntt")`` hands the engines every kernel they use.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit
from ._kernels_arith import M32, add_2p, reduce_2p, shoup, sub_2p, twist
from ._kernels_crt import garner_int64, garner_mod, garner_words, residues_from_rows

__all__ = ["forward", "inverse", "load_residues", "pointwise", "store_residues",
           "product_mod_prime", "garner_int64", "garner_words", "garner_mod", "residues_from_rows"]

CACHE = _jit.cache_enabled()

#: Butterfly spans up to this many uint32 words run block by block (16 KiB blocks: L1-sized).
BLOCK = 1 << 12


@njit(inline="always")
def _stages(x, p, tw, twq, h_first, h_last, dif):
    """Butterfly stages over the whole of ``x``.  ``dif``: Gentleman-Sande stages
    ``(u, v) -> (u + v, (u - v) w^j)`` for half-lengths ``h = h_first, h_first/2, .., h_last``,
    values staying in ``[0, 2p)``; else Cooley-Tukey stages ``(u, v) -> (u + v w^j, u - v w^j)``
    for ``h = h_first, 2 h_first, .., h_last`` (``w`` the inverse roots), inputs and outputs in
    ``[0, 4p)``.

    Arithmetic is on uint32 words with wrap-around (``min(a, a - 2p)`` is ``a mod 2p`` for
    ``a < 4p``; the Shoup remainder is exact modulo ``2^32``), which lets the compiler
    vectorise the inner loops (measured: 3x faster than uint64 temporaries).  Inlined into
    :func:`_dif_stages` and :func:`_dit_stages` with ``dif`` a constant, so each is compiled
    without the other's branch (a run-time test measured 1-3% slower).
    """
    n = x.shape[0]
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    h = h_first
    while (h >= h_last) if dif else (h <= h_last):
        w = tw[h:2 * h]
        wq = twq[h:2 * h]
        for s in range(0, n, 2 * h):
            xu = x[s:s + h]
            xv = x[s + h:s + 2 * h]
            if dif:
                for j in range(h):
                    u = xu[j]
                    v = xv[j]
                    xu[j] = add_2p(u, v, p2)
                    xv[j] = twist(u + p2 - v, w[j], wq[j], pp)
            else:
                for j in range(h):
                    u = reduce_2p(xu[j], p2)
                    t = twist(xv[j], w[j], wq[j], pp)
                    xu[j] = u + t
                    xv[j] = u + p2 - t
        h = (h >> 1) if dif else (h << 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dif_stages(x, p, tw, twq, h_first, h_last):
    """The forward (Gentleman-Sande) stages of :func:`_stages`."""
    _stages(x, p, tw, twq, h_first, h_last, True)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64, int64)", cache=CACHE)
def _dit_stages(x, p, tw, twq, h_first, h_last):
    """The inverse (Cooley-Tukey) stages of :func:`_stages`."""
    _stages(x, p, tw, twq, h_first, h_last, False)


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
        b0 = add_2p(a0, a2, p2)
        b2 = sub_2p(a0, a2, p2)
        b1 = add_2p(a1, a3, p2)
        b3 = twist(a1 + p2 - a3, w, wq, pp)
        x[s] = add_2p(b0, b1, p2)
        x[s + 1] = sub_2p(b0, b1, p2)
        x[s + 2] = add_2p(b2, b3, p2)
        x[s + 3] = sub_2p(b2, b3, p2)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1], int64)", cache=CACHE)
def _dif_from(x, p, tw, twq, h_first):
    """Stages ``h_first .. 1`` of the forward transform on ``x``."""
    if x.shape[0] >= 4:
        _dif_stages(x, p, tw, twq, h_first, 4)
        _dif_last_two(x, p, tw, twq)
    elif x.shape[0] == 2:
        _dif_stages(x, p, tw, twq, 1, 1)


@njit("void(uint32[::1], uint64, uint32[::1], uint32[::1])", cache=CACHE)
def _dit_first_two(x, p, tw, twq):
    """The stages ``h = 1`` and ``h = 2`` of :func:`_dit_stages` fused, four words at a time."""
    pp = np.uint32(p)
    p2 = np.uint32(p + p)
    w = tw[3]
    wq = twq[3]
    for s in range(0, x.shape[0], 4):
        a0 = reduce_2p(x[s], p2)
        a1 = reduce_2p(x[s + 1], p2)
        a2 = reduce_2p(x[s + 2], p2)
        a3 = reduce_2p(x[s + 3], p2)
        b0 = add_2p(a0, a1, p2)
        b1 = sub_2p(a0, a1, p2)
        b2 = add_2p(a2, a3, p2)
        t = twist(a2 + p2 - a3, w, wq, pp)
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
        m = ((t & M32) * p_neg_inv) & M32
        r = (t + m * p) >> np.uint64(32)
        x[i] = np.uint32(shoup(r, f, fq, p))


@njit("void(uint32[::1], uint64, int64[::1])", cache=CACHE)
def store_residues(x, p, out):
    """``out[i] = x[i] mod p`` for entries of ``x`` in ``[0, 4p)``."""
    for i in range(out.shape[0]):
        v = np.uint64(x[i])
        while v >= p:
            v -= p
        out[i] = np.int64(v)


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

