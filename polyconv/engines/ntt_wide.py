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
   ``i`` holds ``y_i = c u_i mod p_i``.  Short products (``n1 n2 <=``
   :data:`DIRECT_MAX_TERMS`) take the schoolbook sums instead, all primes at once in SIMD lanes
   (:func:`polyconv.engines._kernels_wide.lanes_direct`): at 64 x 64 the ``n1 n2 k`` lane
   products cost less than ``3 k`` transforms of 128 points.
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
import threading
from functools import lru_cache

import numpy as np

from ..numerics import budget
from . import _pyints, jit_state
from ._blas import blas_threads
from ._threads import helper_thread
from .ntt_compiled import _stage_table
from .ntt_wide_primes import MAX_PRIMES, prime_table, primes_for  # noqa: F401 (re-exported)

#: Most 15-bit digits of an operand (the residue product: ``255 x 2^45 < 2^53``).
MAX_DIGITS = 255
#: BLAS threads of the two matrix products (:mod:`polyconv.engines._blas`: one is the fastest
#: and steadiest on a shared machine; two gain up to 2x on an idle one).
BLAS_THREADS = 1
#: Twiddle tables of at most this many bytes in all are kept for the process (16 bytes per
#: point and prime; building them costs ~30 ns per point, about what the product does).
CACHED_TABLE_BYTES = 2**30
#: Transforms up to this length run all their primes in one kernel call (stacked tables).
STACKED_LENGTH = 2**13
#: Primes whose operand residues are held at once (longer transforms).
PRIME_GROUP = 8
#: Output coefficients per CRT matrix product (bounds its memory).
CRT_CHUNK = 2**12
#: Largest ``n1 n2`` whose residue products are schoolbook sums in SIMD lanes rather than
#: transforms (measured: bench/RESULTS.md, section "wide lanes").
DIRECT_MAX_TERMS = 2**13


def transform_length(n1: int, n2: int) -> int:
    return 1 << max(0, (n1 + n2 - 2).bit_length())


_long_tables: dict[int, tuple] = {}
_scratch = threading.local()
#: Work arrays up to this many bytes each are kept per thread and reused: fresh ones of a few
#: MB come from ``mmap`` and pay a page fault per 4 KiB on first touch (measured: 1.3 ms of a
#: 4 ms product at n = 2^10, 1000 bits).
SCRATCH_BYTES = 2**26
#: Work arrays below this many bytes are plain ``np.empty`` (0.26 us, from the heap without
#: page faults; the per-thread lookup costs 0.8-1.2 us).
FRESH_BYTES = 2**18


def scratch(name: str, shape: tuple, dtype) -> np.ndarray:
    """A C-contiguous work array of ``shape`` (contents undefined), reused per thread."""
    dtype = np.dtype(dtype)
    size = math.prod(shape)
    if size * dtype.itemsize < FRESH_BYTES:
        return np.empty(shape, dtype=dtype)
    have = getattr(_scratch, name, None)
    if have is None or have.dtype != dtype or have.shape[0] < size:
        have = np.empty(size, dtype=dtype)
        if have.nbytes <= SCRATCH_BYTES:
            setattr(_scratch, name, have)
    return have[:size].reshape(shape)


def _tables(p: int, n: int) -> tuple:
    """``n``-point twiddles modulo ``p`` (forward, inverse, Shoup quotients; the layout of
    :func:`polyconv.engines.ntt_compiled.tables`: a shorter transform reads a prefix, since
    ``w_{2h} = g^((p - 1) / 2h)`` does not depend on the length)."""
    have = _long_tables.get(p)
    if have is not None and have[0] >= n:
        return have[1]
    g = {q: g for q, g, _ in prime_table()}[p]
    root = pow(g, (p - 1) // n, p)
    tw, twq = _stage_table(root, n, p)
    itw, itwq = _stage_table(pow(root, p - 2, p), n, p)
    entry = (tw, twq, itw, itwq)
    held = sum(16 * v[0] for q, v in _long_tables.items() if q != p)
    if held + 16 * n <= CACHED_TABLE_BYTES:
        _long_tables[p] = (n, entry)
    return entry


@lru_cache(maxsize=256)
def scale_factors(primes: tuple[int, ...], n: int) -> tuple[np.ndarray, ...]:
    """``-p^-1 mod 2^32`` and ``f_i = 2^32 n^-1 (P/p_i)^-1 mod p_i`` with Shoup quotients (the
    transform's scale and the CRT's ``u_i`` in one factor)."""
    total = math.prod(primes)
    neg_inv = np.array([(-pow(p, -1, 2**32)) % 2**32 for p in primes], dtype=np.uint64)
    f = [(2**32 * pow(n, -1, p) * pow(total // p, -1, p)) % p for p in primes]
    fq = [(v << 32) // p for v, p in zip(f, primes, strict=True)]
    return neg_inv, np.array(f, dtype=np.uint64), np.array(fq, dtype=np.uint64)


@lru_cache(maxsize=8)
def stacked_tables(primes: tuple[int, ...], n: int) -> tuple:
    """The primes and their ``n``-point tables stacked row by row (short transforms: all the
    primes' products in one kernel call, :func:`polyconv.engines._kernels_wide.rows_products`)."""
    rows = [_tables(p, n) for p in primes]
    stacked = [np.ascontiguousarray(np.stack([r[i][:n] for r in rows])) for i in range(4)]
    return (np.array(primes, dtype=np.uint64), *stacked)


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
    values = x.tolist() if isinstance(x, np.ndarray) else list(x)
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
    out = scratch("digits", (len(values), digits), np.float64)
    jit_state.kernels("_kernels_wide").stream_digits(data, out)
    return out


def _operand_digits(a, b) -> np.ndarray | None:
    """Digits of ``a`` then ``b`` in one matrix (one stream), or None as :func:`digit_matrix`."""
    if b is a:
        return digit_matrix(a)
    la = a.tolist() if isinstance(a, np.ndarray) else list(a)
    lb = b.tolist() if isinstance(b, np.ndarray) else list(b)
    return digit_matrix(la + lb)


def both(first, second, threads: int):
    """``first()`` on the helper thread while this one runs ``second()`` (``threads >= 2``),
    else one after the other; their results."""
    if threads < 2:
        return first(), second()
    job = helper_thread().submit(first)
    other = second()
    return job.result(), other


def _products(digits: np.ndarray, n1: int, square: bool, primes: tuple[int, ...], n: int,
              yf: np.ndarray, threads: int = 1) -> None:
    """``yf[i] = c u_i mod p_i`` (float64) for every prime and ``yf[k] = t``: residues ``T D^T``
    (exact: below ``2^53``; the transform kernel reduces them), the NTT products, the rounded
    ``sum_i y_i / p_i``; short transforms on ``threads`` threads (half the primes each)."""
    k, count = len(primes), yf.shape[1]
    t = residue_matrix(primes, digits.shape[1])
    neg_inv, f, fq = scale_factors(primes, n)
    inv = crt_matrix(primes)[1]
    if n <= STACKED_LENGTH:
        r = np.matmul(t, digits.T, out=scratch("residues", (k, digits.shape[0]), np.float64))
        tables = stacked_tables(primes, n)
        kernel = jit_state.kernels("_kernels_wide").rows_products
        half = k // 2 if threads >= 2 and k >= 2 else k
        sums = np.zeros((2, count), dtype=np.float64)

        def part(lo: int, hi: int, row: int):
            return lambda: kernel(r[lo:hi], n1, square, *(x[lo:hi] for x in tables),
                                  neg_inv[lo:hi], f[lo:hi], fq[lo:hi], inv[lo:hi], yf[lo:hi],
                                  sums[row])

        both(part(0, half, 0), part(half, k, 1), threads)
        np.add(sums[0], sums[1], out=yf[k])
        np.floor(yf[k] + 0.5, out=yf[k])
        return
    ntt = jit_state.kernels("_kernels_ntt")
    fa, fb = np.empty(n, dtype=np.uint32), np.empty(n, dtype=np.uint32)
    y = np.empty(count, dtype=np.int64)
    for g in range(0, k, PRIME_GROUP):
        r = t[g:g + PRIME_GROUP] @ digits.T
        for i in range(r.shape[0]):
            p = primes[g + i]
            ra = r[i, :n1].astype(np.int64)
            rb = ra if square else r[i, n1:].astype(np.int64)
            tw, twq, itw, itwq = _tables(p, n)
            ntt.product_mod_prime(ra, rb, p, tw, twq, itw, itwq, int(neg_inv[g + i]),
                                  int(f[g + i]), int(fq[g + i]), fa, fb, y)
            yf[g + i] = y
    rounded_quotients(yf, inv)


def lanes(k: int) -> int:
    """SIMD lanes of the direct route for ``k`` primes (padded to whole 8-lane registers, as
    :data:`polyconv.engines._kernels_wide.LANE_PAD`; that module is not imported here)."""
    return -(-k // 8) * 8


def uses_direct(n1: int, n2: int) -> bool:
    """Whether the residue products are schoolbook sums (:func:`_direct_products`) rather than
    transforms: from the measured costs (bench/RESULTS.md, section "wide lanes")."""
    return n1 * n2 <= DIRECT_MAX_TERMS


@lru_cache(maxsize=256)
def crt_scales(primes: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray]:
    """The primes as uint64 and ``u_i = (P / p_i)^-1 mod p_i`` (the CRT's factors, without the
    transform's)."""
    total = math.prod(primes)
    return (np.array(primes, dtype=np.uint64),
            np.array([pow(total // p, -1, p) for p in primes], dtype=np.uint64))


def _direct_products(digits: np.ndarray, n1: int, square: bool, primes: tuple[int, ...],
                     count: int) -> np.ndarray:
    """The rows ``yf`` of :func:`_products` by schoolbook sums with the primes in SIMD lanes
    (:func:`polyconv.engines._kernels_wide.lanes_direct`): residues ``D T^T`` (one row per
    value), then the kernel."""
    k = len(primes)
    rows = digits.shape[0]
    t = residue_matrix(primes, digits.shape[1])
    r = np.matmul(digits, t.T, out=scratch("lanes", (rows, k), np.float64))
    yf = scratch("yf", (k + 1, count), np.float64)
    jit_state.kernels("_kernels_wide").lanes_direct(
        r, n1, square, *crt_scales(primes), crt_matrix(primes)[1], yf)
    return yf


def rounded_quotients(yf: np.ndarray, inv: np.ndarray) -> None:
    """``yf[k] = round(sum_i yf[i] / p_i)`` in column chunks (the module's ``t``)."""
    k = inv.shape[0]
    for c0 in range(0, yf.shape[1], CRT_CHUNK):
        block = yf[:, c0:c0 + CRT_CHUNK]
        np.rint(inv @ block[:k], out=block[k])


def convolve_wide(a, b, bound: int, keep: int | None = None, threads: int = 1
                  ) -> np.ndarray | None:
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
    threads : int
        2: the helper thread (:mod:`polyconv.engines._threads`) takes half the primes' products
        and half the CRT columns.
    """
    return _convolve(lambda: _operand_digits(a, b), len(a), len(b), b is a, bound, keep, threads)


def convolve_streams(da: np.ndarray, db: np.ndarray, n1: int, n2: int, bits: int, bound: int,
                     keep: int | None = None) -> np.ndarray | None:
    """:func:`convolve_wide` of two operands given as their ``marshal.dumps(list, 2)`` streams
    (``db is da`` for a square), already checked by
    :func:`polyconv.engines.ntt_stream.streams`: lengths ``n1``, ``n2``, every ``|v| < 2^bits``
    (so ``ceil(bits / 15)`` digits hold each value).  Saves dumping the operands again."""
    return _convolve(lambda: _stream_digits(da, db, n1, n2, bits), n1, n2, db is da, bound,
                     keep, 1)


def _stream_digits(da, db, n1: int, n2: int, bits: int) -> np.ndarray | None:
    digits = max(1, -(-bits // 15))
    if digits > MAX_DIGITS:
        return None
    rows = n1 if db is da else n1 + n2
    budget.check_allocation(8.0 * digits * rows, "digit matrix of the wide NTT engine")
    out = scratch("digits", (rows, digits), np.float64)
    kernel = jit_state.kernels("_kernels_wide").stream_digits
    kernel(da, out[:n1])
    if db is not da:
        kernel(db, out[n1:])
    return out


def _convolve(operand_digits, n1: int, n2: int, square: bool, bound: int, keep: int | None,
              threads: int) -> np.ndarray | None:
    count = n1 + n2 - 1 if keep is None else min(keep, n1 + n2 - 1)
    n = transform_length(n1, n2)
    primes = primes_for(bound, n)
    if primes is None or count <= 0:
        return None
    if _pyints.ready() is None:
        return None
    k = len(primes)
    group = k if n <= STACKED_LENGTH else PRIME_GROUP
    direct = uses_direct(n1, n2)
    check_memory(primes, count, n, 3 * group * (n1 + n2), (n1 + n2) if direct else 0)
    with blas_threads(BLAS_THREADS):
        digits = operand_digits()
        if digits is None:
            return None
        if direct:
            yf = _direct_products(digits, n1, square, primes, count)
        else:
            yf = scratch("yf", (k + 1, count), np.float64)
            _products(digits, n1, square, primes, n, yf, threads)
        return recombine(yf, primes, threads)


def check_memory(primes: tuple[int, ...], count: int, n: int, operand_rows: int,
                 lane_values: int = 0) -> None:
    """Refuse before allocating: the residue rows, the CRT's work arrays and either the
    transforms' tables or, for the direct route of ``lane_values = n1 + n2`` operand values,
    the lanes of :func:`_direct_products` (uint32 residues, int64 reduced sums)."""
    rows = crt_matrix(primes)[0].shape[0]
    k = len(primes)
    route = ((4.0 * lane_values + 8.0 * count) * lanes(k) if lane_values
             else 16.0 * k * n)
    budget.check_allocation(8.0 * ((k + 1) * count + operand_rows + rows * min(count, CRT_CHUNK))
                            + route, "residue rows and tables of the wide NTT engine")


def recombine(yf: np.ndarray, primes: tuple[int, ...], threads: int = 1) -> np.ndarray:
    """The signed values ``c`` from ``yf[i] = c u_i mod p_i`` and ``yf[k] = t``: the CRT matrix
    product in column chunks and the stream, the halves of the columns on two threads when
    ``threads >= 2`` (each its own stream: positions depend on the values before)."""
    count = yf.shape[1]
    if threads < 2 or count < 2 * 256:
        return _pyints.objects(*_stream(yf, primes), count)
    half = count // 2
    (buf1, used1), (buf2, used2) = both(lambda: _stream(yf[:, :half], primes),
                                        lambda: _stream(yf[:, half:], primes), threads)
    out = np.empty(count, dtype=object)
    out[:half] = marshal.loads(buf1[:used1])
    out[half:] = marshal.loads(buf2[:used2])
    return out


def _stream(yf: np.ndarray, primes: tuple[int, ...]) -> tuple[np.ndarray, int]:
    """The marshal stream of the values of ``yf``'s columns (this thread's work arrays)."""
    count = yf.shape[1]
    w = crt_matrix(primes)[0]
    rows = w.shape[0]
    chunk = min(count, CRT_CHUNK)
    kernels = jit_state.kernels("_kernels_wide")
    buf = scratch("stream", (_pyints.capacity(count, 15 * rows),), np.uint8)
    sums = scratch("sums", (rows * chunk,), np.float64)
    pos = 0
    for c0 in range(0, count, chunk):
        block = yf[:, c0:c0 + chunk]
        part = sums[:rows * block.shape[1]].reshape(rows, block.shape[1])
        np.matmul(w, block, out=part)
        pos = kernels.crt_stream(part, buf, pos, count)
    return buf, pos
