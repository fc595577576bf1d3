"""The batched compiled engine's registry record: a whole batch of short rows in one call.

The batch axis of ``convolve`` (2-D integer operands: one product per row) otherwise runs row by
row, paying the runner's Python per row (15-20 us) for products that take a microsecond.  This
engine hands every row to one call of :mod:`polyconv.engines.ntt_batch` (its kernels in
:mod:`polyconv.engines._kernels_batch`): schoolbook sums in wrapping 64-bit arithmetic for
exact int64 products, schoolbook sums modulo a word prime, or NTT products modulo enough primes
with Garner's CRT, exactly as :func:`~polyconv.engines.ntt_batch.multiply_rows_exact` and
:func:`~polyconv.engines.ntt_batch.multiply_rows_mod` choose.

Cost (constants in the cost table's ``exact.ntt_batch`` section, else :data:`DEFAULTS`; ``k``
primes, ``C`` output coefficients, ``N`` the transform length, ``r`` rows)::

    t = jit + c0 + r (c_wrap n1 n2)                          exact, B < 2^63, n1 n2 <= 512^2
    t = jit + c0 + r (c_128 n1 n2 + c_obj C)                 exact, B < 2^127, n1 n2 <= 512^2
    t = jit + c0 + r k (c_mod n1 n2  or  c_nlogn N lg N + c_pt N) + r [CRT]
        + r c_obj C [Python ints out]                        otherwise

(``[CRT]``: Garner's recombination, :func:`polyconv.engines.ntt_compiled_plan.crt_seconds`)

with the JIT charge of :mod:`polyconv.engines.ntt_compiled_plan` (nothing once the kernels are
ready in this process).  Only int64 operands and rows whose transforms have at most
:data:`MAX_ROW_TRANSFORM` points are taken: longer rows amortise a call of their own.
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics.limits import magnitude_fits_int64
from . import jit_state
from ._common import INTEGER_KINDS, Engine, Job, Option
from .ntt_batch import (
    SCHOOLBOOK_WORK,
    SCHOOLBOOK_WORK_128,
    SCHOOLBOOK_WORK_WRAP,
    multiply_rows_exact,
    multiply_rows_mod,
)
from .ntt_compiled import is_ntt_prime, max_length, prime_count
from .ntt_compiled_plan import DEFAULTS as NTT_DEFAULTS
from .ntt_compiled_plan import JIT_DEFAULTS, crt_seconds, product_bound

NAME = "ntt-batch"

#: Longest row transform this engine takes (rows of up to ~2,000 coefficients each).
MAX_ROW_TRANSFORM = 2**12

#: Defaults when the cost table has no ``ntt_batch`` section (measured on the development
#: machine: bench/RESULTS.md, "Batched short products"; `polyconv calibrate` fits them).
DEFAULTS = {"overhead": 6e-6, "per_row": 1.5e-7, "per_mac_wrap": 2.5e-10,
            "per_mac_mod": 5e-10, "per_mac_128": 6e-10}


def _primes(facts, n_full: int) -> tuple[int, str | bool, bool]:
    """``(k, schoolbook ("wrap": 64-bit, "128": 128-bit, False: none), objects out)``."""
    m = facts.modulus
    if m is None:
        bound = product_bound(facts)
        if bound < 2**63 and facts.n1 * facts.n2 <= SCHOOLBOOK_WORK_WRAP:
            return 0, "wrap", False
        if bound < 2**127 and facts.n1 * facts.n2 <= SCHOOLBOOK_WORK_128:
            return 0, "128", True
        return prime_count(bound, n_full), False, not magnitude_fits_int64(bound)
    if is_ntt_prime(m) and n_full <= max_length(m):
        return 1, False, False
    k = prime_count(min(facts.n1, facts.n2) * (m - 1) ** 2, n_full, signed=False)
    return k, False, m >= 2**62


def option(job: Job) -> Option | str:
    """The batched engine's offer, or why it does not take this job."""
    state = jit_state.state()
    if state == "unavailable":
        return f"compiled engines unavailable: {jit_state.reason()}"
    facts = job.facts
    if not magnitude_fits_int64(max(facts.max_a, facts.max_b)):
        return "operands beyond int64 (the batched kernels read int64 rows)"
    if job.n_full > MAX_ROW_TRANSFORM:
        return (f"rows needing {job.n_full}-point transforms (more than {MAX_ROW_TRANSFORM}) "
                "go to ntt-compiled")
    k, wrap, objects_out = _primes(facts, job.n_full)
    if not wrap and k == 0:
        return "the coefficient bound needs more NTT primes than the kernels have"
    exact = job.costs["exact"]
    c = {**DEFAULTS, **exact.get("ntt_batch", {})}
    t = {**NTT_DEFAULTS, **exact.get("ntt_compiled", {})}
    j = {**JIT_DEFAULTS, **exact.get("jit", {})}
    charge = {"compiled": 0.0, "cached": j["load_seconds"]}.get(state, j["compile_seconds"])
    n1, n2, n = job.n1, job.n2, job.n_full
    if wrap == "wrap":
        per_row = c["per_mac_wrap"] * n1 * n2
        what = "schoolbook sums in wrapping 64-bit arithmetic"
    elif wrap:
        per_row = c["per_mac_128"] * n1 * n2 + t["per_object_out"] * job.out_len
        what = "schoolbook sums in 128-bit arithmetic, Python ints out"
    else:
        if n1 * n2 <= SCHOOLBOOK_WORK:
            per_prime, how = c["per_mac_mod"] * n1 * n2, "schoolbook"
        else:
            per_prime, how = t["per_nlogn"] * n * math.log2(n) + t["per_point"] * n, "NTT"
        per_row = k * per_prime + crt_seconds(t, k, job.out_len, facts.modulus)
        if objects_out:
            per_row += (t["per_object_out"] + t["per_object_digit"] * k * k) * job.out_len
        what = f"{how} products modulo {'one prime' if k == 1 else f'{k} primes, Garner CRT'}"
    # one row of transforms runs as ntt-compiled's one product would (it delegates), with
    # that engine's overhead: the one-product engine keeps such jobs (measured 0-20% faster)
    c0 = c["overhead"] if wrap or job.rows > 1 else max(c["overhead"], t["overhead"])
    seconds = charge + c0 + job.rows * (c["per_row"] + per_row)
    note = f"{job.rows} row(s) in one compiled call: {what}; {jit_state.reason()}"
    if charge:
        note += f" ({charge:.2g} s charged)"
    return Option(seconds, "construction", note, {"ntt_bound": product_bound(facts)})


def run_rows(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray | None:
    """The plan's products of the rows of ``(r, n1)`` and ``(r, n2)`` stacks (one call);
    None when the kernels turned out not to load."""
    try:
        if plan.modulus is not None:
            return multiply_rows_mod(a, b, plan.modulus, keep)
        return multiply_rows_exact(a, b, plan.setting("ntt_bound"), keep,
                                   as_int64=plan.output_int64)
    except jit_state.JitUnavailableError:
        return None


ENGINE = Engine(NAME, INTEGER_KINDS, option, run_rows, exact=True, reduces_modulus=True,
                when_unavailable="direct-exact", batched=True)
