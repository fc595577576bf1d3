"""``[goal]`` of a ``delays`` spec: percentiles of the continuous model to a stated precision.

Format (keys are polyconv's own)::

    [goal]
    percentiles = [99.9]     # percentiles whose bracket must meet the precision
    atol = 0.1               # largest width of each bracket, in the grid's unit (e.g. 0.1 ms)
    rtol = 0.0               # and/or relative width; a bracket passes within either
    halvings = 8             # most times grid.step is halved (default 8)

"p99.9 to 0.1 ms": the network is evaluated with every stage's law put on the grid by the rules
"down" and "up" (stochastic lower and upper discretisations); since every block is a
non-decreasing function of its stages' delays, the percentile of the continuous model lies
between the low end of the "down" network and the high end of the "up" one
(:func:`polyconv.dist.bracket_to_goal`).  ``grid.step`` (optional with a goal; absent: ``atol``)
is the first step tried, halved until every bracket is narrow enough; the report then uses
the finest step needed, and each goal percentile is a row ``goal: p99.9`` with its bracket and
the status ``met`` or ``refused: reason``.  The grid's size still comes from the used stages.
A bracket needs continuous laws: a goal is refused when a used stage is measured or a table.

Caution: model output; check deadlines and margins against the applicable engineering codes
and a qualified engineer's review.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from copy import copy

from ..dist import bracket_to_goal
from .bounded_rows import GoalRow, MeasureRow
from .delays_eval import DelayResult, compute
from .delays_spec import DelaySpec, block_kind, leaf_form, used_sections
from .delays_spec import parse as parse_plain
from .report import collect_warnings, fmt, percent_level, percentile_name
from .spec import SpecDoc

GOAL_KEYS = ("percentiles", "atol", "rtol", "halvings")


@dataclasses.dataclass(frozen=True)
class DelayGoal:
    """A validated ``[goal]`` table of a delays spec."""

    percentiles: tuple
    atol: float
    rtol: float
    halvings: int
    step_given: bool = True


@dataclasses.dataclass
class GoalDelaySpec(DelaySpec):
    """A delays spec with its goal."""

    goal: DelayGoal | None = None


def parse(doc: SpecDoc) -> DelaySpec:
    """:func:`polyconv.cli.delays_spec.parse` plus the ``[goal]`` table (module docstring)."""
    root = doc.root()
    if not root.has("goal"):
        return parse_plain(doc)
    sec = root.table("goal")
    sec.check_keys(GOAL_KEYS)
    qs = sec.numbers("percentiles", minimum=0.0, maximum=100.0)
    if any(not 0 < q < 100 for q in qs):
        raise sec.error("percentiles", "must lie strictly between 0 and 100 (e.g. 99.9)")
    atol = sec.number("atol", 0.0, minimum=0.0)
    rtol = sec.number("rtol", 0.0, minimum=0.0)
    if atol == 0 and rtol == 0:
        raise sec.error("atol", "give a positive atol (in the grid's unit) or rtol")
    halvings = sec.integer("halvings", 8, minimum=0, maximum=20)
    plain = copy(doc)
    plain.data = {k: v for k, v in doc.data.items() if k != "goal"}
    grid = root.table("grid", {})
    if not grid.has("step"):  # the step is chosen: first try atol (module docstring)
        if atol == 0:
            raise sec.error("atol", "without grid.step, give atol (the first step tried)")
        plain.data["grid"] = {**grid.data, "step": atol}
    spec = parse_plain(plain)
    for name, stage in used_sections(spec).items():
        if block_kind(stage) == "leaf" and leaf_form(stage) != "law":
            raise sec.error(None, f"a goal brackets continuous laws; stage '{name}' is "
                            f"{leaf_form(stage)} (remove [goal] or give the stage a law)")
    fields = {f.name: getattr(spec, f.name) for f in dataclasses.fields(DelaySpec)}
    return GoalDelaySpec(**fields, goal=DelayGoal(tuple(qs), atol, rtol, halvings,
                                                         grid.has("step")))


def compute_with_goal(spec: DelaySpec, steps=None) -> DelayResult:
    """:func:`polyconv.cli.delays_eval.compute` at the step meeting the goal, with goal rows."""
    goal = getattr(spec, "goal", None)
    if goal is None:
        return compute(spec, steps)
    fields = {f.name: getattr(spec, f.name) for f in dataclasses.fields(DelaySpec)}
    base = dataclasses.replace(DelaySpec(**fields), speedup=None, target=None,
                               mission_times=[], sensitivity_percentiles=[])
    built: dict = {}

    def make(rule: str, h: float):
        if (rule, h) not in built:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                built[(rule, h)] = compute(dataclasses.replace(base, step=h, rule=rule)).total
        return built[(rule, h)]

    notes: list[str] = []
    brackets = []
    with collect_warnings(notes):
        for q in goal.percentiles:
            brackets.append(bracket_to_goal(make, "quantile", percent_level(q), step=spec.step,
                                            atol=goal.atol, rtol=goal.rtol,
                                            halvings=goal.halvings))
    h = min(b.step for b in brackets)
    fields["step"] = h
    res = compute(DelaySpec(**fields), steps)
    rows = [goal_row(q, b, res, spec.unit, goal) for q, b in zip(goal.percentiles, brackets,
                                                                strict=True)]
    asked = set(goal.percentiles)
    res.rows = rows + [r for r in res.rows if not (r.key == "percentiles"
                                                   and r.argument in asked)]
    res.goal_grid = {"atol": goal.atol, "rtol": goal.rtol, "step": h,
                     "step_source": "grid.step" if goal.step_given else "goal.atol",
                     "start_step": spec.step, "halvings": round(math.log2(spec.step / h)),
                     "brackets": [{"percentile": q, "low": b.low, "high": b.high,
                                   "step": b.step, "met": bool(b.met)}
                                  for q, b in zip(goal.percentiles, brackets, strict=True)]}
    res.notes = notes + res.notes + [
        f"step chosen for the goal (atol {goal.atol:g}, rtol {goal.rtol:g}): {fmt(h)} "
        f"{spec.unit}, from {'grid.step' if goal.step_given else 'goal.atol'} "
        f"{fmt(spec.step)} halved "
        f"{round(math.log2(spec.step / h))} times; percentiles bracketed between the "
        "networks of the 'down' and 'up' rules"]
    return res


def goal_row(q: float, b, res: DelayResult, unit: str, goal: DelayGoal) -> MeasureRow:
    """The row of one goal percentile: the report lattice's own percentile, the bracket."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        value = float(res.total.quantile(percent_level(q)))
    reason = "" if b.met else (f"bracket [{b.low:.6g}, {b.high:.6g}] at step {b.step:g} is "
                               f"wider than the goal (atol {goal.atol:g}, rtol {goal.rtol:g})")
    return GoalRow("goal_percentiles", f"goal: {percentile_name(q)}", unit, "percentile", q,
                   value if b.met else math.nan, b.low, b.high, not b.met, reason)
