"""Compiled number-theoretic transform engines: modulo an NTT prime, exact integers, modulo any m.

The arithmetic runs in the numba kernels of :mod:`polyconv.engines._kernels_ntt` (loaded through
:mod:`polyconv.engines.jit_state`; this module imports no numba itself):

* :func:`convolve_mod_prime`: one NTT product modulo a prime ``p = c 2^k + 1 < 2^30``
  (J. M. Pollard, Math. Comp. 25 (1971) 365-374);
* :func:`convolve_exact`: the exact signed product of integer sequences from NTT products modulo
  enough primes that ``P = prod p_i > 2 B`` for an a-priori bound ``B >= max |c_k|`` (for example
  ``||a||_2 ||b||_2``, Cauchy-Schwarz), recombined by Garner's algorithm (Knuth, TAOCP vol. 2,
  section 4.3.2) straight into int64 when ``B < 2^63``, else into a ``marshal`` stream of Python
  ints read by ``marshal.loads`` (:mod:`polyconv.engines._pyints`: the fastest route measured,
  ~50 ns a 130-bit value with the Garner work; two's-complement rows and ``int.from_bytes`` when
  the stream check fails);
* :func:`convolve_mod`: the product modulo any ``m`` (operands in ``[0, m)``): the exact
  non-negative product from primes with ``P > min(n1, n2) (m - 1)^2``, reduced modulo ``m`` during
  the recombination (``m < 2^62``) or afterwards.

Transform lengths are powers of two; twiddle tables are built once per prime for the longest
transform seen (the stage of half-length ``h`` uses ``table[h:2h]``, so shorter transforms read a
prefix) and kept for the process.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from ..numerics.limits import INT64_LIMIT, magnitude_fits_int64, residues_fit_int64
from . import _intpack, _pyints, jit_state
from ._common import powers_mod
from ._wrap import tops, unwrap, wrap_length

#: NTT primes ``p = c 2^k + 1`` between ``2^29`` and ``2^30`` (so ``4p < 2^32``: lazy butterflies
#: stay in uint32) with a primitive root ``g``: ``(p, g, k)``, longest transforms first.  Found
#: and verified with sympy (``isprime``, ``primitive_root``; tests re-check them).  Then two
#: smaller primes that admit transforms up to ``2^25`` and ``2^26`` points.
PRIMES: tuple[tuple[int, int, int], ...] = (
    (754974721, 11, 24), (998244353, 3, 23), (897581057, 3, 23), (880803841, 26, 23),
    (645922817, 3, 23), (595591169, 3, 23), (985661441, 3, 22), (943718401, 7, 22),
    (935329793, 3, 22), (918552577, 5, 22), (683671553, 3, 22), (666894337, 5, 22),
    (1012924417, 5, 21), (1004535809, 3, 21), (975175681, 17, 21), (962592769, 7, 21),
    (950009857, 7, 21), (924844033, 5, 21), (899678209, 7, 21), (824180737, 5, 21),
    (799014913, 13, 21), (786432001, 7, 21), (740294657, 3, 21), (715128833, 3, 21),
    (710934529, 17, 21), (648019969, 17, 21), (639631361, 6, 21), (635437057, 11, 21),
    (597688321, 11, 21), (576716801, 6, 21), (1053818881, 7, 20), (1051721729, 6, 20),
    (1045430273, 3, 20), (1007681537, 3, 20), (976224257, 3, 20), (972029953, 10, 20),
    (957349889, 6, 20), (940572673, 7, 20), (938475521, 3, 20), (925892609, 3, 20),
    (919601153, 3, 20), (913309697, 3, 20), (907018241, 3, 20), (883949569, 7, 20),
    (862978049, 3, 20), (850395137, 3, 20), (833617921, 13, 20), (818937857, 5, 20),
    (802160641, 11, 20), (800063489, 3, 20), (770703361, 11, 20), (745537537, 5, 20),
    (718274561, 3, 20), (655360001, 3, 20), (605028353, 3, 20), (581959681, 11, 20),
    (469762049, 3, 26), (167772161, 3, 25),
)
_ROOTS = {p: (g, k) for p, g, k in PRIMES}

#: Largest modulus whose CRT value is reduced inside the kernel (float quotient estimate).
KERNEL_MODULUS_LIMIT = 2**62

_tables: dict[int, tuple] = {}


def is_ntt_prime(m: int) -> bool:
    """Whether ``m`` is one of :data:`PRIMES` (a single-prime NTT modulus)."""
    return m in _ROOTS


def max_length(p: int) -> int:
    """Longest transform modulo ``p``: ``2^k`` for ``p = c 2^k + 1``."""
    return 1 << _ROOTS[p][1]


def transform_length(n1: int, n2: int) -> int:
    """Smallest power of two ``>= n1 + n2 - 1``."""
    return 1 << max(0, (n1 + n2 - 2).bit_length())


def primes_for(bound: int, length: int, signed: bool = True) -> tuple[int, ...]:
    """Fewest primes of :data:`PRIMES` (in order) admitting ``length``-point transforms whose
    product exceeds ``2 bound`` (signed) or ``bound`` (non-negative values up to ``bound``).

    Raises
    ------
    ValueError
        If all the primes that admit ``length`` are not enough.
    """
    target = 2 * bound if signed else bound
    chosen, product = [], 1
    for p, _, k in PRIMES:
        if length <= 1 << k:
            chosen.append(p)
            product *= p
            if product > target:
                return tuple(chosen)
    raise ValueError(f"a {bound.bit_length()}-bit product bound needs more NTT primes than "
                     f"those admitting {length}-point transforms")


def prime_count(bound: int, length: int, signed: bool = True) -> int:
    """``len(primes_for(bound, length, signed))``, or 0 when the primes are not enough."""
    try:
        return len(primes_for(bound, length, signed))
    except ValueError:
        return 0


def _stage_table(root: int, n: int, p: int) -> tuple[np.ndarray, np.ndarray]:
    """``table[h + j] = w_{2h}^j`` (``w_{2h} = root^(n / 2h)``, ``root`` of order ``n``) and the
    Shoup quotients ``floor(w 2^32 / p)``, as uint32 arrays of length ``n``."""
    base = powers_mod(root, max(1, n // 2), p)
    table = np.zeros(n, dtype=np.uint64)
    h = 1
    while h < n:
        table[h:2 * h] = base[:: n // (2 * h)][:h]
        h *= 2
    quotients = (table << np.uint64(32)) // np.uint64(p)
    return table.astype(np.uint32), quotients.astype(np.uint32)


def tables(p: int, n: int) -> tuple:
    """Twiddles of every stage up to length ``n`` modulo ``p`` (forward, inverse; Shoup
    quotients) and ``-p^-1 mod 2^32``, built once for the longest ``n`` asked."""
    have = _tables.get(p)
    if have is not None and have[0] >= n:
        return have[1]
    g, k = _ROOTS[p]
    size = max(n, 2, have[0] if have else 0)
    if size > 1 << k:
        raise ValueError(f"transforms modulo {p} have at most 2^{k} points; {size} asked")
    root = pow(g, (p - 1) // size, p)
    tw, twq = _stage_table(root, size, p)
    itw, itwq = _stage_table(pow(root, p - 2, p), size, p)
    neg_inv = (-pow(p, -1, 2**32)) % 2**32
    entry = (tw, twq, itw, itwq, neg_inv)
    _tables[p] = (size, entry)
    return entry


@lru_cache(maxsize=512)  # a modular power per prime and length: 3-5 us a call, once
def _scale_factor(p: int, n: int) -> tuple[int, int]:
    """``f = 2^32 / n mod p`` (undoes Montgomery's ``R^-1`` and the inverse's ``n``) and its Shoup
    quotient."""
    f = (2**32 * pow(n, p - 2, p)) % p
    return f, (f << 32) // p


def _as_int64(x: np.ndarray) -> np.ndarray:
    """Contiguous writable int64 (the kernels' one signature; broadcast views are read-only)."""
    x = np.ascontiguousarray(x, dtype=np.int64)
    return x if x.flags.writeable else x.copy()


#: Products up to this transform length run all their primes in one kernel call, with the
#: tables stacked (``k`` rows of ``n`` words each); longer ones call the kernel per prime.
STACKED_TABLES_LENGTH = 2**12


@lru_cache(maxsize=128)
def _stacked_tables(primes: tuple[int, ...], n: int) -> tuple:
    """The primes, their ``n``-point twiddle tables stacked row by row and their constants,
    as :func:`polyconv.engines._kernels_batch.primes_ntt` takes them."""
    rows = [tables(p, n) for p in primes]
    scale = [_scale_factor(p, n) for p in primes]
    stacked = [np.ascontiguousarray(np.stack([r[i][:n] for r in rows])) for i in range(4)]
    return (np.array(primes, dtype=np.uint64), *stacked,
            np.array([r[4] for r in rows], dtype=np.uint64),
            np.array([f for f, _ in scale], dtype=np.uint64),
            np.array([q for _, q in scale], dtype=np.uint64))


def multiply_mod_primes(a: np.ndarray, b: np.ndarray, primes: tuple[int, ...],
                        count: int, out: np.ndarray | None = None) -> np.ndarray:
    """Rows ``(a * b mod p_i)[:count]`` for each prime, as a ``(len(primes), count)`` int64 array.

    ``a`` and ``b`` are int64 vectors (any values: reduced inside) or ``(len(primes), n)``
    int64 residue matrices (one row per prime, already in ``[0, p_i)``).  A product a little
    longer than a power of two takes the cyclic route of :mod:`polyconv.engines._wrap`.
    """
    n = transform_length(a.shape[-1], b.shape[-1])
    m = wrap_length(a.shape[-1], b.shape[-1], n)
    if m:  # a little longer than m: a cyclic m-point product and a short one of the top ends
        top_a, top_b = tops(a, b, m)
        top = multiply_mod_primes(top_a, top_b, primes, top_a.shape[-1] + top_b.shape[-1] - 1)
        cyclic = _products(a, b, primes, m, m, None)
        return unwrap(cyclic, top, np.array(primes, dtype=np.int64), count, out)
    return _products(a, b, primes, count, n, out)


def _products(a: np.ndarray, b: np.ndarray, primes: tuple[int, ...], count: int, n: int,
              out: np.ndarray | None) -> np.ndarray:
    """:func:`multiply_mod_primes` with ``n``-point transforms (cyclic products when ``n`` is
    shorter than the product)."""
    k = _kernels()
    if len(primes) > 1 and n <= STACKED_TABLES_LENGTH and a.ndim == 1 and b.ndim == 1 and (
            out is None or out.flags.c_contiguous):
        res = np.empty((len(primes), count), dtype=np.int64) if out is None else out
        jit_state.kernels("_kernels_batch").primes_ntt(a, b, *_stacked_tables(primes, n), res)
        return res
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    res = np.empty((len(primes), count), dtype=np.int64) if out is None else out
    same = a is b
    for i, p in enumerate(primes):
        tw, twq, itw, itwq, neg_inv = tables(p, n)
        f, fq = _scale_factor(p, n)
        ra = a if a.ndim == 1 else a[i]
        rb = ra if same else (b if b.ndim == 1 else b[i])
        k.product_mod_prime(ra, rb, p, tw, twq, itw, itwq, neg_inv, f, fq, fa, fb, res[i])
    return res


def convolve_mod_prime(a: np.ndarray, b: np.ndarray, p: int,
                       keep: int | None = None) -> np.ndarray:
    """Full product (or its first ``keep`` entries) of two integer sequences modulo the NTT
    prime ``p`` (a member of :data:`PRIMES`; the caller checks the transform length).

    Returns
    -------
    numpy.ndarray
        int64 residues in ``[0, p)``.
    """
    count = _count(a, b, keep)
    ra = _as_int64(a)
    rb = ra if b is a else _as_int64(b)
    n = transform_length(a.shape[-1], b.shape[-1])
    if n <= STACKED_TABLES_LENGTH:  # short: the packed-argument kernel (dispatch is the cost)
        out = np.empty(count, dtype=np.int64)
        jit_state.kernels("_kernels_batch").one_ntt_mod(ra, rb, *_packed_tables(p, n), out)
        return out
    return multiply_mod_primes(ra, rb, (p,), count)[0]


@lru_cache(maxsize=128)
def _packed_tables(p: int, n: int) -> tuple[np.ndarray, np.ndarray]:
    """``(4, n)`` tables and ``(p, -p^-1 mod 2^32, f, f')`` as
    :func:`polyconv.engines._kernels_batch.one_ntt_mod` takes them."""
    tw, twq, itw, itwq, neg_inv = tables(p, n)
    f, fq = _scale_factor(p, n)
    tab = np.ascontiguousarray(np.stack([t[:n] for t in (tw, twq, itw, itwq)]))
    return tab, np.array([p, neg_inv, f, fq], dtype=np.uint64)


def _count(a: np.ndarray, b: np.ndarray, keep: int | None) -> int:
    full = a.shape[-1] + b.shape[-1] - 1
    return full if keep is None else min(keep, full)


def _residue_rows(x: np.ndarray, primes: tuple[int, ...]) -> np.ndarray:
    """``x`` as int64 (when it fits) or as a ``(len(primes), n)`` matrix of residues."""
    if x.dtype.kind in "iub" and (x.dtype.kind != "u" or x.size == 0 or int(x.max()) < INT64_LIMIT):
        return _as_int64(x)
    rows = np.ascontiguousarray(_intpack.values_to_rows(x))  # the kernel takes C rows
    arr, wrap = _wraps(primes, rows.shape[1])
    out = np.empty((len(primes), rows.shape[0]), dtype=np.int64)
    _kernels().residues_from_rows(rows, arr, wrap, out)
    return out


@lru_cache(maxsize=256)
def _wraps(primes: tuple[int, ...], width: int) -> tuple[np.ndarray, np.ndarray]:
    """The primes and ``2^(8 width) mod p`` for each, as :func:`residues_from_rows` takes them."""
    return (np.array(primes, dtype=np.int64),
            np.array([pow(2, 8 * width, p) for p in primes], dtype=np.int64))


@lru_cache(maxsize=64)  # k^2 modular inverses: 19 ms for 27 primes, once per prime set
def _garner_constants(primes: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    k = len(primes)
    inv = np.zeros((k, k), dtype=np.int64)
    invq = np.zeros((k, k), dtype=np.int64)
    for i, p in enumerate(primes):
        for j in range(i):
            v = pow(primes[j] % p, p - 2, p)
            inv[i, j], invq[i, j] = v, (v << 32) // p
    return np.array(primes, dtype=np.int64), inv, invq


@lru_cache(maxsize=64)
def _modulus_words(primes: tuple[int, ...], sign_word: bool) -> tuple[np.ndarray, int]:
    """``P = prod p_i`` as little-endian 32-bit words (exactly as many as it needs, or with room
    for a sign bit) and its bit length."""
    total = math.prod(primes)
    bits = total.bit_length()
    words = bits // 32 + 1 if sign_word else -(-bits // 32)
    return np.frombuffer(total.to_bytes(4 * words, "little"), dtype=np.uint32).copy(), bits


def recombine(res: np.ndarray, primes: tuple[int, ...], as_int64: bool) -> np.ndarray:
    """Signed CRT values (``|c| < P/2``) of residue rows: int64 (the caller proved
    ``|c| < 2^63``) or an object array of Python ints."""
    arr, inv, invq = _garner_constants(primes)
    k = _kernels()
    count = res.shape[1]
    if as_int64:
        out = np.empty(count, dtype=np.int64)
        k.garner_int64(res, arr, inv, invq, out)
        return out
    streams = _pyints.ready()
    if streams is not None:  # Python ints straight from a marshal stream (fastest measured)
        modulus_words, bits = _modulus_words(primes, False)
        buf = _pyints.buffer(count, bits, "Python ints from CRT residues")
        used = streams.garner_stream(res, arr, inv, invq, modulus_words, buf)
        return _pyints.objects(buf, used, count)
    modulus_words, _ = _modulus_words(primes, True)
    words = modulus_words.shape[0]
    rows = np.empty((count, words), dtype=np.uint32)
    k.garner_words(res, arr, inv, invq, modulus_words, rows)
    return _intpack.rows_to_ints(rows.view(np.uint8).reshape(count, 4 * words), signed=True)


def convolve_exact(a: np.ndarray, b: np.ndarray, bound: int, keep: int | None = None,
                   as_int64: bool | None = None) -> np.ndarray:
    """Exact signed product of integer sequences by multi-prime NTT and Garner CRT.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty int64, uint64 or object (Python int) arrays.
    bound : int
        An a-priori bound of every ``|c_k|`` (for example ``min(n1, n2) max|a| max|b|`` or
        ``||a||_2 ||b||_2`` rounded up); the primes are chosen from it.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    as_int64 : bool, optional
        int64 output; default: when ``bound < 2^63``.  Otherwise Python ints.
    """
    count = _count(a, b, keep)
    primes = primes_for(bound, transform_length(a.shape[-1], b.shape[-1]))
    ra = _residue_rows(a, primes)
    rb = ra if b is a else _residue_rows(b, primes)
    res = multiply_mod_primes(ra, rb, primes, count)
    if as_int64 is None:
        as_int64 = magnitude_fits_int64(bound)
    return recombine(res, primes, as_int64)


def convolve_mod(a: np.ndarray, b: np.ndarray, m: int, keep: int | None = None) -> np.ndarray:
    """Product modulo any ``m >= 2`` of operands already in ``[0, m)``: exact product from
    :func:`multiply_mod_primes` with ``P > min(n1, n2) (m - 1)^2``, then reduced.

    Returns int64 for ``m <= 2^63``, else Python ints.
    """
    if is_ntt_prime(m) and transform_length(a.shape[-1], b.shape[-1]) <= max_length(m):
        return convolve_mod_prime(a, b, m, keep)
    count = _count(a, b, keep)
    bound = min(a.shape[-1], b.shape[-1]) * (m - 1) ** 2
    primes = primes_for(bound, transform_length(a.shape[-1], b.shape[-1]), signed=False)
    ra = _residue_rows(a, primes)
    rb = ra if b is a else _residue_rows(b, primes)
    res = multiply_mod_primes(ra, rb, primes, count)
    if m < KERNEL_MODULUS_LIMIT:
        arr, inv, invq = _garner_constants(primes)
        out = np.empty(count, dtype=np.int64)
        _kernels().garner_mod(res, arr, inv, invq, m, out)
        return out
    # non-negative values below P < 2 P/2: the signed recombination with P > 2 bound is not
    # needed, but an unsigned one would be a kernel more; shift negatives back by P
    values = recombine(res, primes, as_int64=False)
    total = math.prod(primes)
    values = np.where(values < 0, values + total, values) % m
    return values.astype(np.int64) if residues_fit_int64(m) else values


def _kernels():
    return jit_state.kernels("_kernels_ntt")


def run_planned(a: np.ndarray, b: np.ndarray, modulus: int | None, bound: int,
                keep: int | None, as_int64: bool) -> np.ndarray | None:
    """The product a plan of the exact chooser asked for: modulo ``modulus``, or exact from the
    planned ``bound``; None when the kernels turned out not to load here (the caller then runs
    an exact numpy engine instead)."""
    try:
        if modulus is not None:
            return convolve_mod(a, b, modulus, keep)
        return convolve_exact(a, b, bound, keep, as_int64=as_int64 or None)
    except jit_state.JitUnavailableError:
        return None
