"""Batched short products in compiled code: one product per row, many rows per call.

Product trees, Newton base cases and the batch axis of ``convolve`` ask for many short products;
one Python call each costs more than the arithmetic (about 20 us against 1 us of work at length
16).  These functions take two stacks of rows (``(r, n1)`` and ``(r, n2)``, or one row broadcast
against many) and compute all ``r`` products in one kernel call of
:mod:`polyconv.engines._kernels_batch`:

* :func:`multiply_rows_mod_prime`: modulo an NTT prime ``p < 2^30`` of
  :data:`polyconv.engines.ntt_compiled.PRIMES`: schoolbook summation while ``n1 n2`` is below
  :data:`SCHOOLBOOK_WORK` (measured), else one NTT product per row (J. M. Pollard, Math. Comp. 25
  (1971) 365-374) with shared buffers and twiddle tables;
* :func:`multiply_rows_exact`: exact integer products, from an a-priori bound ``B`` of
  ``sum_i |a_i| |b_{k-i}|`` (for example ``min(n1, n2) max|a| max|b|`` or ``||a||_2 ||b||_2``):
  schoolbook in wrapping 64-bit (``B < 2^63``) or 128-bit (``B < 2^127``) arithmetic for short
  rows, else products modulo enough NTT primes that ``P > 2B`` and Garner's CRT (Knuth, TAOCP
  vol. 2, section 4.3.2) to int64 when ``B < 2^63``, else to Python ints;
* :func:`multiply_rows_mod`: modulo any ``m`` (operands in ``[0, m)``) by the exact non-negative
  products (``P > min(n1, n2) (m - 1)^2``) reduced during the recombination;
* :func:`product_mod`: the product of many polynomials modulo ``m`` by a balanced product tree
  whose every level is one batched call;
* :func:`small_product`: one short product without planning, for callers that have validated
  their operands (about 5 us against 30-40 us through the planner; measured).

This module imports no numba: the kernels come through :func:`polyconv.engines.jit_state.kernels`,
which raises :class:`polyconv.engines.jit_state.JitUnavailableError` when they cannot run here.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from ..numerics import budget
from . import _intpack, _pyints
from . import jit_state as jit
from .ntt_compiled import (
    KERNEL_MODULUS_LIMIT,
    _garner_constants,
    convolve_exact,
    convolve_mod,
    is_ntt_prime,
    max_length,
    primes_for,
    recombine,
    tables,
    transform_length,
)

#: Rows with ``n1 n2`` at most this many multiply-adds use schoolbook summation modulo a prime:
#: measured on the development machine with the SIMD transforms (256 rows of n x n,
#: microseconds per row, schoolbook / NTT): n = 16 0.33 / 0.68, 24 0.91 / 0.86, 32 0.82 / 0.57,
#: 64 2.33 / 0.81, 128 7.5 / 1.3 (before them: 64 2.0 / 2.8, 128 6.9 / 5.9).
SCHOOLBOOK_WORK = 20 * 20
#: The same for exact int64 rows in wrapping arithmetic, against two-prime NTT + Garner (64 rows,
#: us per row): n = 128 3.5 / 16.2, 256 13.5 / 34.1, 384 29.3 / 62.6.
SCHOOLBOOK_WORK_WRAP = 512 * 512
#: The same below ``2^127`` in 128-bit sums, against primes + Garner to Python ints (us per row):
#: 16 x 128 40 / 108, 8 x 256 108 / 185, 4 x 512 327 / 371, 2 x 1024 1096 / 787.
SCHOOLBOOK_WORK_128 = 512 * 512

#: :func:`small_product` takes products of at most this many multiply-adds.
SMALL_PRODUCT_WORK = 128 * 128


def _kernels():
    return jit.kernels("_kernels_batch")


def small_product(x: np.ndarray, y: np.ndarray, modulus: int | None = None,
                  keep: int | None = None, *, magnitudes: tuple[int, int] | None = None,
                  wide: bool = False) -> np.ndarray | None:
    """One short product of validated 1-D int64 operands, or None when this path does not apply.

    It applies when the kernels are already loaded in this process (nothing here waits for a
    compiler), ``n1 n2 <= SMALL_PRODUCT_WORK``, ``keep`` (if given) is at most the full length,
    and either ``modulus < 2^62`` with operands in ``[0, modulus)`` (``magnitudes``, upper bounds
    of ``max|x|`` and ``max|y|``, vouch for it, else it is checked), or no modulus and
    ``min(n1, n2) max|x| max|y| < 2^63`` (int64 out), or with ``wide`` any bound the NTT primes
    cover (Python ints out).

    Returns
    -------
    numpy.ndarray or None
        The full product or its first ``keep`` coefficients.
    """
    if x.ndim != 1 or y.ndim != 1 or x.dtype != np.int64 or y.dtype != np.int64:
        return None
    n1, n2 = x.shape[0], y.shape[0]
    if (n1 * n2 > SMALL_PRODUCT_WORK or not n1 or not n2
            or (keep is not None and not 0 < keep <= n1 + n2 - 1) or jit.state() != "compiled"):
        return None
    if magnitudes is None:
        lo_x, hi_x, lo_y, hi_y = int(x.min()), int(x.max()), int(y.min()), int(y.max())
        if modulus is not None and min(lo_x, lo_y) < 0:
            return None  # not residues
        magnitudes = (max(-lo_x, hi_x), max(-lo_y, hi_y))
    if modulus is not None:
        if modulus >= 2**62 or max(magnitudes) >= modulus:
            return None
        return multiply_rows_mod(x, y, modulus, keep)[0]
    bound = min(n1, n2) * magnitudes[0] * magnitudes[1]
    if bound < 2**63:
        return multiply_rows_exact(x, y, bound, keep, as_int64=True)[0]
    if wide and bound < 2**1500:
        return multiply_rows_exact(x, y, bound, keep, as_int64=False)[0]
    return None


@lru_cache(maxsize=256)
def _transform_constants(p: int, n: int) -> tuple:
    """Twiddle tables of ``p`` up to ``n`` points, ``-p^-1 mod 2^32`` and the scale factor
    ``f = 2^32 / n mod p`` with its Shoup quotient (one look-up per batch)."""
    tw, twq, itw, itwq, neg_inv = tables(p, n)
    f = (2**32 * pow(n, p - 2, p)) % p
    return tw, twq, itw, itwq, neg_inv, f, (f << 32) // p


def _stack(a: np.ndarray, b: np.ndarray, name: str = "rows") -> tuple[np.ndarray, np.ndarray]:
    """Two C-contiguous writable int64 stacks with the same number of rows (a single row is
    repeated)."""
    a = np.atleast_2d(a)
    b = np.atleast_2d(b)
    if a.ndim != 2 or b.ndim != 2:
        raise ValueError(f"{name}: expected 2-D stacks of rows, got shapes {a.shape}, {b.shape}")
    ra, rb = a.shape[0], b.shape[0]
    if ra != rb and 1 not in (ra, rb):
        raise ValueError(f"{name}: row counts {ra} and {rb} differ and neither is 1")
    rows = max(ra, rb)
    return _int64_rows(a, rows), _int64_rows(b, rows)


def _int64_rows(x: np.ndarray, rows: int) -> np.ndarray:
    if x.shape[0] != rows:
        x = np.broadcast_to(x, (rows, x.shape[1]))
    x = np.ascontiguousarray(x, dtype=np.int64)
    return x if x.flags.writeable else x.copy()


def _count(n1: int, n2: int, keep: int | None) -> int:
    return n1 + n2 - 1 if keep is None else max(0, min(keep, n1 + n2 - 1))


def _output(rows: int, count: int, what: str) -> np.ndarray:
    budget.check_allocation(8.0 * rows * count, what)
    return np.empty((rows, count), dtype=np.int64)


def _rows_mod_prime(a: np.ndarray, b: np.ndarray, p: int, out: np.ndarray) -> None:
    """``out[r] = (a[r] b[r] mod p)[:count]`` for int64 stacks ``a``, ``b`` (any values)."""
    k = _kernels()
    n1, n2 = a.shape[1], b.shape[1]
    if n1 * n2 <= SCHOOLBOOK_WORK:
        k.rows_schoolbook_mod(a, b, p, out)
        return
    n = transform_length(n1, n2)
    if n > max_length(p):
        raise ValueError(f"rows of lengths {n1} and {n2} need {n}-point transforms; modulo {p} "
                         f"at most {max_length(p)}")
    tw, twq, itw, itwq, neg_inv, f, fq = _transform_constants(p, n)
    k.rows_ntt_mod(a, b, p, tw, twq, itw, itwq, neg_inv, f, fq, n, out)


def multiply_rows_mod_prime(a_rows: np.ndarray, b_rows: np.ndarray, p: int,
                            keep: int | None = None) -> np.ndarray:
    """Row-wise products ``a_rows[r] * b_rows[r] mod p`` (or their first ``keep`` entries).

    Parameters
    ----------
    a_rows, b_rows : numpy.ndarray
        Integer stacks of shape ``(r, n1)`` and ``(r, n2)`` (a 1-D array or a single row is used
        for every row of the other); any int64 values (reduced inside).
    p : int
        An NTT prime of :data:`polyconv.engines.ntt_compiled.PRIMES`.
    keep : int, optional
        Number of leading coefficients to return (default: all ``n1 + n2 - 1``).

    Returns
    -------
    numpy.ndarray
        ``(r, count)`` int64 residues in ``[0, p)``.
    """
    if not is_ntt_prime(p):
        raise ValueError(f"p: expected an NTT prime of ntt_compiled.PRIMES, got {p}")
    a, b = _stack(a_rows, b_rows)
    out = _output(a.shape[0], _count(a.shape[1], b.shape[1], keep), "batched products mod p")
    _rows_mod_prime(a, b, p, out)
    return out


def _residue_stacks(x: np.ndarray, primes: tuple[int, ...]) -> np.ndarray | list:
    """Int64 stack ``x`` itself (reduced in the kernels), or for object stacks one
    ``(r, n)`` residue stack per prime."""
    if x.dtype != object:
        return x
    rows, n = x.shape
    flat = _intpack.values_to_rows(x.reshape(rows * n))
    if not (flat.flags.c_contiguous and flat.flags.writeable):
        flat = flat.copy()
    width = flat.shape[1]
    wrap = np.array([pow(2, 8 * width, p) for p in primes], dtype=np.int64)
    res = np.empty((len(primes), rows * n), dtype=np.int64)
    jit.kernels("_kernels_ntt").residues_from_rows(flat, np.array(primes, dtype=np.int64), wrap,
                                                   res)
    return [res[i].reshape(rows, n) for i in range(len(primes))]


def _object_stacks(a_rows: np.ndarray, b_rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Stacks as int64 when they fit, else as object arrays (same row count)."""
    out = []
    for x in (np.atleast_2d(a_rows), np.atleast_2d(b_rows)):
        if x.dtype.kind in "iub" and (x.dtype.kind != "u" or x.size == 0 or int(x.max()) < 2**63):
            out.append(x)
        else:
            out.append(np.asarray(x, dtype=object))
    a, b = out
    rows = max(a.shape[0], b.shape[0])
    if a.shape[0] != b.shape[0] and 1 not in (a.shape[0], b.shape[0]):
        raise ValueError(f"rows: row counts {a.shape[0]} and {b.shape[0]} differ and neither is 1")
    fix = [_int64_rows(x, rows) if x.dtype != object
           else np.ascontiguousarray(np.broadcast_to(x, (rows, x.shape[1]))) for x in (a, b)]
    return fix[0], fix[1]


def _residues_by_prime(a: np.ndarray, b: np.ndarray, primes: tuple[int, ...],
                       count: int) -> np.ndarray:
    """``(len(primes), r, count)`` residues of the row products modulo each prime."""
    ra = _residue_stacks(a, primes)
    rb = _residue_stacks(b, primes)
    res = np.empty((len(primes), a.shape[0], count), dtype=np.int64)
    for i, p in enumerate(primes):
        _rows_mod_prime(ra if isinstance(ra, np.ndarray) else ra[i],
                        rb if isinstance(rb, np.ndarray) else rb[i], p, res[i])
    return res


def multiply_rows_exact(a_rows: np.ndarray, b_rows: np.ndarray, bound: int,
                        keep: int | None = None, as_int64: bool | None = None) -> np.ndarray:
    """Exact row-wise integer products from an a-priori bound.

    Parameters
    ----------
    a_rows, b_rows : numpy.ndarray
        Integer stacks ``(r, n1)``, ``(r, n2)`` (int64, uint64 or object; one row broadcasts).
    bound : int
        A bound of ``sum_i |a[r, i]| |b[r, k - i]|`` for every row and ``k`` (both
        ``min(n1, n2) max|a| max|b|`` and ``||a||_2 ||b||_2`` are such bounds).
    keep : int, optional
        Number of leading coefficients per row.
    as_int64 : bool, optional
        int64 output; default when ``bound < 2^63``, else an object array of Python ints.

    Returns
    -------
    numpy.ndarray
        ``(r, count)`` products.
    """
    a, b = _object_stacks(a_rows, b_rows)
    rows, n1, n2 = a.shape[0], a.shape[1], b.shape[1]
    count = _count(n1, n2, keep)
    if as_int64 is None:
        as_int64 = bound < 2**63
    if (bound < 2**63 and n1 * n2 <= SCHOOLBOOK_WORK_WRAP and a.dtype != object
            and b.dtype != object):
        out = _output(rows, count, "batched exact products")
        _kernels().rows_schoolbook_wrap(a.view(np.uint64), b.view(np.uint64),
                                        out.view(np.uint64))
        return out if as_int64 else out.astype(object)
    if (bound < 2**127 and n1 * n2 <= SCHOOLBOOK_WORK_128 and a.dtype != object
            and b.dtype != object):
        return _rows_128(a, b, count, as_int64)
    if rows == 1 and a.dtype != object and b.dtype != object:  # one product: all primes in
        return convolve_exact(a[0], b[0], bound, keep, as_int64)[None]  # one kernel call
    primes = primes_for(bound, transform_length(n1, n2))
    budget.check_allocation(8.0 * (len(primes) + 1) * rows * count, "batched exact products")
    res = _residues_by_prime(a, b, primes, count)
    flat = recombine(res.reshape(len(primes), rows * count), primes, as_int64)
    return flat.reshape(rows, count)


def _rows_128(a: np.ndarray, b: np.ndarray, count: int, as_int64: bool) -> np.ndarray:
    """Exact int64 row products below ``2^127`` by 128-bit sums; Python ints from the two words
    (:func:`polyconv.engines._pyints.from_words128`)."""
    rows = a.shape[0]
    budget.check_allocation(16.0 * rows * count, "batched exact products")
    high = np.empty((rows, count), dtype=np.uint64)
    low = np.empty((rows, count), dtype=np.uint64)
    _kernels().rows_schoolbook_128(a, b, high, low)
    if as_int64:
        return low.view(np.int64)
    return _pyints.from_words128(high, low).reshape(rows, count)


def multiply_rows_mod(a_rows: np.ndarray, b_rows: np.ndarray, m: int,
                      keep: int | None = None) -> np.ndarray:
    """Row-wise products modulo any ``m >= 2`` of operands in ``[0, m)``.

    Modulo an NTT prime this is :func:`multiply_rows_mod_prime`; otherwise the exact
    non-negative products (primes with ``P > min(n1, n2) (m - 1)^2``) are reduced modulo ``m``
    inside Garner's recombination (``m < 2^62``) or afterwards.

    Returns
    -------
    numpy.ndarray
        ``(r, count)`` int64 for ``m <= 2^63``, else Python ints.
    """
    a, b = _object_stacks(a_rows, b_rows)
    n1, n2 = a.shape[1], b.shape[1]
    if is_ntt_prime(m) and transform_length(n1, n2) <= max_length(m):
        return multiply_rows_mod_prime(a, b, m, keep)
    rows, count = a.shape[0], _count(n1, n2, keep)
    if rows == 1 and a.dtype != object and b.dtype != object:
        return convolve_mod(a[0], b[0], m, keep)[None]
    bound = min(n1, n2) * (m - 1) ** 2
    primes = primes_for(bound, transform_length(n1, n2), signed=False)
    budget.check_allocation(8.0 * (len(primes) + 1) * rows * count, "batched products mod m")
    res = _residues_by_prime(a, b, primes, count).reshape(len(primes), rows * count)
    if m < KERNEL_MODULUS_LIMIT:
        arr, inv, invq = _garner_constants(primes)
        out = np.empty(rows * count, dtype=np.int64)
        jit.kernels("_kernels_ntt").garner_mod(res, arr, inv, invq, m, out)
        return out.reshape(rows, count)
    values = recombine(res, primes, as_int64=False)
    total = math.prod(primes)
    values = np.where(values < 0, values + total, values) % m
    values = values.astype(np.int64) if m <= 2**63 else values
    return values.reshape(rows, count)


def product_mod(factors: list[np.ndarray], m: int, keep: int | None = None) -> np.ndarray:
    """``prod_i factors[i] mod m`` (or its first ``keep`` coefficients) by balanced product
    trees, one batched call per tree level.

    Factors (1-D, non-empty, entries in ``[0, m)``; or one 2-D stack of equal-length factors)
    are grouped by length class (lengths in
    ``[2^j, 2^(j+1))``); each group is one zero-padded rectangular stack multiplied level by level
    (trailing zeros of a padded row give trailing zeros of its products), and the few group
    products are then multiplied shortest first (Huffman's order, which keeps the long products
    few).

    Returns
    -------
    numpy.ndarray
        The ``sum(len) - len(factors) + 1`` (or ``keep``) coefficients, int64 for ``m <= 2^63``.
    """
    if len(factors) == 0:
        raise ValueError("factors: expected at least one polynomial")
    dtype = np.int64 if m <= 2**63 else object
    if isinstance(factors, np.ndarray) and factors.ndim == 2 and dtype is not object:
        lengths = [factors.shape[1]]  # a stack of equal-length factors
        total = factors.shape[0] * (factors.shape[1] - 1) + 1
    else:
        lengths = [f.shape[0] for f in factors]
        total = sum(lengths) - len(factors) + 1
    final = total if keep is None else min(keep, total)
    if min(lengths) == max(lengths) and dtype is not object:  # one class, no padding
        budget.check_allocation(8.0 * total, "the factors of a product")
        parts = [_tree_mod(np.asarray(factors, dtype=np.int64), m, keep, total)]
    else:
        groups: dict[int, list[np.ndarray]] = {}
        for f, n in zip(factors, lengths, strict=True):
            groups.setdefault(n.bit_length(), []).append(f)
        parts = [_tree_mod(_padded(g, dtype), m, keep, sum(f.shape[0] for f in g) - len(g) + 1)
                 for g in groups.values()]
    while len(parts) > 1:
        parts.sort(key=len)
        x, y = parts.pop(0), parts.pop(0)
        parts.append(multiply_rows_mod(x, y, m, keep)[0])
    out = parts[0][:final]
    if out.shape[0] < final:
        out = np.concatenate([out, np.zeros(final - out.shape[0], dtype=out.dtype)])
    return out


def _tree_mod(level: np.ndarray, m: int, keep: int | None, length: int) -> np.ndarray:
    """The product of the rows of a zero-padded stack, level by level; its first ``length``
    (true length, or ``keep``) coefficients."""
    while level.shape[0] > 1:
        pairs = level.shape[0] // 2
        products = multiply_rows_mod(level[0:2 * pairs:2], level[1:2 * pairs:2], m, keep)
        if level.shape[0] % 2:
            carry = np.zeros((1, products.shape[1]), dtype=products.dtype)
            tail = level[-1, :products.shape[1]]
            carry[0, :tail.shape[0]] = tail
            products = np.concatenate([products, carry])
        level = products
    return level[0, :length if keep is None else min(length, keep)]


def _padded(factors: list[np.ndarray], dtype) -> np.ndarray:
    """One zero-padded stack of the factors."""
    width = max(f.shape[0] for f in factors)
    budget.check_allocation(8.0 * len(factors) * width, "the factors of a product")
    stack = np.zeros((len(factors), width), dtype=dtype)
    for i, f in enumerate(factors):
        stack[i, :f.shape[0]] = f
    return stack
