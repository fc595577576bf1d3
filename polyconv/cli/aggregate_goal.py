"""``[goal]`` of an ``aggregate`` spec: name the measures and their precision, the grid follows.

Format (keys are polyconv's own)::

    [goal]
    var = [0.995]            # VaR levels whose certified range must meet the precision
    tvar = [0.995]           # TVaR levels
    stop_loss = [1.0e6]      # stop-loss retentions d of E[(S - d)+]
    rtol = 1e-4              # largest relative width of each range (default 1e-4 ...
    atol = 0.0               # ... or 0 when atol is given); a range passes within either
    max_points = 4194304     # memory budget of one grid (default 2^22 points)

The library (:func:`polyconv.dist.tail_splice.spliced_aggregate`) chooses the grid: a light tail
gets one grid doubled until every range is narrow enough (:func:`polyconv.dist.
aggregate_for_goal`); a heavy tail (lognormal, Pareto-type) a fine grid for the body plus coarse
grids bracketing the far tail.  With a goal, ``[grid] step`` is optional (absent: chosen from a
pilot VaR so that the grid's resolution meets ``rtol``) and the grid size is the goal's, so
``[grid] points`` and ``[grid] max_points`` are refused together with a ``[goal]``.  A goal needs
one line with a continuous severity law (a scipy.stats law, splice or mixture, with modifiers),
no ``[cover]``, ``[reinsurance]`` or claims per occurrence.

Each goal measure is a report row ``goal: VaR 99.5%`` with its certified range and the status
``met`` or ``refused: reason`` (range wider than the goal after the library's refinements).
The ranges are those of the lattice model of the severity (its discretisation by ``[grid]
rule`` is a modelling step, see :func:`polyconv.dist.law_bracket`).

Caution: a model output, not advice; defer to local regulation and licensed actuarial practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..dist import Goal, Lattice
from ..dist.goals import MAX_POINTS, MIN_POINTS
from ..dist.tail_splice import spliced_aggregate
from . import aggregate_laws as al
from . import aggregate_line as line_mod
from .bounded_rows import GoalRow, MeasureRow
from .report import collect_warnings, fmt, level_name, number_name
from .spec import Section

GOAL_KEYS = ("var", "tvar", "stop_loss", "rtol", "atol", "max_points")
CONFLICTS = ("lines", "cover", "reinsurance")
"""Top-level tables a goal cannot be combined with."""
NAMES = {"var": "VaR", "tvar": "TVaR"}
MASS_HINT = "loosen goal.rtol / goal.atol, give a larger grid.step or raise goal.max_points"


@dataclass(frozen=True)
class GoalSpec:
    """A validated ``[goal]`` table."""

    goal: Goal
    step_given: bool


def parse_goal(root: Section) -> GoalSpec | None:
    """The ``[goal]`` table of a spec (None without one); refuses what a goal cannot go with."""
    if not root.has("goal"):
        return None
    sec = root.table("goal")
    sec.check_keys(GOAL_KEYS)
    measures = []
    for m in ("var", "tvar"):
        levels = sec.numbers(m, [], minimum=0.0, below=1.0, nonempty=False)
        if any(p <= 0 for p in levels):
            raise sec.error(m, "levels must lie strictly between 0 and 1 (e.g. 0.995)")
        measures += [(m, p) for p in levels]
    measures += [("stop_loss", d) for d in sec.numbers("stop_loss", [], minimum=0.0,
                                                       nonempty=False)]
    if not measures:
        raise sec.error(None, "must name at least one measure: var, tvar or stop_loss")
    atol = sec.number("atol", 0.0, minimum=0.0)
    rtol = sec.number("rtol", 0.0 if sec.has("atol") else 1e-4, minimum=0.0)
    if rtol == 0 and atol == 0:
        raise sec.error("rtol" if sec.has("rtol") else "atol", "rtol and atol cannot both be 0")
    max_points = sec.integer("max_points", MAX_POINTS, minimum=MIN_POINTS, maximum=1 << 24)
    for key in CONFLICTS:
        if root.has(key):
            raise root.error(key, f"cannot be combined with [goal] (a goal sizes the grid of "
                             f"one line without cover or reinsurance); remove '{key}' or "
                             "'goal'")
    grid = root.table("grid", {})
    for key in ("points", "max_points"):
        if grid.has(key):
            raise grid.error(key, f"give either grid.{key} or a [goal] (the goal chooses the "
                             "grid size), not both")
    claims = root.table("claims", {})
    if claims.has("per_occurrence"):
        raise claims.error("per_occurrence", "cannot be combined with [goal]; remove "
                           "'claims.per_occurrence' or 'goal'")
    sev = root.table("severity", {})
    if sev.has("claims_file") or (not sev.has("law") and (sev.has("values")
                                                          or sev.has("samples"))):
        raise sev.error(None, "a [goal] needs a continuous severity law ('law' with 'params', "
                        "a splice or a mixture), not a table or a claims file")
    return GoalSpec(Goal(tuple(measures), rtol=rtol, atol=atol, max_points=max_points),
                    grid.has("step"))


def compute_goal_line(line: line_mod.LineSpec, spec: GoalSpec, currency: str, steps=None
                      ) -> tuple[line_mod.LineResult, list[MeasureRow]]:
    """The line on the grid chosen for the goal, and one :class:`GoalRow` per goal measure.

    Sets ``line.step`` to the step used (given or chosen).  Library errors become spec errors
    naming ``grid.rule`` (a rule the split grids cannot use) or ``goal``.
    """
    notes: list[str] = list(line.counts.caveats)
    doc = line.severity.doc
    law = al.continuous_law(line.severity)
    with collect_warnings(notes):
        if steps:
            steps.step(f"grid for the goal ({line.name})")
        try:
            res = spliced_aggregate(line.counts.law, law, goal=spec.goal, step=line.step,
                                    rule=line.rule, method=line.method)
        except (ValueError, TypeError) as exc:
            key = ("grid", "rule") if "rule" in str(exc) else ("goal",)
            raise doc.error(key, str(exc)) from None
        if steps:
            steps.step(f"severity on the chosen grid ({line.name})")
        line.step = res.step
        fine = res.lattice
        per_claim = Lattice.from_law(law, step=res.step, size=max(len(fine), 2), rule=line.rule)
    chosen = "given" if spec.step_given else "chosen from a pilot VaR"
    far = ", ".join(f"{n} points of step {fmt(k)}" for k, n in res.levels)
    notes.append(f"grid chosen for the goal (rtol {spec.goal.rtol:g}, atol "
                 f"{spec.goal.atol:g}): step {fmt(res.step)} {currency} ({chosen}), "
                 f"{len(fine)} points" + (f"; far tail bracketed on {far}" if far else ""))
    out = line_mod.LineResult(line, per_claim, al.describe(line.severity), fine, fine,
                              severity_mean=al.exact_mean(line.severity),
                              per_occurrence=per_claim, notes=notes)
    out.checks = line_mod.mean_checks(out, per_claim)
    out.goal_grid = {"rtol": spec.goal.rtol, "atol": spec.goal.atol,
                     "max_points": spec.goal.max_points, "step": res.step,
                     "step_source": "given" if spec.step_given else "pilot VaR",
                     "points": len(fine),
                     "far_tail": [{"step": k, "points": n} for k, n in res.levels]}
    return out, goal_rows(res.answers, currency)


def goal_rows(answers: dict, currency: str) -> list[MeasureRow]:
    """``(measure, arg) -> Bounded`` as report rows (keys ``goal_var``, ``goal_tvar``,
    ``goal_stop_loss``)."""
    rows: list[MeasureRow] = []
    for (m, a), b in answers.items():
        if m == "stop_loss":
            label, arg_name = f"goal: stop-loss E[(S - {number_name(a)})+]", "retention"
        else:
            label, arg_name = f"goal: {NAMES[m]} {level_name(a)}", "level"
        value = float(b.value)
        if not b.refused and math.isfinite(b.low) and math.isfinite(b.high):
            # the range holds the exact lattice answer; a lattice-only value may lie just
            # outside it (TVaR without the moment beyond the grid): shown at the range's edge
            value = min(max(value, float(b.low)), float(b.high))
        rows.append(GoalRow(f"goal_{m}", label, currency, arg_name, a, value,
                            float(b.low), float(b.high), bool(b.refused), str(b.reason)))
    return rows


def replaced(rows: list[MeasureRow], goal_rows_: list[MeasureRow]) -> list[MeasureRow]:
    """``rows`` without the measures that a goal row answers (same measure and argument)."""
    asked = {(r.key[len("goal_"):], r.argument) for r in goal_rows_}
    return [r for r in rows if (r.key, r.argument) not in asked]
