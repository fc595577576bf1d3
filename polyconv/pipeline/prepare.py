"""Preparing a product: validate -> integer facts -> choose a plan -> check the memory budget.

:func:`prepare` is the first half of every product (:mod:`polyconv.pipeline.execute` runs the
second); :func:`plan` and :func:`error_bound` answer the questions of :mod:`polyconv.api` for
callers inside polyconv.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from ..numerics.bounds import convolution_error_bound, norm2_upper
from ..numerics.budget import ALWAYS_GRANTED, check_allocation, coefficient_bytes
from . import inputs
from .choose import choose
from .facts import integer_facts, normalise_integers
from .plan import Plan, check_method


def prepare(a, b, mode, method, modulus, length, axis):
    """Validate the arguments, measure integer operands and choose the plan.

    Returns ``(pair, x, y, length, plan)``: the classified operands, the (truncated, normalised)
    operands with the axis last, the checked ``length`` and the :class:`Plan` (whose memory need
    has been checked against the budget).
    """
    pair = inputs.prepare_pair(a, b, axis)
    inputs.check_mode(mode)
    length = inputs.check_length(length, mode)
    mod = inputs.check_modulus(modulus, pair.kind)
    x, y = pair.a, pair.b
    if length is not None:
        x, y = x[..., :length], y[..., :length]
    n1, n2 = x.shape[-1], y.shape[-1]
    keep = None if length is None else min(length, n1 + n2 - 1)
    check_method(method)
    if pair.kind in ("integer", "bigint"):
        (x, max_x), (y, max_y) = (normalise_integers(x, mod),
                                  normalise_integers(y, mod))
        facts = integer_facts(x, y, mod, max_x, max_y)
        the_plan = choose(pair.kind, n1, n2, x.shape[:-1], y.shape[:-1], pair.batch_shape,
                          mode, method, keep, facts)
        bits = (mod - 1).bit_length() if mod is not None else facts.bound.bit_length() + 1
    else:
        for arr, name in ((x, "a"), (y, "b")):
            if arr.dtype == object:  # Python ints among floats: each must fit a float64
                _float_operand(arr, np.dtype(np.float64), name)
        the_plan = choose(pair.kind, n1, n2, x.shape[:-1], y.shape[:-1],
                                   pair.batch_shape, mode, method, keep)
        bits = 0
    check_budget(the_plan, pair.kind, bits, length)
    return pair, x, y, length, the_plan


def _float_operand(x: np.ndarray, work: np.dtype, name: str) -> np.ndarray:
    """``x`` in the float work dtype; a Python int beyond float64's range (|v| >= 2^1024) among
    floats is refused by name (numpy would raise a bare OverflowError).  (Branch hardening's fix,
    applied here where the pipeline now lives.)"""
    try:
        return x.astype(work, copy=False)
    except OverflowError:
        raise ValueError(f"{name} holds an integer too large for floating point (|value| >= "
                         "2^1024) while the product is in floating point (an operand holds "
                         "floats); pass integers only for an exact product") from None


#: Transform-sized arrays an FFT product holds at once (two spectra and the inverse transform,
#: complex128): the engines' working set beside the result (counted from engines/fft.py).
TRANSFORM_ARRAYS = 3


def check_budget(the_plan: Plan, kind: str, bits: int, length: int | None) -> bool:
    """Refuse, before any allocation, a product whose result and work space exceed the memory
    budget (:mod:`polyconv.numerics.budget`): ``rows * length * bytes per coefficient`` for the
    result
    (``bits``: coefficient size of exact outputs) plus the transform arrays of the plan's
    engine (all rows at once for float engines, one row at a time for exact ones; limbs hold
    one spectrum per limb).  Returns True when the request is below
    :data:`~polyconv.numerics.budget.ALWAYS_GRANTED` (granted whatever the budget), else False."""
    rows = math.prod(the_plan.batch_shape) if the_plan.batch_shape else 1
    count = length if length is not None else the_plan.output_length
    result = rows * count * coefficient_bytes(kind if not the_plan.exact else "integer", bits)
    work = 0.0
    if the_plan.transform_length:
        arrays = TRANSFORM_ARRAYS
        if the_plan.engine == "limbs":
            arrays = 2 * (the_plan.settings.limbs_a + the_plan.settings.limbs_b)
        work = arrays * 16.0 * the_plan.transform_length * (1 if the_plan.exact else rows)
    if result + work <= ALWAYS_GRANTED:  # granted whatever the budget: no message to build
        return True
    n1, n2 = the_plan.lengths
    if length is not None and length > n1 + n2 - 1:
        what = f"length={length}"
    else:
        what = (f"the product of a ({n1} coefficients) and b ({n2})"
                + (f" in a batch of {rows}" if rows > 1 else "")
                + (f" with length={length}" if length is not None else ""))
    check_allocation(result + work, what)
    return False


def plan(a, b, *, mode: str = "full", method: str = "auto", modulus: int | None = None,
         length: int | None = None, axis: int = -1) -> Plan:
    """The plan :func:`polyconv.api.convolve` would follow, with the float error bound computed."""
    pair, *_, the_plan = prepare(a, b, mode, method, modulus, length, axis)
    if not the_plan.exact:
        the_plan = dataclasses.replace(the_plan, error_bound=float_bound(the_plan, pair))
    return the_plan


def error_bound(a, b, the_plan: Plan | None = None) -> float:
    """Rigorous error bound of a float product (see :func:`polyconv.api.error_bound`)."""
    if the_plan is None:
        return plan(a, b).error_bound  # plan() computes it
    if the_plan.exact:
        return 0.0
    return float_bound(the_plan, inputs.prepare_pair(a, b))


def float_bound(the_plan: Plan, pair: inputs.OperandPair) -> float:
    """:func:`polyconv.api.error_bound` of a float plan for prepared operands (axis last,
    largest rows)."""
    x = np.asarray(pair.a, dtype=np.complex128 if pair.kind == "complex" else np.float64)
    y = np.asarray(pair.b, dtype=x.dtype)
    norm_a = max(norm2_upper(np.abs(r)) for r in x.reshape(-1, x.shape[-1]))
    norm_b = max(norm2_upper(np.abs(r)) for r in y.reshape(-1, y.shape[-1]))
    return convolution_error_bound(the_plan.engine, norm_a, norm_b, the_plan.transform_length,
                                   min(the_plan.lengths))
