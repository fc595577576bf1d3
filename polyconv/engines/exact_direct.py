"""Exact schoolbook convolution of integers.

``c[k] = sum_i a[i] b[k - i]`` in exact integer arithmetic: float64 when the a-priori bound
``|c[k]| <= min(n1, n2) max|a| max|b|`` is below ``2**53`` (every partial sum is then an integer
float64 holds exactly), numpy int64 below ``2**63`` (no partial sum can overflow), Python
integers otherwise.  O(n1 n2): the right choice only for short operands.
"""

from __future__ import annotations

import numpy as np

from ..numerics.limits import FLOAT_EXACT_LIMIT, INT64_LIMIT, max_abs
from . import _intpack
from ._common import INTEGER_KINDS, Engine, Job, Option


def _convolve_float(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``numpy.convolve`` in float64 (its dot-product loop is 2-4x faster than int64's at lengths
    of 128-512, measured), returned as int64; exact when every partial sum is below 2^53."""
    return np.convolve(a.astype(np.float64), b.astype(np.float64)).astype(np.int64)


def convolve_exact_direct(a: np.ndarray, b: np.ndarray, keep: int | None = None) -> np.ndarray:
    """Exact full product of two 1-D integer rows (first ``keep`` entries if given).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D int64, uint64 or object (Python ints, gmpy2.mpz) arrays.
    keep : int, optional
        Return only the first ``keep`` coefficients.

    Returns
    -------
    numpy.ndarray
        int64 when the bound proves the product fits, else an object array of Python ints.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    max_a, max_b = max_abs(a), max_abs(b)
    bound = min(a.shape[0], b.shape[0]) * max_a * max_b
    if bound < FLOAT_EXACT_LIMIT and max(max_a, max_b) < FLOAT_EXACT_LIMIT:
        # every operand and partial sum is an integer below 2^53: float64 is exact (the operand
        # check matters when one side is all zero and the other huge)
        out = _convolve_float(a, b)
    elif bound < INT64_LIMIT and max(max_a, max_b) < INT64_LIMIT:
        out = np.convolve(a.astype(np.int64), b.astype(np.int64))
    else:
        out = np.convolve(_intpack.to_objects(a), _intpack.to_objects(b))
    return out if keep is None else out[:keep]


SMALL_MODULUS_LIMIT = 2**31
_LOW16 = np.int64(0xFFFF)
_LOW15 = np.int64(0x7FFF)


def one_split_fits(terms: int, modulus: int) -> bool:
    """Whether sums of ``terms`` products of a 16-bit half by a residue mod ``m`` are exact in
    float64 (below ``2^53``)."""
    return terms * (modulus << 16) < FLOAT_EXACT_LIMIT


def convolve_exact_direct_mod(a: np.ndarray, b: np.ndarray, modulus: int,
                              keep: int | None = None) -> np.ndarray:
    """Schoolbook product modulo ``m < 2^31``, splitting residues into halves.

    One operand split: with ``a = a0 + 2^15 a1`` (``a0 < 2^15``, ``a1 < 2^16``), the convolutions
    ``a0 * b`` and ``a1 * b`` have terms below ``2^47`` and are exact in float64 while ``min(n1,
    n2) 2^16 m < 2^53`` (:func:`one_split_fits`); then ``c = a0 b + 2^15 ((a1 b) mod m)`` is
    formed in int64.  Longer operands split both into 16-bit halves (Karatsuba & Ofman 1962,
    applied to the coefficients): ``c00 = a0 * b0``, ``c11 = a1 * b1`` and ``(a0 + a1) * (b0 +
    b1) - c00 - c11``, with terms below ``2^34``: exact in float64 for lengths below ``2^19``,
    in int64 beyond.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D int64 residues in ``[0, m)``.
    modulus : int
        ``2 <= m < 2^31``.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    m = np.int64(modulus)
    terms = min(a.shape[0], b.shape[0])
    if one_split_fits(terms, modulus):
        out = np.mod(_convolve_float(a >> 15, b), m)
        out <<= 15
        out += _convolve_float(a & _LOW15, b)
        out = np.mod(out, m)
        return out if keep is None else out[:keep]
    convolve = _convolve_float if terms << 34 < FLOAT_EXACT_LIMIT else np.convolve
    a0, a1 = a & _LOW16, a >> 16
    b0, b1 = b & _LOW16, b >> 16
    low = convolve(a0, b0)
    high = convolve(a1, b1)
    middle = convolve(a0 + a1, b0 + b1) - low - high
    # low < n 2^32, (middle mod m) 2^16 < 2^47, (high mod m)(2^32 mod m) < 2^62: the sum stays
    # below 2^63 for n < 2^29, so one final reduction suffices
    out = low + np.mod(middle, m) * np.int64(1 << 16)
    out += np.mod(high, m) * np.int64(pow(2, 32, modulus))
    out = np.mod(out, m)
    return out if keep is None else out[:keep]


# ----------------------------------------------------------------------------- registry record
#
# Cost per row ``t = c0 + c_mac n1 n2`` with the constants of the arithmetic the sums need
# (float64 below 2^53, int64 below 2^63, two or three half-word passes for a modulus below 2^31,
# Python ints otherwise: times ``1 + words / 4`` for ``words`` 64-bit words per coefficient).


def object_mac_factor(words: int) -> float:
    """Relative cost of one multiply-add of Python ints whose products take ``words`` 64-bit
    words, against a one-word one: ``1 + words / 4`` of Python-object work and the additions,
    plus ``words^2 / 80`` for the schoolbook limb products of GMP/CPython below their
    Karatsuba thresholds (quadratic in the operands' ``words / 2`` limbs; measured 2026-12-03:
    per multiply-add 70, 141, 402, 966, 3741, 11675 ns at 70, 256, 512, 1000, 2000, 4000 bits)."""
    return 1 + words / 4 + words * words / 80


def option(job: Job) -> Option:
    """The exact schoolbook offer: always possible, exact by construction."""
    c = job.costs["exact"]
    n1, n2, rows, m = job.n1, job.n2, job.rows, job.modulus
    direct_float = c.get("direct_float", c["direct_int64"])
    if m is not None and m < SMALL_MODULUS_LIMIT and not job.fits_int64:
        halves = 2 if one_split_fits(min(n1, n2), m) else 3
        k = direct_float if min(n1, n2) << 34 < FLOAT_EXACT_LIMIT else c["direct_int64"]
        seconds = halves * (k["overhead"] + k["per_mac"] * n1 * n2 * rows)
    elif job.fits_int64:
        k = direct_float if job.bound < FLOAT_EXACT_LIMIT else c["direct_int64"]
        seconds = k["overhead"] + k["per_mac"] * n1 * n2 * rows
    else:
        words = -(-job.slot_bits // 64)
        k = c["direct_object"]
        seconds = k["overhead"] + k["per_mac"] * n1 * n2 * rows * object_mac_factor(words)
    return Option(seconds, "construction", "exact schoolbook sums")


def run_planned(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    """The plan's product of two rows (reduced for a modulus below 2^31)."""
    m = plan.modulus
    if m is not None and m < SMALL_MODULUS_LIMIT:
        return convolve_exact_direct_mod(a.astype(np.int64), b.astype(np.int64), m, keep)
    return convolve_exact_direct(a, b, keep)


ENGINE = Engine("direct-exact", INTEGER_KINDS, option, run_planned, exact=True,
                check_fallback=True)
