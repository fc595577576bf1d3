"""Running a plan: one engine on prepared operands, the check a certificate calls for, fallback.

Float plans run their engine on all rows at once, with the non-finite policy of
:mod:`polyconv.pipeline.shaping`.  Exact plans run a batched engine (``Engine.batched``, e.g.
"ntt-batch") once on the stacked rows and any other engine row by row (:func:`run_exact`),
perform the random-evaluation check a ``"check"`` certificate calls for (recomputing with the
plan's fallback engine when it fails) and return int64 or Python ints as the plan says.
:func:`convolve_prepared` is the whole pipeline for callers inside polyconv.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from ..engines import ntt_stream, ntt_wide
from ..engines.registry import REGISTRY
from ..numerics.checks import random_evaluation_check
from ..numerics.limits import INT64_LIMIT
from ..tuning import costs as _costs
from . import shaping, small
from .choose import choose
from .facts import bound_facts, integer_facts, normalise_integers
from .plan import Plan, needed_entries
from .prepare import check_budget, prepare
from .small import tiny_arrays, tiny_product


def convolve_prepared(a, b, *, mode: str = "full", method: str = "auto",
                      modulus: int | None = None, length: int | None = None,
                      axis: int = -1) -> tuple[np.ndarray, Plan]:
    """The product of :func:`polyconv.api.convolve` on in-memory arrays, and the plan it followed.

    For callers inside polyconv that also need the plan (it is prepared once).  A float plan's
    ``error_bound`` is not computed here (``inf``; :func:`polyconv.pipeline.prepare.float_bound`).
    """
    pair, x, y, length, the_plan = prepare(a, b, mode, method, modulus, length, axis)
    if 0 in pair.batch_shape:
        full = shaping.empty_result(the_plan, pair.kind, x, y)
    else:
        full = run(the_plan, x, y)
    return shaping.shape_result(full, the_plan, pair.axis, length), the_plan


def convolve(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
             length: int | None = None, axis: int = -1) -> np.ndarray:
    """:func:`polyconv.api.convolve` on in-memory arrays (no dask), for callers inside polyconv.

    Tiny plain integer products take the short path of :mod:`polyconv.pipeline.small` (same
    values and dtype, no planning); two plain 1-D float arrays that of :func:`plain_float_pair`."""
    if type(a) is np.ndarray and type(b) is np.ndarray:
        if (mode == "full" and method == "auto" and length is None and type(axis) is int
                and (axis == -1 or axis == 0)):
            out = tiny_arrays(a, b, modulus)
            if out is not None:
                return out
        if a.dtype == _OBJECT and b.dtype == _OBJECT:
            out = plain_object_pair(a, b, mode, method, modulus, length, axis)
        else:
            out = plain_float_pair(a, b, mode, method, modulus, length, axis)
        if out is not None:
            return out
        out = tiny_product(a, b, mode, method, modulus, length, axis)
        if out is None:
            out = plain_int_pair(a, b, mode, method, modulus, length, axis)
        if out is not None:
            return out
    else:
        out = tiny_product(a, b, mode, method, modulus, length, axis)
        if out is not None:
            return out
    return convolve_prepared(a, b, mode=mode, method=method, modulus=modulus, length=length,
                             axis=axis)[0]


_PLAIN_FLOATS = (np.dtype(np.float64), np.dtype(np.float32))
#: plans of :func:`plain_float_pair` by ``(n1, n2, cost table generation)``, kept only for
#: products whose memory the budget grants whatever its setting (so no re-check is skipped)
_plain_plans: dict = {}


def plain_float_pair(a: np.ndarray, b: np.ndarray, mode, method, modulus, length,
                     axis) -> np.ndarray | None:
    """The product of two non-empty 1-D float64 (or float32) arrays of one dtype with the
    default arguments, planned and run as :func:`convolve_prepared` would (the same plan, the
    same engine call, the same values), without the classification of array-likes, which is
    most of the cost of a short product; None for anything else (the caller then prepares).
    """
    if (a.ndim != 1 or b.ndim != 1 or mode != "full" or method != "auto" or modulus is not None
            or length is not None or type(axis) is not int or axis not in (-1, 0)
            or a.dtype != b.dtype or a.dtype not in _PLAIN_FLOATS):
        return None
    n1, n2 = a.shape[0], b.shape[0]
    if n1 == 0 or n2 == 0:
        return None  # the preparing path names the empty operand
    key = (n1, n2, _costs.generation)
    the_plan = _plain_plans.get(key)
    if the_plan is None:
        the_plan = choose("real", n1, n2, (), (), (), "full", "auto", None)
        if check_budget(the_plan, "real", 0, None):  # granted whatever the budget: memoise
            if len(_plain_plans) >= 512:
                _plain_plans.clear()
            _plain_plans[(n1, n2, _costs.generation)] = the_plan
    engine = REGISTRY[the_plan.engine]
    out = engine.run(the_plan, a, b, the_plan.output_length)  # what run() would call
    if not (engine.nonfinite_safe or shaping.looks_finite(out, engine.smears_nonfinite)):
        out = run(the_plan, a, b)  # NaN, inf or overflow: run()'s policy, from the start
    return shaping.shape_result(out, the_plan, 0, None)


_INT64 = np.dtype(np.int64)
#: plans of :func:`plain_int_pair` by ``(n1, n2, bits of max|a|, bits of max|b|, cost table
#: generation)``, kept only when the facts hold for every such pair (no operand's own norm was
#: needed: :func:`polyconv.pipeline.facts.bound_facts`) and the budget grants the memory always
_plain_int_plans: dict = {}


def plain_int_pair(a: np.ndarray, b: np.ndarray, mode, method, modulus, length,
                   axis) -> np.ndarray | None:
    """The exact product of two non-empty 1-D int64 arrays with the default arguments (no
    modulus), planned and run as :func:`convolve_prepared` would (the same facts, plan, engine
    run and output dtype), without the classification and normalisation of array-likes: about
    half the cost of a product at ``n = 2^10``; None for anything else (the caller prepares)."""
    if (a.ndim != 1 or b.ndim != 1 or mode != "full" or method != "auto" or modulus is not None
            or length is not None or type(axis) is not int or axis not in (-1, 0)
            or a.dtype != _INT64 or b.dtype != _INT64):
        return None
    n1, n2 = a.shape[0], b.shape[0]
    if n1 == 0 or n2 == 0:
        return None  # the preparing path names the empty operand
    kernels = small._small or small.small_kernels()
    if kernels is not None:  # one compiled pass per operand (measured at 2^10: 0.9 us against
        max_x, max_y = map(int, kernels.magnitudes(a, b))  # 3.2 us for four numpy reductions)
    else:
        lo, hi = int(a.min()), int(a.max())
        max_x = hi if hi >= -lo else -lo
        lo, hi = int(b.min()), int(b.max())
        max_y = hi if hi >= -lo else -lo
    key = (n1, n2, max_x.bit_length(), max_y.bit_length(), _costs.generation)
    the_plan = _plain_int_plans.get(key)
    if the_plan is None:
        facts = integer_facts(a, b, None, max_x, max_y)
        the_plan = choose("integer", n1, n2, (), (), (), "full", "auto", None, facts)
        granted = check_budget(the_plan, "integer", facts.bound.bit_length() + 1, None)
        crude = bound_facts(n1, n2, max_x, max_y, None)
        if granted and facts == crude:  # (the same facts for every pair of this key)
            if len(_plain_int_plans) >= 512:
                _plain_int_plans.clear()
            _plain_int_plans[key] = the_plan
    return shaping.shape_result(run_exact(the_plan, a, b), the_plan, 0, None)


_OBJECT = np.dtype(object)


def plain_object_pair(a: np.ndarray, b: np.ndarray, mode, method, modulus, length,
                      axis) -> np.ndarray | None:
    """The exact product of two non-empty 1-D object arrays of Python ints with the default
    arguments (no modulus, or a modulus above ``2^64`` of which they are already residues),
    planned and run as :func:`convolve_prepared` would (the same facts,
    plan, values and output dtype), without the classification and normalisation of array-likes
    (type checks, min/max: ~25 us for two 64-term operands).  The entries are checked and
    measured from their ``marshal`` streams in one compiled call
    (:func:`polyconv.engines.ntt_stream.streams`); a plan for the compiled NTT then reads those
    streams (:func:`polyconv.engines.ntt_stream.product`).  None for anything else, or when the
    kernels are not loaded here (the caller prepares)."""
    m = modulus
    if (a.ndim != 1 or b.ndim != 1 or mode != "full" or method != "auto" or length is not None
            or type(axis) is not int or axis not in (-1, 0)
            or (m is not None and (type(m) is not int or m <= _WIDE_MODULUS))):
        return None
    n1, n2 = a.shape[0], b.shape[0]
    if n1 == 0 or n2 == 0 or not ntt_stream.fits(n1, n2):
        return None
    found = ntt_stream.streams(a, b)
    if found is None:
        return None
    da, db, bits_a, bits_b, negative = found
    if m is None and (bits_a == 64 or bits_b == 64):  # (-2^63 becomes an int64, 2^63 not)
        return None
    if m is not None and (negative or max(bits_a, bits_b) >= m.bit_length()):
        return None  # (not already residues in [0, m): the pipeline reduces them)
    x = a if bits_a >= 64 else a.astype(np.int64)  # as facts.normalise_integers does
    y = b if bits_b >= 64 else b.astype(np.int64)
    max_x, max_y = (1 << bits_a) - 1, (1 << bits_b) - 1
    key = (n1, n2, bits_a, bits_b, m, _costs.generation)
    the_plan = _plain_object_plans.get(key)
    if the_plan is None:
        facts = integer_facts(x, y, m, max_x, max_y)
        the_plan = choose("bigint", n1, n2, (), (), (), "full", "auto", None, facts)
        bits = facts.bound.bit_length() + 1 if m is None else (m - 1).bit_length()
        granted = check_budget(the_plan, "bigint", bits, None)
        if granted and facts == bound_facts(n1, n2, max_x, max_y, m):
            if len(_plain_object_plans) >= 512:
                _plain_object_plans.clear()
            _plain_object_plans[key] = the_plan
    if the_plan.engine == "ntt-compiled" and the_plan.certificate == "construction" and not (
            the_plan.output_int64):
        out = (ntt_stream.product(da, db, n1, n2, the_plan.setting("ntt_bound"), n1 + n2 - 1)
               if m is None else ntt_stream.product_mod(da, db, n1, n2, m, n1 + n2 - 1))
    elif (the_plan.engine == "ntt-wide" and m is None and the_plan.certificate == "construction"
          and (out := ntt_wide.convolve_streams(da, db, n1, n2, max(bits_a, bits_b),
                                                the_plan.setting("ntt_bound"))) is not None):
        out = _reduce_row(out, the_plan, np.int64 if the_plan.output_int64 else object)
    else:
        out = run_exact(the_plan, x, y)
    return shaping.shape_result(out, the_plan, 0, None)


#: :func:`plain_object_pair` takes moduli above this (smaller ones give int64 residues)
_WIDE_MODULUS = 2**64


#: plans of :func:`plain_object_pair`, keyed and kept as those of :func:`plain_int_pair`
_plain_object_plans: dict = {}


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
    the_plan = choose(kind, facts.n1, facts.n2, (), (), (), mode, "auto", keep, facts)
    check_budget(the_plan, kind, (modulus - 1).bit_length() if modulus is not None
                 else facts.bound.bit_length() + 1, length)
    return shaping.shape_result(run_exact(the_plan, x, y), the_plan, -1, length)


def run(the_plan: Plan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Run the plan's engine on prepared operands (axis last); full or truncated product."""
    if the_plan.exact:
        return run_exact(the_plan, x, y)
    engine = REGISTRY[the_plan.engine]
    work = shaping.float_work_dtype(x.dtype, y.dtype, the_plan.kind)
    x = x.astype(work, copy=False)
    y = y.astype(work, copy=False)
    keep = needed_entries(the_plan.mode, x.shape[-1], y.shape[-1], the_plan.output_length)
    out = engine.run(the_plan, x, y, keep)  # (transform engines silence their NaN warnings)
    if engine.nonfinite_safe or shaping.looks_finite(out, engine.smears_nonfinite):
        return out

    def product(u: np.ndarray, v: np.ndarray) -> np.ndarray:
        return engine.run(the_plan, u, v, keep)

    bad = shaping.nonfinite_masks(x, y)  # a NaN or inf input, or an overflow
    if bad is not None:
        x, y = shaping.zero_nonfinite(x), shaping.zero_nonfinite(y)
    # finite inputs whose product overflows: inf - inf inside a transform would give NaN
    # where numpy.convolve gives +-inf, so the product is formed on scaled operands
    out = shaping.run_scaled(product, x, y)
    if bad is not None:
        out = shaping.mark_nonfinite(out, bad, x.shape[-1], y.shape[-1])
    return out


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
    if REGISTRY[the_plan.engine].batched:
        out = _batched_rows(the_plan, x, y, keep)
        if out is not None:
            return out.astype(dtype, copy=False)
        the_plan = dataclasses.replace(the_plan, engine=REGISTRY[the_plan.engine].when_unavailable)
    if x.ndim == 1 and y.ndim == 1:
        return _reduce_row(_product_row(the_plan, x, y, keep), the_plan, dtype)
    batch = the_plan.batch_shape
    rows_x = np.broadcast_to(x, batch + (n1,)).reshape(-1, n1)
    rows_y = np.broadcast_to(y, batch + (n2,)).reshape(-1, n2)
    length = keep if keep is not None else n1 + n2 - 1
    out = np.empty((rows_x.shape[0], length), dtype=dtype)
    for i in range(rows_x.shape[0]):
        out[i] = _reduce_row(_product_row(the_plan, rows_x[i], rows_y[i], keep), the_plan, dtype)
    return out.reshape(batch + (length,))


def _batched_rows(the_plan: Plan, x: np.ndarray, y: np.ndarray,
                  keep: int | None) -> np.ndarray | None:
    """Every row's product in one call of a batched engine (None: its kernels did not load)."""
    n1, n2 = the_plan.lengths
    batch = the_plan.batch_shape
    rows_x, rows_y = _stack_rows(x, n1, batch), _stack_rows(y, n2, batch)
    out = REGISTRY[the_plan.engine].run(the_plan, rows_x, rows_y, keep)
    if out is None:
        return None
    return out.reshape(batch + out.shape[-1:]) if batch else out[0]


def _stack_rows(z: np.ndarray, n: int, batch: tuple) -> np.ndarray:
    """``(rows, n)`` rows of an operand: its own rows, a single row (which the batched engines
    broadcast), or its rows broadcast to the batch."""
    lead = z.shape[:-1]
    if lead == batch or math.prod(lead) == 1:
        return z.reshape(-1, n)
    return np.broadcast_to(z, batch + (n,)).reshape(-1, n)


def _reduce_row(row: np.ndarray, the_plan: Plan, dtype) -> np.ndarray:
    m = the_plan.modulus
    if m is not None and not REGISTRY[the_plan.engine].reduces_modulus:
        fits = row.dtype == np.int64 and m < INT64_LIMIT  # np.mod needs m itself as an int64
        row = np.mod(row if fits else row.astype(object), m)
    if row.dtype != dtype:
        row = row.astype(dtype)
    return row


def _product_row(the_plan: Plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    engine = REGISTRY[the_plan.engine]
    if the_plan.certificate == "check":
        full = engine.run(the_plan, a, b, None)
        if random_evaluation_check(a, b, full):
            return full if keep is None else full[:keep]
        engine = REGISTRY[the_plan.fallback]
    out = engine.run(the_plan, a, b, keep)
    if out is None:  # the engine turned out unavailable here
        out = REGISTRY[engine.when_unavailable].run(the_plan, a, b, keep)
    return out
