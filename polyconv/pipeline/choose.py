"""The chooser: one loop over the engine registry, the fastest capable engine, and why.

The chooser never computes a product.  It describes the product once
(:class:`polyconv.engines._common.Job`: lengths, batch, mode, the cost table of
:mod:`polyconv.tuning.costs`, and for integers the :class:`~polyconv.pipeline.facts.IntegerFacts`),
asks every engine of :data:`polyconv.engines.registry.REGISTRY` that serves the operand kind for
its offer (predicted seconds from its cost formula, certificate, parameters) or its refusal, and
returns a :class:`Plan` naming the fastest (or the one the caller forced with ``method=``) with
one sentence saying why.

Certificates of exact plans: ``"construction"`` (exact integer arithmetic), ``"bound"`` (a float
FFT whose rigorous error bound, Percival 2003, is below 1/2), ``"check"`` (a float FFT whose bound
is a little above 1/2: the rounded result is accepted only after a random-evaluation check, else
recomputed by the plan's ``fallback``).  With a modulus, operands are reduced to ``[0, m)``
first and outputs last.
"""

from __future__ import annotations

import dataclasses
import math
from functools import lru_cache

from ..engines import jit_state
from ..engines._common import Job, Option
from ..engines.registry import REGISTRY
from ..numerics import bounds
from ..numerics.limits import residues_fit_int64
from ..tuning import costs as _costs
from ..tuning.costs import load_costs
from ..tuning.threads import THREADS
from .plan import Plan, check_method, engine_settings, format_seconds, output_length

#: Seconds of the runner's Python per row when an exact engine runs row by row (measured:
#: 100 rows of 8 x 8 through direct-exact, 12-20 us per row); ``exact.per_row_call`` in a cost
#: table overrides it.
ROW_CALL_SECONDS = 1.2e-5

#: Option settings that are Plan fields rather than ``Plan.settings`` entries.
_PLAN_FIELDS = ("transform_length", "block_length", "threads", "error_bound")


def choose(kind: str, n1: int, n2: int, batch_a: tuple, batch_b: tuple, batch: tuple,
           mode: str = "full", method: str = "auto", keep: int | None = None,
           facts=None) -> Plan:
    """Ask every engine serving ``kind`` for its offer and return the Plan for the chosen one.

    Plans are immutable and depend only on these arguments, the cost table in force and the
    state of the compiled kernels, so they are memoised (repeated calls on same-shaped data cost
    a dictionary look-up).

    Parameters
    ----------
    kind : str
        Operand kind from :func:`polyconv.pipeline.inputs.prepare_pair`.
    n1, n2 : int
        Operand lengths along the convolution axis.
    batch_a, batch_b, batch : tuple of int
        Leading shapes of ``a``, ``b`` and their broadcast.
    mode : str
        Validated mode.
    method : str
        ``"auto"`` or an engine name.
    keep : int, optional
        Entries of the full product needed (default all ``n1 + n2 - 1``).
    facts : IntegerFacts, optional
        For integer kinds (:func:`polyconv.pipeline.facts.integer_facts`).

    Raises
    ------
    ValueError
        If ``method`` is unknown or cannot run here; the message names the reason.
    """
    check_method(method)
    if _costs.generation == 0:
        load_costs()
    state = jit_state.state() if facts is not None else ""
    return _choose_cached(_costs.generation, kind, n1, n2, batch_a, batch_b, batch, mode, method,
                          keep, facts, state)


@lru_cache(maxsize=4096)
def _choose_cached(generation: int, kind: str, n1: int, n2: int, batch_a: tuple, batch_b: tuple,
                   batch: tuple, mode: str, method: str, keep: int | None, facts,
                   jit_state_now: str) -> Plan:
    out_len = output_length(mode, n1, n2) if keep is None else keep
    job = Job(kind, n1, n2, batch_a, batch_b, batch, mode, out_len, load_costs(), THREADS, facts)
    options: dict[str, Option] = {}
    refusals: dict[str, str] = {}
    for name, engine in REGISTRY.items():
        if kind in engine.kinds:
            offer = engine.option(job)
            if isinstance(offer, Option) and engine.exact and not engine.batched and job.rows > 1:
                # the runner calls a row-by-row engine once per row: its Python per row counts
                offer = dataclasses.replace(offer, seconds=offer.seconds + (job.rows - 1) * float(
                    job.costs["exact"].get("per_row_call", ROW_CALL_SECONDS)))
            if isinstance(offer, Option):
                options[name] = offer
            else:
                refusals[name] = offer
    if method != "auto" and method not in options:
        raise ValueError(_refusal(method, kind, refusals))
    ranked = tuple(sorted(((name, o.seconds) for name, o in options.items()),
                          key=lambda kv: kv[1]))
    name = ranked[0][0] if method == "auto" else method
    chosen, engine = options[name], REGISTRY[name]
    settings = dict(chosen.settings)
    if engine.exact:
        settings["product_int64"] = job.fits_int64
    fields = {k: settings.pop(k) for k in _PLAN_FIELDS if k in settings}
    fields.pop("error_bound", None)
    common = dict(kind=kind, mode=mode, lengths=(n1, n2), batch_shape=batch,
                  output_length=out_len, transform_length=fields.get("transform_length"),
                  threads=fields.get("threads", 1), alternatives=ranked,
                  settings=engine_settings(name, settings))
    if not engine.exact:
        return Plan(name, False, "none", math.inf, chosen.seconds,
                    _float_reason(name, method, ranked),
                    block_length=fields.get("block_length"), **common)
    fallback = None
    if chosen.certificate == "check":
        fallback = min((n for n in options if REGISTRY[n].check_fallback),
                       key=lambda n: options[n].seconds)
    m = job.modulus
    return Plan(name, True, chosen.certificate, 0.0, chosen.seconds,
                _exact_reason(name, method, chosen, options, fallback), fallback=fallback,
                modulus=m, output_int64=bool(job.fits_int64 if m is None
                                             else residues_fit_int64(m)), **common)


def _float_reason(name: str, method: str, ranked: tuple) -> str:
    if method != "auto":
        return f"{name} was requested with method={method!r}"
    reason = f"{name} is predicted fastest ({format_seconds(ranked[0][1])}"
    if len(ranked) > 1:
        return reason + f"; next {ranked[1][0]} {format_seconds(ranked[1][1])})"
    return reason + ")"


def _exact_reason(name: str, method: str, chosen: Option, options: dict, fallback) -> str:
    why = (f"{name} is predicted fastest among exact engines" if method == "auto"
           else f"{name} was requested with method={method!r}")
    reason = f"{why} ({chosen.note})"
    for other, engine in REGISTRY.items():
        if engine.remark is not None and engine.exact:
            reason += engine.remark(name, other in options)
    if fallback:
        reason += f"; if the check fails: {fallback}"
    if not bounds.TWIDDLE_CERTIFIED:
        reason += f"; {bounds.TWIDDLE_NOTE}"
    return reason


def _refusal(method: str, kind: str, refusals: dict) -> str:
    """Why ``method`` cannot run on ``kind`` operands: the engine's own reason, else its kind."""
    if method in refusals:
        return f"method={method!r} cannot run here: {refusals[method]}"
    if REGISTRY[method].exact:
        return f"method={method!r} is an exact integer engine; a and b hold {kind} numbers"
    exact = ", ".join(name for name, e in REGISTRY.items() if kind in e.kinds)
    return (f"method={method!r} is a floating-point engine; integer operands are computed "
            f"exactly with one of {exact} (or 'auto')")
