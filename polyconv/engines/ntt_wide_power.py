"""Powers of one polynomial with wide coefficients by pointwise powers of its spectra modulo
many primes, recombined by the matrix-product CRT of :mod:`polyconv.engines.ntt_wide`.

By the convolution theorem the length-``N`` transform of ``a^e`` (``N > e (n - 1)``, so no
wrap-around) is the ``e``-th power of ``a``'s transform, entry by entry: per prime one forward
transform, ``floor(log2 e)`` squarings and a product per further set bit of ``e`` over the
``N`` spectral values, one inverse transform -- instead of a chain of ever wider products.  The
primes come from a proven bound of the coefficients of ``a^e`` (``||a||_1^e``, the triangle
inequality), as for every product of the engine.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from . import _pyints, jit_state
from . import ntt_wide as nw
from ._blas import blas_threads


def power_wide(a, e: int, bound: int, threads: int = 1) -> np.ndarray | None:
    """``a^e`` (all ``e (n - 1) + 1`` coefficients) as a 1-D object array of Python ints, by
    pointwise powers of the spectra modulo each prime
    (:func:`polyconv.engines._kernels_wide.rows_power`); None as
    :func:`polyconv.engines.ntt_wide.convolve_wide`, or when the transform would be longer than
    :data:`polyconv.engines.ntt_wide.STACKED_LENGTH`.

    Parameters
    ----------
    a : array_like
        A non-empty integer sequence; ``e >= 2``.
    bound : int
        A proven bound of every coefficient of ``a^e`` (``||a||_1^e``: the triangle inequality).
    threads : int
        2: the helper thread takes half the CRT columns (:func:`polyconv.engines.ntt_wide.
        recombine`; measured at a^50, 16 terms of 64 bits: 1.31 -> 0.97 ms of a 2.1 ms power).
    """
    count = e * (len(a) - 1) + 1
    n = 1 << max(0, (count - 1).bit_length())
    primes = nw.primes_for(bound, n)
    if primes is None or n > nw.STACKED_LENGTH or e < 2 or _pyints.ready() is None:
        return None
    k = len(primes)
    nw.check_memory(primes, count, n, len(a))
    with blas_threads(nw.BLAS_THREADS):
        digits = nw.digit_matrix(a)
        if digits is None:
            return None
        r = nw.residue_matrix(primes, digits.shape[1]) @ digits.T
        ra = nw.scratch("ra", r.shape, np.int64)
        np.copyto(ra, r, casting="unsafe")
        y = nw.scratch("y", (k, count), np.int64)
        neg_inv, f, fq = nw.scale_factors(primes, n)
        one, oneq = _montgomery_ones(primes)
        jit_state.kernels("_kernels_wide").rows_power(ra, e, *nw.stacked_tables(primes, n),
                                                      neg_inv, one, oneq, f, fq, y)
        yf = nw.scratch("yf", (k + 1, count), np.float64)
        yf[:k] = y
        nw.rounded_quotients(yf, nw.crt_matrix(primes)[1])
        return nw.recombine(yf, primes, threads)


@lru_cache(maxsize=64)
def _montgomery_ones(primes: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray]:
    """``2^32 mod p`` and its Shoup quotient per prime."""
    one = [2**32 % p for p in primes]
    return (np.array(one, dtype=np.uint64),
            np.array([(v << 32) // p for v, p in zip(one, primes, strict=True)],
                     dtype=np.uint64))
