"""Exact products of wide integer coefficients by NTT products modulo many primes and a CRT
done as one matrix product.

For coefficients of hundreds to a few thousand bits (Python ints), with ``k`` primes
``p_i < 2^30`` (:func:`primes_for`: ``P = prod p_i > 4 B`` for an a-priori bound ``B >= max
|c_j|``):

1. **Residues of the operands** as a matrix product: the signed 15-bit digits ``D`` of the values
   (``n`` values by ``d`` digits, read from CPython's ``marshal`` stream of the list by a kernel)
   times ``T[i, d] = 2^(15 d) mod p_i``: ``R = T D^T`` (``k`` by ``n``); reduced modulo ``p_i``
   inside the transform kernel.
2. ``k`` **NTT products** (:mod:`polyconv.engines._kernels_ntt`, J. M. Pollard, Math. Comp. 25
   (1971) 365-374), each scaled by ``u_i = (P/p_i)^-1 mod p_i`` in the kernel's last pass, so row
   ``i`` holds ``y_i = c u_i mod p_i``.
3. **CRT as a matrix product**: ``X = sum_i y_i (P/p_i) = c + t P`` with ``t = sum_i y_i / p_i -
   c / P``.  ``|c| <= B < P/4``, so ``t`` is the nearest integer to ``sum_i y_i / p_i``; its
   float64 value is off by less than ``k 2^-52 + k^2 2^-53 < 2^-36`` (``k <= 255``), so rounding
   gives ``t`` exactly.  With ``W[j, i]`` the 15-bit digits of ``P / p_i`` and ``W[j, k]`` those of
   ``-P``, the column sums ``S = W [y; t]`` are the digits, before carries, of ``c`` itself; a
   kernel propagates carries and writes the ``marshal`` stream of the Python ints
   (:mod:`polyconv.engines._pyints`).

**Exactness of the float64 matrix products, whatever BLAS does.** Every term is an integer:
``2^15 x 2^30 = 2^45`` at most, and a sum has at most 255 terms of one sign (and, in ``S``, one
term ``-t W[j, k]`` below ``2^23``), so every partial sum of any subset of the terms, in any
order, blocking, thread split or fused multiply-add, is an integer below ``2^53`` in magnitude
and therefore exact in float64 (IEEE 754 round-to-nearest is exact on representable results).
So the results do not depend on OPENBLAS threading or the kernel BLAS picks.

This is the "matrix product" CRT of multi-modular FFT codes (e.g. J. van der Hoeven, G. Lecerf,
"Faster FFTs in medium precision", 2015; the Chinese remainder map as a product by a fixed
matrix); the residue side likewise.  Garner's mixed radix (:mod:`polyconv.engines.ntt_compiled`)
needs ``k^2 / 2`` modular products per coefficient in scalar code; this route ``~4 k^2`` float
multiply-adds in BLAS, which is faster from ~20 primes on.
"""

from __future__ import annotations

import marshal
import math
from functools import lru_cache

import numpy as np

from ..numerics import budget
from . import _pyints, jit_state
from ._blas import blas_threads
from .ntt_compiled import _stage_table

#: Most primes (float64 exactness of the CRT product: ``255 x 2^45 + 2^23 < 2^53``).
MAX_PRIMES = 255
#: Most 15-bit digits of an operand (the residue product: ``255 x 2^45 < 2^53``).
MAX_DIGITS = 255
#: BLAS threads of the two matrix products (:mod:`polyconv.engines._blas`: one is the fastest
#: and steadiest on a shared machine; two gain up to 2x on an idle one).
BLAS_THREADS = 1
#: Tables of at most this many bytes (all primes, one length) are kept for the process.
CACHED_TABLE_BYTES = 2**25


def _is_prime(n: int) -> bool:
    """Deterministic Miller-Rabin for ``n < 3.2 10^9`` (bases 2, 7, 61: G. Jaeschke, Math.
    Comp. 61 (1993) 915-926)."""
    if n < 2 or n % 2 == 0:
        return n == 2
    d, s = n - 1, 0
    while d % 2 == 0:
        d, s = d // 2, s + 1
    for a in (2, 7, 61):
        if a % n == 0:
            continue
        x = pow(a, d, n)
        if x in (1, n - 1):
            continue
        for _ in range(s - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


@lru_cache(maxsize=1)
def prime_table() -> tuple[tuple[int, int, int], ...]:
    """``(p, g, e)``: the :data:`MAX_PRIMES` + 1 primes ``p = c 2^e + 1`` with ``2^29 < p <
    2^30`` and the largest ``e`` (longest transforms first; ``e`` is the exact power of two in
    ``p - 1``), with ``g`` the least quadratic non-residue (so ``g^((p - 1) / 2^s)`` has order
    ``2^s``: Euler's criterion)."""
    found: list[tuple[int, int, int]] = []
    e = 29
    while len(found) <= MAX_PRIMES and e > 1:
        for c in range((2**30 - 2) >> e, (2**29 >> e), -1):
            p = (c << e) + 1
            if c % 2 == 1 and 2**29 < p < 2**30 and _is_prime(p):
                g = next(g for g in range(2, p) if pow(g, (p - 1) // 2, p) == p - 1)
                found.append((p, g, e))
        e -= 1
    return tuple(found[:MAX_PRIMES + 1])


def primes_for(bound: int, length: int) -> tuple[int, ...] | None:
    """Fewest primes of :func:`prime_table` admitting ``length``-point transforms with product
    ``P > 4 bound`` (the CRT's margin: ``|c| < P/4``), or None when they are not enough or more
    than :data:`MAX_PRIMES` would be needed."""
    target = 4 * bound
    chosen, product = [], 1
    for p, _, e in prime_table():
        if length <= 1 << e:
            chosen.append(p)
            product *= p
            if product > target:
                return tuple(chosen) if len(chosen) <= MAX_PRIMES else None
    return None


def transform_length(n1: int, n2: int) -> int:
    return 1 << max(0, (n1 + n2 - 2).bit_length())


def _tables(p: int, n: int) -> tuple:
    """``n``-point twiddles modulo ``p`` (forward, inverse, Shoup quotients; the layout of
    :func:`polyconv.engines.ntt_compiled.tables`)."""
    g = {q: g for q, g, _ in prime_table()}[p]
    root = pow(g, (p - 1) // n, p)
    tw, twq = _stage_table(root, n, p)
    itw, itwq = _stage_table(pow(root, p - 2, p), n, p)
    return tw, twq, itw, itwq


def _build_stacked(primes: tuple[int, ...], n: int) -> tuple:
    budget.check_allocation(16.0 * len(primes) * n, "twiddle tables of the wide NTT engine")
    rows = [_tables(p, n) for p in primes]
    stacked = [np.ascontiguousarray(np.stack([r[i] for r in rows])) for i in range(4)]
    neg_inv = np.array([(-pow(p, -1, 2**32)) % 2**32 for p in primes], dtype=np.uint64)
    total = math.prod(primes)
    f = np.array([(2**32 * pow(n, -1, p) * pow(total // p, -1, p)) % p for p in primes],
                 dtype=np.uint64)
    fq = np.array([(int(v) << 32) // p for v, p in zip(f, primes, strict=True)],
                  dtype=np.uint64)
    return (np.array(primes, dtype=np.uint64), *stacked, neg_inv, f, fq)


_cached_stacked = lru_cache(maxsize=4)(_build_stacked)


def stacked_tables(primes: tuple[int, ...], n: int) -> tuple:
    """The arguments of :func:`polyconv.engines._kernels_wide.rows_products` after ``a, b``: the
    primes, stacked tables, ``-p^-1 mod 2^32``, and ``f_i = 2^32 n^-1 (P/p_i)^-1 mod p_i`` with
    Shoup quotients; kept for the process up to :data:`CACHED_TABLE_BYTES`."""
    if 16 * len(primes) * n <= CACHED_TABLE_BYTES:
        return _cached_stacked(primes, n)
    return _build_stacked(primes, n)


def _digits15(value: int, rows: int) -> list[int]:
    return [(value >> (15 * j)) & 0x7FFF for j in range(rows)]


@lru_cache(maxsize=32)
def crt_matrix(primes: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray]:
    """``W`` (``L`` by ``k + 1`` float64: digits of ``P / p_i``, then of ``-P``; ``15 L`` bits
    hold ``P``) and ``1 / p_i``."""
    total = math.prod(primes)
    rows = -(-total.bit_length() // 15) + 1
    w = np.empty((rows, len(primes) + 1), dtype=np.float64)
    for i, p in enumerate(primes):
        w[:, i] = _digits15(total // p, rows)
    w[:, -1] = [-v for v in _digits15(total, rows)]
    return np.ascontiguousarray(w), 1.0 / np.array(primes, dtype=np.float64)


@lru_cache(maxsize=64)
def residue_matrix(primes: tuple[int, ...], digits: int) -> np.ndarray:
    """``T[i, d] = 2^(15 d) mod p_i`` (``k`` by ``digits`` float64)."""
    return np.array([[pow(2, 15 * d, p) for d in range(digits)] for p in primes],
                    dtype=np.float64)


def digit_matrix(x) -> np.ndarray | None:
    """Signed 15-bit digits of the integers ``x`` (an int64 or object array or a list), one
    row per value; None when the stream kernels are not ready here or the values are not
    plain ints (the caller then converts them) or too wide (:data:`MAX_DIGITS`)."""
    kernels = _pyints.ready()
    if kernels is None:
        return None
    values = x.tolist() if isinstance(x, np.ndarray) else x
    try:
        data = np.frombuffer(marshal.dumps(values, 2), dtype=np.uint8)
    except ValueError:  # unmarshallable items (gmpy2.mpz, numpy scalars)
        return None
    width = kernels.stream_width(data)
    if width < 0 or data.shape[0] < 5:
        return None
    digits = max(1, (8 * width + 14) // 15)
    if digits > MAX_DIGITS:
        return None
    budget.check_allocation(8.0 * digits * len(values), "digit matrix of the wide NTT engine")
    out = np.empty((len(values), digits), dtype=np.float64)
    jit_state.kernels("_kernels_wide").stream_digits(data, out)
    return out


def _residues(digits: np.ndarray, primes: tuple[int, ...]) -> np.ndarray:
    """``T D`` as int64 (signed, exact: below ``2^53``; the transform kernel reduces it)."""
    return (residue_matrix(primes, digits.shape[1]) @ digits.T).astype(np.int64)


def convolve_wide(a, b, bound: int, keep: int | None = None) -> np.ndarray | None:
    """Exact product of two integer sequences (1-D arrays or lists of Python ints) as a 1-D
    object array of Python ints; None when the kernels or the primes do not serve this product
    (the caller runs another exact engine).

    Parameters
    ----------
    a, b : array_like
        Non-empty integer sequences.
    bound : int
        A proven bound of every output ``|c_j|`` (for example ``min(n1, n2) max|a| max|b|``);
        the primes come from it (:func:`primes_for`).
    keep : int, optional
        Only the first ``keep`` coefficients.
    """
    n1, n2 = len(a), len(b)
    count = n1 + n2 - 1 if keep is None else min(keep, n1 + n2 - 1)
    n = transform_length(n1, n2)
    primes = primes_for(bound, n)
    if primes is None or count <= 0:
        return None
    try:
        da = digit_matrix(a)
        db = da if b is a else digit_matrix(b)
        if da is None or db is None:
            return None
        kernels = jit_state.kernels("_kernels_wide")
    except jit_state.JitUnavailableError:
        return None
    k = len(primes)
    w, inv = crt_matrix(primes)
    budget.check_allocation(8.0 * (2 * k + w.shape[0]) * max(count, n),
                            "residue rows of the wide NTT engine")
    with blas_threads(BLAS_THREADS):
        ra = _residues(da, primes)
        rb = ra if db is da else _residues(db, primes)
        y = np.empty((k, count), dtype=np.int64)
        kernels.rows_products(ra, rb, *stacked_tables(primes, n), y)
        yf = np.empty((k + 1, count), dtype=np.float64)
        yf[:k] = y
        np.rint(inv @ yf[:k], out=yf[k])
        sums = w @ yf
    buf = _pyints.buffer(count, 15 * w.shape[0], "Python ints of the wide NTT engine")
    used = kernels.crt_stream(sums, buf)
    return _pyints.objects(buf, used, count)
