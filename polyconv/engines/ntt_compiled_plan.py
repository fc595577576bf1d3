"""The compiled NTT engine's registry record: when it applies, what it costs, what plans say.

Its kernel is :mod:`polyconv.engines.ntt_compiled` (kept apart so that module stays the
algorithm).
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics.limits import magnitude_fits_int64
from . import jit_state, ntt_stream
from ._common import INTEGER_KINDS, Engine, Job, Option
from ._wrap import wrap_length
from .ntt_compiled import (
    KERNEL_MODULUS_LIMIT,
    _count,
    is_ntt_prime,
    max_length,
    prime_count,
    run_planned,
    transform_length,
)

# The prediction charges the state of the kernels (:mod:`polyconv.engines.jit_state`): nothing
# once they are compiled in this process, a warm-cache load or a whole compile otherwise, so a
# one-off small product never waits for the compiler while a product that outweighs it may pay
# it.
#
# Cost (constants in the cost table's ``exact.ntt_compiled`` section, ``N`` the power-of-two
# transform length (a product a little longer than ``N / 2`` is priced as its cyclic route:
# :func:`transform_seconds`), ``k`` primes, ``C`` output coefficients, per batch row)::
#
#     t = jit + c0 + rows (k (c_nlogn N lg N + c_pt N) + [CRT] (c_crt + c_res k C + c_digit k^2 C)
#                           + (c_obj + c_od k^2) C [objects out]
#                           + (c_in + c_step k w) (n1 + n2) [operands above int64, w 30-bit words])
#
# [CRT]: every exact product (its signed values come from Garner's recombination, even from one
# prime) and every product modulo m over several primes; ``c_crt`` is that call's fixed cost
# and ``c_res k C`` its passes over the residues (measured: two primes to int64, 2047 values,
# 5.6 us, of which a ``k^2`` term alone explained 1.6 us: the missing terms sent 16-bit
# products at n = 2^8..2^10 to this engine where the rounded float FFT was 20-40% faster).
#
# Primes: ``P > 2 B`` with ``B = min(min(n1, n2) max|a| max|b|, ||a||_2 ||b||_2)`` (Cauchy-Schwarz;
# DESIGN.md section 5) for exact products; ``P > min(n1, n2) (m - 1)^2`` modulo ``m`` (one prime
# when ``m`` itself is an NTT prime of the table).

NAME = "ntt-compiled"

#: Defaults when the cost table has no ``ntt_compiled`` section (measured on the development
#: machine with bench/compiled_bench.py, busy: see bench/RESULTS.md).
DEFAULTS = {"overhead": 6e-6, "per_nlogn": 4.6e-10, "per_point": 6e-11, "per_digit": 1.4e-10,
            "per_residue": 7e-10, "per_crt": 1.3e-6, "per_object_out": 4.0e-8,
            "per_object_digit": 5e-10, "per_object_in": 3e-8, "per_input_step": 1e-9}
JIT_DEFAULTS = {"load_seconds": 0.9, "compile_seconds": 14.0}


def product_bound(facts) -> int:
    """``B``: the smaller of ``min(n1, n2) max|a| max|b|`` and ``||a||_2 ||b||_2`` (rounded up)."""
    bound = facts.bound
    if math.isfinite(facts.norm_a) and math.isfinite(facts.norm_b):
        cs = math.ceil(math.nextafter(facts.norm_a * facts.norm_b * (1 + 2**-40), math.inf))
        bound = min(bound, cs)
    return bound


def _points_seconds(c: dict, n: int) -> float:
    return c["per_nlogn"] * n * max(1, math.log2(n)) + c["per_point"] * n


def transform_seconds(c: dict, n1: int, n2: int, n: int) -> float:
    """Seconds of one prime's product of lengths ``n1``, ``n2`` with ``n``-point transforms, or
    by the cyclic route of :mod:`polyconv.engines._wrap` when the product is a little longer
    than ``n / 2``: an ``n / 2``-point cyclic product, the short product of the top ends and
    one more call (measured at ``m = 2^14``, ``r = m / 16``: 0.75 of the ``2m``-point time)."""
    m = wrap_length(n1, n2, n)
    if not m:
        return _points_seconds(c, n)
    r = n1 + n2 - 1 - m
    return _points_seconds(c, m) + _points_seconds(c, transform_length(r, r)) + c["overhead"]


def crt_seconds(c: dict, k: int, out_len: int, modulus: int | None) -> float:
    """Seconds of Garner's recombination of ``k`` residue rows of ``out_len`` values (the
    ``[CRT]`` term above; cost constants ``c``): every exact product, and products modulo
    ``m`` over several primes."""
    if modulus is not None and k <= 1:
        return 0.0
    return c["per_crt"] + (c["per_residue"] * k + c["per_digit"] * k * k) * out_len


def _compiled_option(facts, exact_costs: dict, rows: int, n_full: int, out_len: int):
    """``(seconds, note, settings)`` for the compiled NTT engine, or None if it cannot run here.

    ``settings`` holds ``ntt_bound`` (the bound the primes are chosen from; 0 for a modulus).
    """
    state = jit_state.state()
    if state == "unavailable":
        return None
    m = facts.modulus
    if m is None:
        bound = product_bound(facts)
        k = prime_count(bound, n_full)
        settings = {"ntt_bound": bound}
        objects_out = not magnitude_fits_int64(bound)
    elif is_ntt_prime(m) and n_full <= max_length(m):
        k, settings, objects_out = 1, {"ntt_bound": 0}, False
    else:
        k = prime_count(min(facts.n1, facts.n2) * (m - 1) ** 2, n_full, signed=False)
        settings, objects_out = {"ntt_bound": 0}, m >= KERNEL_MODULUS_LIMIT
    if k == 0:
        return None
    c = {**DEFAULTS, **exact_costs.get("ntt_compiled", {})}
    j = {**JIT_DEFAULTS, **exact_costs.get("jit", {})}
    charge = {"compiled": 0.0, "cached": j["load_seconds"]}.get(state, j["compile_seconds"])
    per_row = k * transform_seconds(c, facts.n1, facts.n2, n_full)
    per_row += crt_seconds(c, k, out_len, m)
    if objects_out:
        per_row += (c["per_object_out"] + c["per_object_digit"] * k * k) * out_len
    top = max(facts.max_a, facts.max_b)
    if not magnitude_fits_int64(top):  # residues by Horner's rule over 30-bit chunks
        steps = k * -(-top.bit_length() // 30)
        per_row += (c["per_object_in"] + c["per_input_step"] * steps) * (facts.n1 + facts.n2)
    seconds = charge + c["overhead"] + rows * per_row
    what = "one prime" if k == 1 else f"{k} primes and Garner CRT"
    note = f"compiled NTT modulo {what}; {jit_state.reason()}"
    if charge:
        note += f" ({charge:.2g} s charged)"
    return seconds, note, settings


def remark(chosen: str, offered: bool) -> str:
    """What plan() adds when the compiled engine was not chosen (its state, and why)."""
    if chosen == NAME:
        return ""
    state = jit_state.state()
    if state == "unavailable":
        return f"; compiled engines unavailable: {jit_state.reason()}"
    if not offered:
        return ""
    if state == "compiled":
        return "; compiled NTT predicted slower"
    return f"; compiled NTT not chosen: {jit_state.reason()}"


def option(job: Job) -> Option | str:
    """The compiled NTT's offer, or why it cannot run here."""
    if jit_state.state() == "unavailable":
        return f"compiled engines unavailable: {jit_state.reason()}"
    offer = _compiled_option(job.facts, job.costs["exact"], job.rows, job.n_full, job.out_len)
    if offer is None:
        return ("the coefficient bound needs more NTT primes than the compiled kernels have "
                "for this length")
    seconds, note, settings = offer
    return Option(seconds, "construction", note, settings)


def run_engine(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray | None:
    """The plan's product of two rows; None when the kernels turned out not to load.  Short
    exact products with a Python-int operand and Python ints out, and such products modulo
    ``m >= 2^62``, read the operands' marshal streams (:mod:`polyconv.engines.ntt_stream`: one
    kernel call)."""
    bound, m = plan.setting("ntt_bound"), plan.modulus
    if ((a.dtype == object or b.dtype == object) and ntt_stream.fits(a.shape[-1], b.shape[-1])
            and (not magnitude_fits_int64(bound) if m is None else m >= KERNEL_MODULUS_LIMIT)):
        found = ntt_stream.streams(a, b)  # (residues in [0, m) with a modulus: normalised)
        if found is not None:
            n1, n2, count = a.shape[-1], b.shape[-1], _count(a, b, keep)
            if m is None:
                return ntt_stream.product(found[0], found[1], n1, n2, bound, count)
            return ntt_stream.product_mod(found[0], found[1], n1, n2, m, count)
    return run_planned(a, b, plan.modulus, plan.setting("ntt_bound"), keep,
                       plan.setting("product_int64", False))


ENGINE = Engine(NAME, INTEGER_KINDS, option, run_engine, exact=True, reduces_modulus=True,
                when_unavailable="kronecker", remark=remark)
