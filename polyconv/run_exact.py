"""Running an exact plan: normalise integer operands, run the planned engine row by row, check.

The exact engines work on 1-D rows of int64, uint64 or Python-int (object) arrays; this module
brings user integers to those dtypes, reduces them by the modulus, computes what the chooser needs
to know (:func:`integer_facts`), runs the plan's engine on every row of a batch, performs the
random-evaluation check a ``"check"`` certificate calls for (recomputing with the plan's fallback
engine when it fails), and returns int64 or Python ints as the plan says.
"""

from __future__ import annotations

import math

import numpy as np

from . import bounds
from .engines.exact_direct import (
    SMALL_MODULUS_LIMIT,
    convolve_exact_direct,
    convolve_exact_direct_mod,
)
from .engines.exact_fft import (
    centered_residues,
    convolve_limbs,
    convolve_limbs_mod,
    convolve_rounded,
)
from .engines.kronecker import convolve_kronecker, convolve_kronecker_mod, reduce_operand
from .engines.ntt import convolve_ntt_mod_prime
from .engines.ntt_compiled import run_planned as run_ntt_compiled
from .planning import Plan
from .planning_exact import FLOAT_EXACT_LIMIT, INT64_LIMIT, IntegerFacts

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
        x = _objects_as_ints(x)
    if x.size == 0:
        return x, 0
    lo, hi = int(x.min()), int(x.max())
    if modulus is None or (lo >= 0 and hi < modulus):  # nothing to reduce
        return x, max(-lo, hi)
    x = reduce_operand(x, modulus) if x.ndim == 1 else np.stack(
        [reduce_operand(row, modulus) for row in x.reshape(-1, x.shape[-1])]).reshape(x.shape)
    if x.dtype == object and modulus <= INT64_LIMIT:
        x = x.astype(np.int64)
    return x, modulus - 1


def _objects_as_ints(x: np.ndarray) -> np.ndarray:
    """Object arrays of Python ints or gmpy2.mpz: int64 when every entry fits, else Python ints."""
    flat = x.ravel()
    hi = max(flat) if flat.size else 0
    lo = min(flat) if flat.size else 0
    if -INT64_LIMIT <= lo and hi < INT64_LIMIT:
        return x.astype(np.int64)
    out = np.empty(x.shape, dtype=object)
    out.ravel()[:] = [int(v) for v in flat]
    return out


def integer_facts(x: np.ndarray, y: np.ndarray, modulus: int | None,
                  max_x: int | None = None, max_y: int | None = None) -> IntegerFacts:
    """Lengths, magnitudes and (when a float product could be exact) norm bounds.

    Magnitudes are rounded up to ``2^bits - 1`` and norms up to a sixteenth of an octave: every
    decision taken from them stays conservative, and operands of similar size share one cached
    plan instead of re-planning per call.
    """
    max_a = _round_magnitude(bounds.max_abs(x) if max_x is None else max_x)
    max_b = _round_magnitude(bounds.max_abs(y) if max_y is None else max_y)
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
        return bounds.norm2_upper(x)
    return max(bounds.norm2_upper(row) for row in x.reshape(-1, x.shape[-1]))


def run_exact(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The plan's exact product (full, or its first ``keep`` entries) for every batch row."""
    n1, n2 = the_plan.lengths
    if the_plan.mode == "full":
        keep = the_plan.output_length
    elif the_plan.setting("circular"):
        keep = max(n1, n2)  # a circular product of this length; "valid" reads only its tail
    else:
        keep = None
    dtype = np.int64 if the_plan.output_int64 else object
    if x.ndim == 1 and y.ndim == 1:
        return _finish_row(_product_row(the_plan, x, y, keep), the_plan, dtype)
    batch = the_plan.batch_shape
    rows_x = np.broadcast_to(x, batch + (n1,)).reshape(-1, n1)
    rows_y = np.broadcast_to(y, batch + (n2,)).reshape(-1, n2)
    length = keep if keep is not None else n1 + n2 - 1
    out = np.empty((rows_x.shape[0], length), dtype=dtype)
    for i in range(rows_x.shape[0]):
        out[i] = _finish_row(_product_row(the_plan, rows_x[i], rows_y[i], keep), the_plan, dtype)
    return out.reshape(batch + (length,))


def _finish_row(row: np.ndarray, the_plan: Plan, dtype) -> np.ndarray:
    m = the_plan.modulus
    if m is not None and not _reduced_by_engine(the_plan.engine):
        fits = row.dtype == np.int64 and m < INT64_LIMIT
        row = np.mod(row if fits else row.astype(object), m)
    if row.dtype != dtype:
        row = row.astype(dtype)
    return row


def _reduced_by_engine(engine: str) -> bool:
    return engine in ("kronecker", "ntt", "limbs", "ntt-compiled")


def _product_row(the_plan: Plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    engine = the_plan.engine
    if engine == "fft-exact" and the_plan.certificate == "check":
        full = convolve_rounded(a, b, the_plan.transform_length)
        if bounds.random_evaluation_check(a, b, full):
            return full if keep is None else full[:keep]
        engine = the_plan.fallback
    return run_engine(engine, the_plan, a, b, keep)


def run_engine(engine: str, the_plan: Plan, a: np.ndarray, b: np.ndarray,
               keep: int | None) -> np.ndarray:
    """One exact engine on one pair of 1-D rows, as the plan parametrises it."""
    product_int64 = the_plan.setting("product_int64", False)
    m = the_plan.modulus
    if engine == "direct-exact" and m is not None and m < SMALL_MODULUS_LIMIT:
        return convolve_exact_direct_mod(a.astype(np.int64), b.astype(np.int64), m, keep)
    if engine == "direct-exact":
        return convolve_exact_direct(a, b, keep)
    if engine == "fft-exact":
        return convolve_rounded(a, b, the_plan.transform_length, keep)
    if engine == "limbs" and m is not None:
        return convolve_limbs_mod(a, b, m, the_plan.setting("limb_bits"),
                                  the_plan.setting("limbs_a"), the_plan.setting("limbs_b"),
                                  the_plan.transform_length, keep)
    if engine == "limbs":
        return convolve_limbs(a, b, the_plan.setting("limb_bits"), the_plan.setting("limbs_a"),
                              the_plan.setting("limbs_b"), the_plan.transform_length, keep,
                              as_int64=product_int64)
    if engine == "kronecker":
        threads = the_plan.threads if the_plan.engine == "kronecker" else 1  # 1 as a fallback
        if m is not None:
            return convolve_kronecker_mod(a, b, m, keep, threads=threads)
        return convolve_kronecker(a, b, keep, as_int64=product_int64, threads=threads)
    if engine == "ntt":
        out = convolve_ntt_mod_prime(a.astype(np.uint64), b.astype(np.uint64), m, keep)
        return out.astype(np.int64)
    if engine == "ntt-compiled":
        out = run_ntt_compiled(a, b, m, the_plan.setting("ntt_bound"), keep, product_int64)
        return out if out is not None else run_engine("kronecker", the_plan, a, b, keep)
    raise AssertionError(f"unknown exact engine {engine!r}")  # the chooser never plans one
