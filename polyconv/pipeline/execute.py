"""Running a plan: one engine on prepared operands, the check a certificate calls for, fallback.

Float plans run their engine on all rows at once, with the non-finite policy of
:mod:`polyconv.pipeline.shaping`.  Exact plans run their engine row by row
(:func:`run_exact`), perform the random-evaluation check a ``"check"`` certificate calls for
(recomputing with the plan's fallback engine when it fails) and return int64 or Python ints as the
plan says.  :func:`convolve_prepared` is the whole pipeline for callers inside polyconv.
"""

from __future__ import annotations

import numpy as np

from ..engines.direct import convolve_direct
from ..engines.exact_direct import (
    SMALL_MODULUS_LIMIT,
    convolve_exact_direct,
    convolve_exact_direct_mod,
)
from ..engines.exact_fft import convolve_limbs, convolve_limbs_mod, convolve_rounded
from ..engines.fft import convolve_fft
from ..engines.kronecker import convolve_kronecker, convolve_kronecker_mod
from ..engines.ntt import convolve_ntt_mod_prime
from ..engines.ntt_compiled import run_planned as run_ntt_compiled
from ..engines.overlap_add import convolve_overlap_add
from ..numerics.checks import random_evaluation_check
from ..numerics.limits import INT64_LIMIT
from . import shaping
from .choose_exact import choose_exact
from .facts import integer_facts, normalise_integers
from .plan import Plan
from .prepare import check_budget, prepare


def convolve_prepared(a, b, *, mode: str = "full", method: str = "auto",
                      modulus: int | None = None, length: int | None = None,
                      axis: int = -1) -> tuple[np.ndarray, Plan]:
    """The product of :func:`polyconv.api.convolve` on in-memory arrays, and the plan it followed.

    For callers inside polyconv that also need the plan (it is prepared once).  A float plan's
    ``error_bound`` is not computed here (``inf``; :func:`polyconv.pipeline.prepare.float_bound`).
    """
    pair, x, y, trunc, the_plan = prepare(a, b, mode, method, modulus, length, axis)
    if 0 in pair.batch_shape:
        full = shaping.empty_result(the_plan, pair.kind, x, y)
    else:
        full = run(the_plan, x, y)
    return shaping.finish(full, the_plan, pair.axis, trunc), the_plan


def convolve(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
             length: int | None = None, axis: int = -1) -> np.ndarray:
    """:func:`polyconv.api.convolve` on in-memory arrays (no dask), for callers inside polyconv."""
    return convolve_prepared(a, b, mode=mode, method=method, modulus=modulus, length=length,
                             axis=axis)[0]


def convolve_integer_rows(x: np.ndarray, y: np.ndarray, *, mode: str = "full",
                          modulus: int | None = None, length: int | None = None,
                          magnitudes: tuple[int, int] | None = None) -> np.ndarray:
    """:func:`convolve` for callers inside polyconv that hold already-checked operands.

    ``x`` and ``y`` are 1-D, non-empty int64 or object arrays of integers, and ``mode``,
    ``modulus`` and ``length`` have been validated (as :mod:`polyconv.algebra` does once per
    call of its public functions).  The product is planned, certified and shaped exactly as in
    :func:`convolve`; only the classification of array-likes is skipped, which is most of the
    cost of a short product.  ``magnitudes``, when given, are upper bounds of ``max|x|`` and
    ``max|y|`` for int64 operands that are already reduced when ``modulus`` is (the pass that
    would find them is skipped).
    """
    keep = None if length is None else min(length, x.shape[0] + y.shape[0] - 1)
    if length is not None:
        x, y = x[:length], y[:length]
    if magnitudes is not None and x.dtype == np.int64 and y.dtype == np.int64:
        max_x, max_y = magnitudes
    else:
        (x, max_x), (y, max_y) = (normalise_integers(x, modulus),
                                  normalise_integers(y, modulus))
    facts = integer_facts(x, y, modulus, max_x, max_y)
    kind = "integer" if x.dtype != object and y.dtype != object else "bigint"
    the_plan = choose_exact(facts, kind, (), mode, "auto", keep)
    check_budget(the_plan, kind, (modulus - 1).bit_length() if modulus is not None
                 else facts.bound.bit_length() + 1, length)
    return shaping.finish(run_exact(the_plan, x, y), the_plan, -1, length)


def run(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Run the plan's engine on prepared operands (axis last); full or truncated product."""
    engine = the_plan.engine
    if the_plan.exact:
        return run_exact(the_plan, x, y)
    work = shaping.float_work_dtype(x.dtype, y.dtype, the_plan.kind)
    x = x.astype(work, copy=False)
    y = y.astype(work, copy=False)
    if engine == "direct":
        return convolve_direct(x, y)
    with np.errstate(invalid="ignore", over="ignore"):  # a NaN input is handled just below
        out = _run_transform(the_plan, x, y)
    if not shaping.looks_finite(out, first_entries_only=engine == "fft"):
        bad = shaping.nonfinite_masks(x, y)
        if bad is not None:
            x, y = shaping.zero_nonfinite(x), shaping.zero_nonfinite(y)
        # finite inputs whose product overflows: inf - inf inside a transform would give NaN
        # where numpy.convolve gives +-inf, so the product is formed on scaled operands
        out = shaping.run_scaled(lambda u, v: _run_transform(the_plan, u, v), x, y)
        if bad is not None:
            out = shaping.mark_nonfinite(out, bad, x.shape[-1], y.shape[-1])
    return out


def _run_transform(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    if the_plan.engine == "fft":
        keep = shaping.needed_entries(the_plan.mode, x.shape[-1], y.shape[-1],
                                      the_plan.output_length)
        return convolve_fft(x, y, the_plan.transform_length, keep, the_plan.threads)
    if x.shape[-1] < y.shape[-1]:
        x, y = y, x
    return convolve_overlap_add(x, y, the_plan.transform_length, the_plan.threads)


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
        if random_evaluation_check(a, b, full):
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
