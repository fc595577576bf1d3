"""Facts about integer operands: normalised dtypes, magnitudes and norm bounds.

The exact engines work on 1-D rows of int64, uint64 or Python-int (object) arrays;
:func:`normalise_integers` brings user integers to those dtypes and reduces them by the modulus,
and :func:`integer_facts` computes what the exact chooser needs (:class:`IntegerFacts`): lengths,
largest magnitudes and upper bounds of Euclidean norms
(:func:`polyconv.numerics.bounds.norm2_upper`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..engines import jit_state
from ..engines.exact_fft import centered_residues
from ..engines.kronecker import reduce_operand
from ..numerics import bounds
from ..numerics.limits import FLOAT_EXACT_LIMIT, INT64_LIMIT, max_abs


@dataclass(frozen=True, slots=True)
class IntegerFacts:
    """What the exact chooser needs to know about two integer operands.

    Attributes
    ----------
    n1, n2 : int
        Lengths along the convolution axis (after truncation).
    max_a, max_b : int
        Largest magnitudes (after reduction when a modulus is given).
    norm_a, norm_b : float
        Upper bounds of the largest row's Euclidean norm (``inf`` when not computed).
    modulus : int or None
        The modulus, if any.
    centred_norm_a, centred_norm_b : float
        With a modulus: upper bounds of the largest row's Euclidean norm once the residues are
        centred to ``(-m/2, m/2]`` (what the limb engine splits); ``inf`` when not computed.
    """

    n1: int
    n2: int
    max_a: int
    max_b: int
    norm_a: float
    norm_b: float
    modulus: int | None
    centred_norm_a: float = math.inf
    centred_norm_b: float = math.inf

    @property
    def bound(self) -> int:
        """``min(n1, n2) max|a| max|b|``: no output coefficient is larger in magnitude."""
        return min(self.n1, self.n2) * self.max_a * self.max_b


#: Below this many multiply-adds direct int64 summation (a few microseconds) beats any transform,
#: so the norms that a float-FFT certificate needs are not computed (measured here: the rounded
#: FFT costs at least ~15 us).
NORM_MIN_WORK = 2**14
#: Centred norms are computed for moduli below this (two limbs of at most 16 bits split them)
#: and products of this many terms: below 2^26 two limbs are certified without them (up to
#: n1 n2 = 2^28 in fact), beyond 2^31 two limbs fail even with a zero top limb, so the O(n)
#: passes would be wasted (0.9 ms at n = 2^16, 7.6 ms at 2^18, measured).
CENTRED_NORM_MODULUS_LIMIT = 2**31
CENTRED_NORM_MIN_WORK = 2**26
CENTRED_NORM_MAX_WORK = 2**31


def normalise_integers(x: np.ndarray, modulus: int | None) -> tuple[np.ndarray, int]:
    """int64 / uint64 / object arrays the engines accept, reduced to ``[0, m)`` with a modulus,
    and the largest magnitude (known once the extremes are: one pass serves both)."""
    kind = x.dtype.kind
    if kind == "b" or (kind in "iu" and x.dtype.itemsize < 8) or kind == "i":
        x = x.astype(np.int64, copy=False)
    elif kind == "O":
        x, lo, hi = _objects_as_ints(x)
    if x.size == 0:
        return x, 0
    if kind != "O":  # (object arrays: their extremes are known)
        lo, hi = int(x.min()), int(x.max())
    if modulus is None or (lo >= 0 and hi < modulus):  # nothing to reduce
        return x, max(-lo, hi)
    x = reduce_operand(x, modulus) if x.ndim == 1 else np.stack(
        [reduce_operand(row, modulus) for row in x.reshape(-1, x.shape[-1])]).reshape(x.shape)
    if x.dtype == object and modulus <= INT64_LIMIT:
        x = x.astype(np.int64)
    return x, modulus - 1


def _objects_as_ints(x: np.ndarray) -> tuple[np.ndarray, int, int]:
    """Object arrays of Python ints or gmpy2.mpz: int64 when every entry fits, else Python ints;
    and the smallest and largest entry (Python ints; 0 for an empty array)."""
    values = x.ravel().tolist()
    hi = int(max(values)) if values else 0
    lo = int(min(values)) if values else 0
    if -INT64_LIMIT <= lo and hi < INT64_LIMIT:
        return x.astype(np.int64), lo, hi
    if set(map(type, values)) == {int}:  # already Python ints (one C-level pass)
        return x, lo, hi
    out = np.empty(x.shape, dtype=object)
    out.ravel()[:] = [int(v) for v in values]
    return out, lo, hi


def integer_facts(x: np.ndarray, y: np.ndarray, modulus: int | None,
                  max_x: int | None = None, max_y: int | None = None) -> IntegerFacts:
    """Lengths, magnitudes and (when a float product could be exact) norm bounds.

    Magnitudes are rounded up to ``2^bits - 1`` and norms up to a sixteenth of an octave: every
    decision taken from them stays conservative, and operands of similar size share one cached
    plan instead of re-planning per call.
    """
    max_a = _round_magnitude(max_abs(x) if max_x is None else max_x)
    max_b = _round_magnitude(max_abs(y) if max_y is None else max_y)
    n1, n2 = x.shape[-1], y.shape[-1]
    norm_a = norm_b = math.inf
    if (n1 * n2 >= NORM_MIN_WORK and min(n1, n2) * max_a * max_b < FLOAT_EXACT_LIMIT
            and max(max_a, max_b) < FLOAT_EXACT_LIMIT):  # (a zero operand keeps the
        # product small, but the other one must still be exact in float64)
        # ||x||_2 <= max|x| sqrt(n): when that already certifies the full-length product, the
        # O(n) norm passes are not needed
        norm_a, norm_b = _crude_norm(max_a, n1), _crude_norm(max_b, n2)
        n_fft = 1 << (n1 + n2 - 2).bit_length()
        if bounds.fft_error_bound(norm_a, norm_b, n_fft) >= 0.5:
            norm_a = _round_norm(_largest_row_norm(x))
            norm_b = _round_norm(_largest_row_norm(y))
    centred_a = centred_b = math.inf
    if (modulus is not None and modulus < CENTRED_NORM_MODULUS_LIMIT
            and CENTRED_NORM_MIN_WORK <= n1 * n2 <= CENTRED_NORM_MAX_WORK
            and x.dtype == np.int64 and y.dtype == np.int64):
        # the limb engine splits centred residues; their norms can save a limb (bounds.limb_norms)
        centred_a = _round_norm(_largest_row_norm(centered_residues(x, modulus)))
        centred_b = _round_norm(_largest_row_norm(centered_residues(y, modulus)))
    return IntegerFacts(n1, n2, max_a, max_b, norm_a, norm_b, modulus, centred_a, centred_b)


def bound_facts(n1: int, n2: int, max_a: int, max_b: int,
                modulus: int | None) -> IntegerFacts:
    """Facts that hold for *every* pair of operands of lengths ``n1``, ``n2`` whose magnitudes
    are at most ``max_a`` and ``max_b``: a plan chosen from them is valid (its certificate
    holds) for each such pair, so block products share one plan per block shape.

    As :func:`integer_facts`, but the norms are only the bounds ``||x||_2 <= max|x| sqrt(n)``
    (Cauchy-Schwarz; common practice, no source), never an operand's own norm, and the centred
    norms are not computed (``inf``: the limb engine then assumes the worst).
    """
    max_a, max_b = _round_magnitude(max_a), _round_magnitude(max_b)
    norm_a = norm_b = math.inf
    if (n1 * n2 >= NORM_MIN_WORK and min(n1, n2) * max_a * max_b < FLOAT_EXACT_LIMIT
            and max(max_a, max_b) < FLOAT_EXACT_LIMIT):  # the conditions of integer_facts
        norm_a, norm_b = _crude_norm(max_a, n1), _crude_norm(max_b, n2)
    return IntegerFacts(n1, n2, max_a, max_b, norm_a, norm_b, modulus)


def _crude_norm(max_abs: int, n: int) -> float:
    """An upper bound of ``||x||_2`` from ``max|x| sqrt(n)``, rounded up like the real norms."""
    return _round_norm(math.nextafter(float(max_abs) * math.sqrt(n) * (1 + 2**-50), math.inf))


def _round_magnitude(value: int) -> int:
    return (1 << value.bit_length()) - 1


def _round_norm(norm: float) -> float:
    """The smallest ``2^(j/16) >= norm`` (0 stays 0)."""
    if norm <= 0.0:
        return 0.0
    j = math.ceil(math.log2(norm) * 16)
    value = 2.0 ** (j / 16)
    return value if value >= norm else 2.0 ** ((j + 1) / 16)


def _largest_row_norm(x: np.ndarray) -> float:
    if x.ndim == 1:
        return _norm2_upper(x)
    return max(_norm2_upper(row) for row in x.reshape(-1, x.shape[-1]))


_kernels = None  # the short-product kernel module, once loaded in this process


def _norm2_upper(x: np.ndarray) -> float:
    """:func:`polyconv.numerics.bounds.norm2_upper` of a 1-D array, the same float: for int64
    entries below ``2^26`` whose squares sum below ``2^53`` the float64 sum of the squares is
    exact whatever its order (every partial sum is an integer under ``2^53``), so the exact sum
    from one compiled pass (``square_sum``: 0.2 ms at ``n = 2^18`` against 0.6 ms) gives it."""
    global _kernels
    if x.dtype == np.int64 and (_kernels is not None or jit_state.state() == "compiled"):
        _kernels = _kernels or jit_state.kernels("_kernels_small")
        total = _kernels.square_sum(x)
        if total > 0:
            n = x.shape[0]
            gamma = (n + 2) * 2.0**-53 / (1 - (n + 2) * 2.0**-53)  # as norm2_upper
            return math.nextafter(math.sqrt(float(total) * (1 + 3 * gamma)), math.inf)
        if total == 0:
            return 0.0
    return bounds.norm2_upper(x)
