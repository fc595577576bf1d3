"""Compiled (numba) modular arithmetic shared by the NTT and CRT kernels.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`), never on its
own.  All residues are modulo primes ``p < 2^30``, stored in uint32 inside the transforms:

* Butterflies keep values in ``[0, 2p)`` ("delayed" or lazy reduction, D. Harvey, "Faster
  arithmetic for number-theoretic transforms", J. Symbolic Comput. 60 (2014) 113-119, section
  2); ``4p < 2^32`` so every sum fits a 32-bit word.
* Multiplication by a known constant ``w`` uses Shoup's precomputed quotient
  ``w' = floor(w 2^32 / p)``: for ``t < 2^32``, ``q = (t w') >> 32`` and ``r = t w - q p`` lies in
  ``[0, 2p)`` (V. Shoup, NTL; Harvey 2014, Algorithm 1).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from . import jit_state as _jit

CACHE = _jit.cache_enabled()

#: The low 32 bits of a uint64.
M32 = np.uint64(0xFFFFFFFF)


@njit("uint64(uint64, uint64, uint64, uint64)", cache=CACHE, inline="always")
def shoup(t, w, wq, p):
    """``t w mod p`` in ``[0, 2p)`` for ``t < 2^32`` (Shoup)."""
    q = (t * wq) >> np.uint64(32)
    return t * w - q * p


@njit(inline="always")  # no signature: inlined into callers only
def reduce_2p(a, p2):
    """``a mod 2p`` for ``a < 4p`` in uint32: ``min(a, a - 2p)`` (the difference wraps above ``a``
    when ``a < 2p``): the add/conditional-subtract step shared by every butterfly."""
    return min(a, a - p2)


@njit(inline="always")  # no signature: inlined into callers only
def add_2p(u, v, p2):
    """``u + v`` reduced into ``[0, 2p)`` for ``u, v < 2p``."""
    return reduce_2p(u + v, p2)


@njit(inline="always")  # no signature: inlined into callers only
def sub_2p(u, v, p2):
    """``u - v`` reduced into ``[0, 2p)`` for ``u, v < 2p`` (computed as ``u + 2p - v``)."""
    return reduce_2p(u + p2 - v, p2)


@njit(inline="always")  # no signature: inlined into callers only
def twist(d, w, wq, pp):
    """``d w mod p`` in ``[0, 2p)`` for ``d < 2^32`` by Shoup's quotient ``wq`` in uint32 words
    (the remainder ``d w - q p`` is exact modulo ``2^32``)."""
    q = np.uint32((np.uint64(d) * np.uint64(wq)) >> np.uint64(32))
    return d * w - q * pp
