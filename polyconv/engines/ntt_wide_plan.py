"""The wide multi-modular engine's registry record ("ntt-wide"): when it applies, what it costs,
what plans say.  Its algorithm is :mod:`polyconv.engines.ntt_wide`.

It serves exact products (no modulus) whose outputs need Python ints (``B >= 2^63``) and whose
operands have at most :data:`~polyconv.engines.ntt_wide.MAX_DIGITS` 15-bit digits, when the
primes admitting the transform length are enough for ``P > 4 B`` (at most
:data:`~polyconv.engines.ntt_wide.MAX_PRIMES`).  ``B`` is the bound of
:func:`polyconv.engines.ntt_compiled_plan.product_bound` (``min(n1, n2) max|a| max|b|`` or the
Cauchy-Schwarz bound ``||a||_2 ||b||_2``, the smaller), so the prime count is proven.

Cost (constants in the cost table's ``exact.ntt_wide`` section; ``N`` the transform length, ``k``
primes, ``d`` digits of the wider operand, ``L`` digits of ``P``, ``C`` output coefficients)::

    t = jit + c0 + rows (k (c_prime + c_nlogn N lg N) + c_mac (k d (n1 + n2) + (k + 1) L C)
                         + c_digit (d (n1 + n2) + L C))

``c_mac`` is the float64 BLAS multiply-add of the two matrix products (measured with the BLAS
threads in force), ``c_digit`` the digit passes (marshal streams in and out, carries).  Short
products (:func:`~polyconv.engines.ntt_wide.uses_direct`) take schoolbook sums with the primes
in SIMD lanes instead of transforms: there ``k (c_prime + c_nlogn N lg N)`` is replaced by
``c_lane K n1 n2``, ``K`` the lane count (``k`` rounded up to a multiple of 8).
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics.limits import magnitude_fits_int64
from . import jit_state
from ._common import INTEGER_KINDS, Engine, Job, Option
from .ntt_compiled_plan import JIT_DEFAULTS, product_bound
from .ntt_wide import (
    MAX_DIGITS,
    convolve_wide,
    lanes,
    primes_for,
    transform_length,
    uses_direct,
)

NAME = "ntt-wide"

#: Defaults when the cost table has no ``ntt_wide`` section (measured on the development machine
#: by a least-squares fit over 100-3000 bits, n = 4..4096, one BLAS thread; per_lane_term from
#: the direct route's kernel at 64 x 64 and 64 x 16, 1000 bits: 1.6-2.4e-10; the overhead as
#: seen through convolve: see bench/RESULTS.md, section crtwide).
DEFAULTS = {"overhead": 6e-5, "per_prime": 7.1e-7, "per_nlogn": 1.65e-9, "per_mac": 4.1e-11,
            "per_digit": 1.2e-9, "per_lane_term": 2.0e-10}


def plan_shape(facts) -> tuple[int, int, int, int] | str:
    """``(bound, k, d, L)`` for an exact product, or why the engine cannot take it."""
    if facts.modulus is not None:
        return "products modulo m go to the engines that reduce"
    bound = product_bound(facts)
    if magnitude_fits_int64(bound):
        return "outputs fit int64 (the one-word engines are faster there)"
    d = -(-max(facts.max_a, facts.max_b).bit_length() // 15)
    if d > MAX_DIGITS:
        return f"operands wider than {15 * MAX_DIGITS} bits (float64 residue sums would round)"
    primes = primes_for(bound, transform_length(facts.n1, facts.n2))
    if primes is None:
        return "the coefficient bound needs more primes than admit this transform length"
    top = math.prod(primes).bit_length()
    return bound, len(primes), d, -(-top // 15) + 1


def seconds(c: dict, n1: int, n2: int, k: int, d: int, digits_out: int, count: int) -> float:
    """Predicted seconds of one product (without the JIT charge and ``c0``)."""
    if uses_direct(n1, n2):
        ntt = c["per_lane_term"] * lanes(k) * n1 * n2
    else:
        n = transform_length(n1, n2)
        ntt = k * (c["per_prime"] + c["per_nlogn"] * n * max(1, math.log2(n)))
    macs = k * d * (n1 + n2) + (k + 1) * digits_out * count
    return ntt + c["per_mac"] * macs + c["per_digit"] * (d * (n1 + n2) + digits_out * count)


def option(job: Job) -> Option | str:
    """The wide engine's offer, or why it cannot run here."""
    state = jit_state.state()
    if state == "unavailable":
        return f"compiled engines unavailable: {jit_state.reason()}"
    shape = plan_shape(job.facts)
    if isinstance(shape, str):
        return shape
    bound, k, d, digits_out = shape
    c = {**DEFAULTS, **job.costs["exact"].get("ntt_wide", {})}
    j = {**JIT_DEFAULTS, **job.costs["exact"].get("jit", {})}
    charge = {"compiled": 0.0, "cached": j["load_seconds"]}.get(state, j["compile_seconds"])
    total = charge + c["overhead"] + job.rows * seconds(c, job.n1, job.n2, k, d, digits_out,
                                                        job.out_len)
    note = (f"compiled NTT modulo {k} primes (from the coefficient bound, P > 4B), CRT as a "
            f"float64 matrix product; {jit_state.reason()}")
    if charge:
        note += f" ({charge:.2g} s charged)"
    return Option(total, "construction", note, {"ntt_bound": bound})


def run_engine(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray | None:
    """The plan's product of two rows; None when the kernels (or the stream route for these
    operands) are not available here, so the runner takes Kronecker instead."""
    return convolve_wide(a, b, plan.setting("ntt_bound"), keep)


ENGINE = Engine(NAME, INTEGER_KINDS, option, run_engine, exact=True, when_unavailable="kronecker")
