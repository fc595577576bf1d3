"""Exact integer convolution by Kronecker substitution: GMP products of packed coefficients.

Kronecker substitution (L. Kronecker, 1882; see von zur Gathen & Gerhard, *Modern Computer
Algebra*, section 8.4): the product polynomial ``c = a * b`` satisfies ``c(2^s) = a(2^s) b(2^s)``,
and when every ``|c_k| < 2^(s-1)`` the coefficients are the signed base-``2^s`` digits of that
integer.  Evaluating at ``2^s`` is writing the coefficients into ``s``-bit slots of one integer, so
the whole convolution is one big-integer product, which gmpy2 hands to GMP (FFT multiplication at
these sizes; CPython ints only have Karatsuba).

Slot width (DESIGN.md section 5): ``|c_k| <= min(n1, n2) max|a| max|b| = B``, so ``s =
bits(B) + 1`` suffices (never more than ``bits(max|a|) + bits(max|b|) + bits(min(n1, n2)) + 1``),
rounded up to whole bytes so that packing and unpacking are byte copies through numpy views.

Two-point variant (D. Harvey, "Faster polynomial multiplication via multipoint Kronecker
substitution", J. Symbolic Comput. 44 (2009), the "KS2" scheme): evaluating at ``2^b`` and
``-2^b`` with ``2b >= s`` gives ``c(2^b) + c(-2^b) = 2 sum c_(2j) 2^(2bj)`` and
``c(2^b) - c(-2^b) = 2^(b+1) sum c_(2j+1) 2^(2bj)``: two products of half the size instead of one.
GMP's cost per bit grows with the size (measured here: 2.7 ns/bit at 1 Mbit, 4.5 ns/bit at 8 Mbit),
so two half-size products are about 1.25x faster for large operands.  They are independent, so
with two threads allowed they run concurrently (:mod:`polyconv.engines._threads`; gmpy2 releases
the GIL inside GMP), which makes the scheme pay from half the size.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import gmpy2
import numpy as np

from ..numerics.limits import magnitude_fits_int64, max_abs, residues_fit_int64
from . import _intpack
from ._common import INTEGER_KINDS, Engine, Job, Option, gmp_rate
from ._threads import gmp_products

#: Packed size (bits per operand) from which the two-point scheme pays, with its two products in
#: sequence and with them on two threads (measured on the development machine: at 2^17 bits two
#: threads are 1.03-1.25x faster than one product, one thread is not).
TWO_POINT_MIN_BITS = 1 << 18
TWO_POINT_MIN_BITS_THREADED = 1 << 17


def uses_two_point(width: int, n1: int, n2: int, threads: int) -> bool:
    """Whether the default chooses the two-point scheme for ``width``-byte slots."""
    limit = TWO_POINT_MIN_BITS_THREADED if threads >= 2 else TWO_POINT_MIN_BITS
    return 8 * width * max(n1, n2) // 2 >= limit


def slot_width(bound: int) -> int:
    """Bytes per slot holding any signed value of absolute value at most ``bound``."""
    return max(1, -(-(bound.bit_length() + 1) // 8))


def slot_bound(a: np.ndarray, b: np.ndarray) -> int:
    """What a slot must hold: the product bound, and the operands themselves plus a borrow."""
    max_a, max_b = max_abs(a), max_abs(b)
    return max(min(a.shape[0], b.shape[0]) * max_a * max_b, max_a, max_b) + 1


def _leading(a: np.ndarray, b: np.ndarray, keep: int | None):
    """Operands cut to what the first ``keep`` coefficients read, and how many are computed."""
    if keep is not None:
        a, b = a[:keep], b[:keep]
    count = a.shape[0] + b.shape[0] - 1
    return a, b, count if keep is None else min(count, keep)


def convolve_kronecker(a: np.ndarray, b: np.ndarray, keep: int | None = None, *,
                       as_int64: bool = False, two_point: bool | None = None,
                       threads: int = 1) -> np.ndarray:
    """Exact full product of two integer sequences (first ``keep`` coefficients if given).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, dtype int64, uint64 or object (Python ints or gmpy2.mpz), any signs and
        sizes.
    keep : int, optional
        Return only ``c[:keep]`` (``1 <= keep``); operands are cut to ``keep`` first.
    as_int64 : bool
        The caller has proven ``|c_k| < 2^63`` for every k: return int64 straight from the byte
        view, without creating Python ints.
    two_point : bool, optional
        Force (True) or forbid (False) the two-point scheme; default: used when a packed operand
        would exceed :data:`TWO_POINT_MIN_BITS` bits (:func:`uses_two_point`).
    threads : int
        With two or more, the two-point scheme's two products run concurrently
        (:func:`polyconv.engines._threads.gmp_products`).

    Returns
    -------
    numpy.ndarray
        Length ``min(keep, n1 + n2 - 1)``: object array of Python ints, or int64 if ``as_int64``.
    """
    square = b is a
    a, b, count = _leading(a, b, keep)
    width = slot_width(slot_bound(a, b))
    out = _substituted(a, b, width, count, threads, two_point, square, _intpack.pack,
                       _intpack.unpack_signed)
    return _as_requested(out, as_int64)


def _as_requested(out: np.ndarray, as_int64: bool) -> np.ndarray:
    if as_int64:
        return out if out.dtype == np.int64 else out.astype(np.int64)
    return out if out.dtype == object else out.astype(object)


def _substituted(a: np.ndarray, b: np.ndarray, width: int, count: int, threads: int,
                 two_point: bool | None, square: bool, pack: Callable,
                 unpack: Callable) -> np.ndarray:
    """The product by substitution at ``2^(8 width)`` (one big product) or at ``+-2^h``
    (:func:`_two_point`; ``two_point=None``: :func:`uses_two_point` decides), with the slot
    writer ``pack`` and reader ``unpack`` of the operands' representation."""
    if two_point is None:
        two_point = uses_two_point(width, a.shape[0], b.shape[0], threads)
    if two_point and count >= 2:
        return _two_point(a, b, width, count, threads, pack, unpack, square)
    packed = pack(a, width)
    z = gmpy2.square(packed) if square else packed * pack(b, width)
    return unpack(z, width, count)


def _two_point(a: np.ndarray, b: np.ndarray, width: int, count: int, threads: int,
               pack: Callable, unpack: Callable, square: bool = False) -> np.ndarray:
    """KS2: products at ``2^h`` and ``-2^h`` with ``h = 4 width`` bits (half a slot).

    ``pack(x, width)`` writes a sequence into full slots (so the even and odd parts give
    ``x(2^h)`` and ``x(-2^h)``), ``unpack(z, width, count)`` reads the slots of the recovered
    even and odd coefficient sequences; the two are interleaved along the first axis.
    """
    half = 4 * width

    def plus_minus(x: np.ndarray) -> tuple[gmpy2.mpz, gmpy2.mpz]:
        even = pack(x[0::2], width)
        odd = pack(x[1::2], width) << half
        return even + odd, even - odd

    a_plus, a_minus = plus_minus(a)
    b_plus, b_minus = (a_plus, a_minus) if square else plus_minus(b)
    h_plus, h_minus = gmp_products([(a_plus, b_plus), (a_minus, b_minus)], threads)
    n_even = (count + 1) // 2
    out_even = unpack((h_plus + h_minus) >> 1, width, n_even)
    out_odd = unpack((h_plus - h_minus) >> (half + 1), width, count - n_even)
    out = np.empty((count,) + out_even.shape[1:], dtype=np.result_type(out_even, out_odd))
    out[0::2] = out_even
    out[1::2] = out_odd
    return out


def multiply_rows(a: np.ndarray, b: np.ndarray, keep: int | None = None, *,
                  two_point: bool | None = None, bits: tuple[int, int] | None = None,
                  threads: int = 1) -> np.ndarray:
    """Exact product of two byte-row vectors, returned as byte rows (first ``keep`` if given).

    The Kronecker product of :func:`convolve_kronecker` with operands and result in the byte-row
    form of :func:`polyconv.engines._intpack.values_to_rows`: packing and unpacking are byte
    copies and a few linear big-integer operations, and no Python int is created per
    coefficient.  Meant for chains of products whose coefficients outgrow int64 (product trees,
    powers), which convert to Python ints once at the end.

    Parameters
    ----------
    a, b : numpy.ndarray
        ``(n1, w1)`` and ``(n2, w2)`` uint8 byte rows, ``n1, n2 >= 1``.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    two_point : bool, optional
        As for :func:`convolve_kronecker`.
    bits : (int, int), optional
        :func:`polyconv.engines._intpack.row_bits` of ``a`` and ``b``, if the caller has them.
    threads : int
        As for :func:`convolve_kronecker`.  ``b is a`` (a square) packs once and squares.

    Returns
    -------
    numpy.ndarray
        ``(min(keep, n1 + n2 - 1), w)`` uint8 byte rows, trimmed to the narrowest width.
    """
    square = b is a
    a, b, count = _leading(a, b, keep)
    bits_a, bits_b = bits if bits is not None else (_intpack.row_bits(a), _intpack.row_bits(b))
    bound = min(a.shape[0], b.shape[0]) << (bits_a + bits_b)
    width = max(slot_width(bound), a.shape[1], b.shape[1])
    out = _substituted(a, b, width, count, threads, two_point, square, _intpack.pack_rows,
                       _intpack.unpack_rows)
    return _intpack.trim_rows(out)


def reduce_operand(x: np.ndarray, modulus: int) -> np.ndarray:
    """``x mod modulus`` in ``[0, modulus)``: int64/uint64 when they hold it, else objects."""
    if x.dtype.kind == "i" and magnitude_fits_int64(modulus):
        return np.mod(x, np.int64(modulus))
    if x.dtype.kind == "u" and modulus <= 2**64:
        return x if modulus == 2**64 else np.mod(x, np.uint64(modulus))
    return _mod_objects(x, modulus)


def _mod_objects(x: np.ndarray, modulus: int) -> np.ndarray:
    return np.mod(_intpack.to_objects(x), modulus)


def convolve_kronecker_mod(a: np.ndarray, b: np.ndarray, modulus: int,
                           keep: int | None = None, *, two_point: bool | None = None,
                           threads: int = 1) -> np.ndarray:
    """Exact product modulo any ``modulus >= 2`` (first ``keep`` coefficients if given).

    Operands are reduced to ``[0, m)``, multiplied exactly by Kronecker substitution
    (``0 <= c_k <= min(n1, n2) (m-1)^2``, no borrows), and each slot is reduced: for ``m = 2^e <=
    2^64`` by keeping its low ``e`` bits, for ``m < 2^32``
    vectorised on 64-bit words (:func:`polyconv.engines._intpack.reduce_words`), for
    odd ``m < 2^62`` by Montgomery arithmetic on uint64
    (:func:`polyconv.engines._intpack.reduce_words_wide`), otherwise on Python ints.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, int64, uint64 or object arrays of integers (any signs).
    modulus : int
        Any integer ``>= 2`` (far above ``2^64`` allowed).
    keep : int, optional
        Return only the first ``keep`` coefficients.
    two_point, threads
        As for :func:`convolve_kronecker`.

    Returns
    -------
    numpy.ndarray
        Values in ``[0, modulus)``: int64 when ``modulus <= 2^63``, else an object array.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    count = a.shape[0] + b.shape[0] - 1
    if keep is not None:
        count = min(count, keep)
    a, b = reduce_operand(a, modulus), reduce_operand(b, modulus)
    width = slot_width(slot_bound(a, b))
    if two_point is None:
        two_point = uses_two_point(width, a.shape[0], b.shape[0], threads)
    if two_point and count >= 2:
        # the c_k are >= 0, so the slots of the even and odd parts are read as they are
        rows = _two_point(a, b, width, count, threads, _intpack.pack, _intpack.slot_rows)
    else:
        z = _intpack.pack(a, width) * _intpack.pack(b, width)
        rows = _intpack.slot_rows(z, width, count)
    if modulus & (modulus - 1) == 0 and modulus <= 2**64:  # 2^e: the low e bits of each slot
        words = _intpack.words_from_rows(rows[:, :8])[:, 0]
        low = words & np.uint64(modulus - 1)
        return low.astype(np.int64 if residues_fit_int64(modulus) else object)
    if modulus < 2**32:
        return _intpack.reduce_words(_intpack.words_from_rows(rows), modulus).astype(np.int64)
    if modulus < _intpack.WIDE_MODULUS_LIMIT and modulus % 2 == 1:
        words = _intpack.words_from_rows(rows)
        return _intpack.reduce_words_wide(words, modulus).astype(np.int64)
    out = np.mod(_intpack.rows_to_ints(rows, signed=False).astype(object), modulus)
    return out.astype(np.int64) if residues_fit_int64(modulus) else out


# ----------------------------------------------------------------------------- registry record


#: GMP time of the two-point scheme's two products run concurrently, over the same products in
#: sequence (measured on the development machine: 0.46-0.51 for the products alone, 0.68-0.73 for
#: whole 62-bit modular products at n = 2^16..2^20, where packing and reduction stay serial).
CONCURRENT_PRODUCTS_FACTOR = 0.55
#: Seconds to hand one product to the helper thread and collect it (measured: 52-57 us).
CONCURRENT_HANDOFF = 6e-5


def kronecker_thread_count(n1: int, n2: int, slot_bits: int, threads: int) -> int:
    """2 when two threads are allowed and the two-point scheme applies with them
    (:func:`uses_two_point`), else 1."""
    return 2 if threads >= 2 and uses_two_point(slot_bits // 8, n1, n2, 2) else 1


def kronecker_seconds(c: dict, n1: int, n2: int, slot_bits: int, int64_out: bool,
                      threads: int = 1) -> float:
    """GMP product of the packed operands plus packing and unpacking.

    An ``n_min x n_max`` product of packed integers is modelled as ``n_max / n_min`` balanced
    products of ``n_min * slot_bits``-bit integers, each costing ``r(lg b) b lg b`` with ``r``
    measured per size (GMP switches algorithms as sizes grow); with two threads the two-point
    scheme's products overlap (:data:`CONCURRENT_PRODUCTS_FACTOR`, plus
    :data:`CONCURRENT_HANDOFF`).
    """
    small, large = min(n1, n2), max(n1, n2)
    bits = max(64, small * slot_bits)
    mul = gmp_rate(c, bits) * bits * math.log2(bits) * (large / small)
    if threads >= 2:
        mul = mul * CONCURRENT_PRODUCTS_FACTOR + CONCURRENT_HANDOFF
    moved = (n1 + n2 + n1 + n2 - 1) * slot_bits / 8
    out = 0.0 if int64_out else c["per_object_out"] * (n1 + n2 - 1)
    return mul + c["per_byte"] * moved + out


def option(job: Job) -> Option:
    """Kronecker substitution through GMP: always possible, exact by construction."""
    c = job.costs["exact"]["kronecker"]
    bits = job.slot_bits
    threads = kronecker_thread_count(job.n1, job.n2, bits, job.threads)
    seconds = c["overhead"] + job.rows * kronecker_seconds(
        c, job.n1, job.n2, bits, job.fits_int64 or job.modulus is not None, threads)
    note = (f"one GMP product with {bits}-bit slots" if threads == 1
            else f"two half-size GMP products on two threads, {bits}-bit slots")
    return Option(seconds, "construction", note, {"threads": threads})


def run_planned(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    """The plan's product of two rows (reduced by the modulus); one thread as a fallback."""
    threads = plan.threads if plan.engine == "kronecker" else 1
    if plan.modulus is not None:
        return convolve_kronecker_mod(a, b, plan.modulus, keep, threads=threads)
    return convolve_kronecker(a, b, keep, as_int64=plan.setting("product_int64", False),
                              threads=threads)


ENGINE = Engine("kronecker", INTEGER_KINDS, option, run_planned, exact=True,
                reduces_modulus=True, check_fallback=True)
