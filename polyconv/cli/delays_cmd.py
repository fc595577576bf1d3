"""``polyconv delays``: the end-to-end delay of a network of stages, from a TOML spec.

Spec format (polyconv's own keys; unknown keys are refused)::

    title = "Larkspur Parcel: order to dispatch"     # optional
    unit = "ms"                                      # optional label of times (default "units")

    [grid]
    step = 1.0                        # common time step (required)
    max_points = 1048576              # optional cap of one stage's grid
    rule = "nearest"                  # "nearest" | "down" | "up" | "moments"

    [report]                          # optional
    percentiles = [50, 90, 99, 99.9]
    deadlines = [250.0, 400.0]        # miss probability P(delay > deadline) for each

    [network]                         # what is evaluated: a block like those below
    in_sequence = ["accept", "checks", "dispatch"]

    [stage.accept]                    # a single stage: a law ...
    law = "gamma"
    params = { a = 3.0, scale = 4.0 }

    [stage.pick]                      # ... or observed samples, or values + probabilities/counts
    samples = [31, 35, 29, 44, 38]

    [stage.checks]                    # parallel branches, wait for all of them (maximum)
    all_of = ["pick", "charge"]

    [stage.dispatch]                  # parallel branches, take the first to finish (minimum)
    first_of = ["courier_a", "courier_b"]

    [stage.charge]                    # one branch at random with these weights (sum to 1)
    one_of = { fast = 0.93, manual_review = 0.07 }

A block is exactly one of: a law (``law`` + ``params``), ``samples``, ``values`` with
``probabilities`` or ``counts``, ``in_sequence``, ``all_of``, ``first_of`` or ``one_of``.  Names
refer to ``[stage.NAME]`` tables; a name used twice stands for two independent draws of that stage.

Outputs in the report folder (see :mod:`polyconv.cli.distribution_report`): ``summary.md``,
``summary.json``, ``delays.csv`` (delay, probability, cdf, exceedance), ``measures.csv`` (every
measure with its certified range and status) and ``delays.png``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from ..dist import Lattice, all_of, first_of, mixture, series
from . import distribution_report as skeleton
from . import grid_mass, laws
from .bounded_rows import MeasureRow, ask
from .fileio import ReportFolder
from .progress import Steps
from .report import (
    caution,
    collect_warnings,
    fmt_prob,
    number_name,
    percent_level,
    percentile_name,
)
from .spec import Section, SpecDoc

DEFAULT_PERCENTILES = (50.0, 90.0, 99.0, 99.9)
COMBINATORS = ("in_sequence", "all_of", "first_of", "one_of")
RULES = ("nearest", "down", "up", "moments")
ROOT = "(network)"
"""Internal name of the evaluated block (stage names are letters, digits, '_' and '-')."""

EXAMPLE = """example:
  polyconv delays pipeline.toml -o pipeline-report
  polyconv delays pipeline.toml --json

a minimal spec (pipeline.toml):
  unit = "ms"
  [grid]
  step = 1.0
  [report]
  deadlines = [120.0]
  [network]
  in_sequence = ["parse", "lookup"]
  [stage.parse]
  law = "gamma"
  params = { a = 2.0, scale = 5.0 }
  [stage.lookup]
  first_of = ["replica_a", "replica_b"]
  [stage.replica_a]
  law = "lognorm"
  params = { s = 0.6, scale = 30.0 }
  [stage.replica_b]
  samples = [22, 35, 41, 28, 90, 33]

Write 'polyconv demo' to see a full spec (polyconv-demo/larkspur_pipeline.toml).
"""


def register(sub) -> None:
    """Add the ``delays`` sub-command to ``sub``."""
    skeleton.add_spec_command(
        sub, name="delays",
        help="end-to-end delay of a network of stages from a TOML spec",
        description=(
            "Combine stage delays (in sequence, parallel wait-for-all, parallel "
            "first-to-finish, weighted branches) on a common time grid and write percentiles, "
            "deadline-miss probabilities, the distribution as CSV and a figure."),
        epilog=EXAMPLE, run=run)


# ------------------------------------------------------------------------------------ spec


@dataclass
class DelaySpec:
    """A validated delays spec."""

    doc: SpecDoc
    title: str
    unit: str
    step: float
    max_points: int
    rule: str
    percentiles: list[float]
    deadlines: list[float]
    network: Section
    stages: dict[str, Section]


def parse(doc: SpecDoc) -> DelaySpec:
    """Validate a parsed spec; the network's references are checked here too."""
    root = doc.root()
    root.check_keys(("title", "unit", "grid", "report", "network", "stage"))
    title = root.string("title", "Delay network")
    unit = root.string("unit", "units")
    grid = root.table("grid")
    grid.check_keys(("step", "max_points", "rule"))
    step = grid.number("step", positive=True)
    max_points = grid.integer("max_points", 1 << 20, minimum=2, maximum=1 << 24)
    rule = grid.string("rule", "nearest", RULES)
    rep = root.table("report", {})
    rep.check_keys(("percentiles", "deadlines"))
    percentiles = rep.numbers("percentiles", list(DEFAULT_PERCENTILES), minimum=0.0,
                              maximum=100.0)
    if any(not 0 < q < 100 for q in percentiles):
        raise rep.error("percentiles", "must lie strictly between 0 and 100 (e.g. 99.9)")
    deadlines = rep.numbers("deadlines", [], minimum=0.0, nonempty=False)
    network = root.table("network")
    stage_table = root.table("stage", {})
    stages = {}
    for name in stage_table.keys():
        if not re.fullmatch(r"[A-Za-z0-9_-]+", name):
            raise stage_table.error(name, "stage names may hold only letters, digits, '_' "
                                    "and '-'")
        stages[name] = stage_table.table(name)
    spec = DelaySpec(doc, title, unit, step, max_points, rule, percentiles,
                     deadlines, network, stages)
    _check_graph(spec)
    return spec


def block_kind(sec: Section) -> str:
    """``"in_sequence"``, ``"all_of"``, ``"first_of"``, ``"one_of"`` or ``"leaf"``."""
    present = [k for k in COMBINATORS if sec.has(k)]
    if len(present) > 1:
        raise sec.error(present[1], f"a block is one thing: '{present[0]}' and '{present[1]}' "
                        "cannot be combined (make a named stage for one of them)")
    if present:
        sec.check_keys((present[0],))
        return present[0]
    laws.describe_kind(sec)
    return "leaf"


def children(sec: Section, kind: str) -> list[tuple[str, tuple]]:
    """``(name, key path)`` of each block a combinator refers to."""
    if kind == "one_of":
        weights = sec.table("one_of")
        if not weights.keys():
            raise sec.error("one_of", "must name at least one branch with its weight")
        return [(name, sec.path + ("one_of", name)) for name in weights.keys()]
    names = sec.strings(kind)
    return [(name, sec.path + (kind, i)) for i, name in enumerate(names)]


def branch_weights(sec: Section) -> list[float]:
    """The weights of a ``one_of`` block, checked to sum to 1 (within 1e-9; not renormalised)."""
    table = sec.table("one_of")
    weights = [table.number(n, minimum=0.0) for n in table.keys()]
    total = math.fsum(weights)
    if abs(total - 1.0) > 1e-9:
        raise sec.error("one_of", f"weights must sum to 1 (they sum to {total!r}); "
                        "polyconv does not renormalise them")
    return weights


def _check_graph(spec: DelaySpec) -> None:
    """Unknown names and cycles are spec errors naming the key."""
    state: dict[str, str] = {}

    def visit(sec: Section, name: str | None) -> None:
        kind = block_kind(sec)
        if kind == "leaf":
            return
        if kind == "one_of":
            branch_weights(sec)
        for child, path in children(sec, kind):
            if child not in spec.stages:
                known = ", ".join(sorted(spec.stages)) or "none"
                raise spec.doc.error(path, f"names the stage {child!r}, which is not defined "
                                     f"(define [stage.{child}]; defined: {known})")
            if state.get(child) == "open":
                raise spec.doc.error(path, f"stage {child!r} contains itself (a cycle)")
            if state.get(child) != "done":
                state[child] = "open"
                visit(spec.stages[child], child)
                state[child] = "done"

    visit(spec.network, None)


# ------------------------------------------------------------------------------- compute


@dataclass
class DelayResult:
    """Everything the report shows."""

    spec: DelaySpec
    total: Lattice
    stages: dict[str, Lattice]
    descriptions: dict[str, str]
    rows: list[MeasureRow]
    stage_rows: dict[str, list[MeasureRow]]
    notes: list[str] = field(default_factory=list)


def count_blocks(spec: DelaySpec) -> int:
    """Blocks evaluated (for the progress bar)."""
    return len(spec.stages) + 1


def _used_sections(spec: DelaySpec) -> list[Section]:
    """The network and every stage reachable from it (an unused stage decides nothing)."""
    seen: set[str] = set()
    out = [spec.network]
    todo = [spec.network]
    while todo:
        sec = todo.pop()
        kind = block_kind(sec)
        if kind == "leaf":
            continue
        for child, _ in children(sec, kind):
            if child not in seen and child in spec.stages:
                seen.add(child)
                out.append(spec.stages[child])
                todo.append(spec.stages[child])
    return out


def horizon(spec: DelaySpec, notes: list[str]) -> int:
    """One grid length for every continuous stage: the longest any stage needs.

    A join (``all_of``) or race (``first_of``) can only be evaluated where all its branches are
    known; a continuous stage cut at its own ``1 - 1e-12`` quantile would cut short a branch
    with a longer empirical tail.  Discretising every continuous stage as far as the longest
    stage reaches avoids that (capped at ``grid.max_points``).
    """
    leaves = [sec for sec in _used_sections(spec) if block_kind(sec) == "leaf"]
    need = max((laws.natural_points(sec, spec.step) for sec in leaves), default=2)
    if need > spec.max_points:
        notes.append(f"stage grids cut at grid.max_points = {spec.max_points} points "
                     f"({spec.max_points * spec.step:g} {spec.unit})")
        return spec.max_points
    return int(need)


def compute(spec: DelaySpec, steps: Steps | None = None) -> DelayResult:
    """Evaluate the network bottom-up (each named stage once) and measure the total."""
    notes: list[str] = []
    done: dict[str, Lattice] = {}
    descriptions: dict[str, str] = {}

    def evaluate(sec: Section, name: str) -> Lattice:
        kind = block_kind(sec)
        if kind == "leaf":
            if steps:
                steps.step(f"stage {name}")
            built = laws.build(sec, spec.step, rule=spec.rule,
                               max_points=spec.max_points, points=points)
            notes.extend(f"stage {name}: {n}" for n in built.notes)
            descriptions[name] = built.description
            grid_mass.require_mass(built.lattice, 0.0, *grid_mass.leaf_fail(sec),
                                  f"stage {name} ({built.description})", spec.unit)
            return built.lattice
        parts = []
        for child, _ in children(sec, kind):
            if child not in done:
                done[child] = evaluate(spec.stages[child], child)
            parts.append(done[child])
        if steps:
            steps.step(f"combine {name}")
        names = [c for c, _ in children(sec, kind)]
        if kind == "in_sequence":
            descriptions[name] = "in sequence: " + " -> ".join(names)
            return series(*parts)
        if kind == "all_of":
            descriptions[name] = "wait for all of: " + ", ".join(names)
            return all_of(*parts)
        if kind == "first_of":
            descriptions[name] = "first to finish of: " + ", ".join(names)
            return first_of(*parts)
        weights = branch_weights(sec)
        total = math.fsum(weights)
        descriptions[name] = "one of: " + ", ".join(f"{n} ({w:g})" for n, w in
                                                     zip(names, weights, strict=True))
        return mixture([w / total for w in weights], parts)

    with collect_warnings(notes):
        points = horizon(spec, notes)
        total = evaluate(spec.network, ROOT)
        grid_mass.require_mass(total, percent_level(min(spec.percentiles)),
                              lambda message: spec.doc.error(("grid", "max_points"), message),
                              "raise grid.max_points (or choose a larger grid.step)",
                              "the end-to-end delay", spec.unit)
        if steps:
            steps.step("percentiles")
        rows = measure_rows(spec, total)
        stage_rows = {name: stage_measures(lat, spec.unit) for name, lat in done.items()}
    return DelayResult(spec, total, done, descriptions, rows, stage_rows, notes)


def measure_rows(spec: DelaySpec, total: Lattice) -> list[MeasureRow]:
    """Mean, sd, percentiles and deadline-miss probabilities of the end-to-end delay, each the
    lattice's own answer with its certified range."""
    u = spec.unit
    rows = [ask(total, "mean", key="mean", label="mean", unit=u),
            ask(total, "std", key="sd", label="standard deviation", unit=u)]
    rows += [ask(total, "quantile", percent_level(q), key="percentiles", label=percentile_name(q),
                 unit=u, argument_name="percentile", argument=q) for q in spec.percentiles]
    rows += [ask(total, "sf", d, key="miss_probability",
                 label=f"P(delay > {number_name(d)} {u})", unit="", argument_name="deadline")
             for d in spec.deadlines]
    return rows


def stage_measures(lat: Lattice, unit: str) -> list[MeasureRow]:
    """Mean, median and p99 of one stage."""
    return [ask(lat, "mean", key="mean", label="mean", unit=unit),
            ask(lat, "quantile", 0.5, key="p50", label="p50", unit=unit),
            ask(lat, "quantile", 0.99, key="p99", label="p99", unit=unit)]


# -------------------------------------------------------------------------------- report


def caution_lines(res: DelayResult) -> list[str]:
    """The caution with this run's assumptions."""
    return caution(
        independence="every stage and parallel branch is independent of the others; shared "
        "hosts, queues or networks break this",
        discretisation=f"delays on a grid of step {res.spec.step:g} {res.spec.unit} "
        f"({res.spec.rule} rule)",
        truncation=f"{len(res.total)} grid points; mass beyond the grid "
        f"{fmt_prob(res.total.truncated_mass)}",
        practice="engineering",
    )


def _stage_cell(row: MeasureRow) -> str:
    """A stage's measure in the stages table: the value, or ``refused`` (range in the JSON)."""
    return row.cells()[1] + ("" if row.status() == "ok" else " (!)")


def stage_table(res: DelayResult) -> skeleton.Table:
    """Mean, p50 and p99 of every named stage."""
    u = res.spec.unit
    rows = [[name, res.descriptions.get(name, "")] + [_stage_cell(r) for r in measures]
            for name, measures in res.stage_rows.items() if name != ROOT]
    return skeleton.Table("Stages", ["stage", "what", f"mean ({u})", f"p50 ({u})",
                                     f"p99 ({u})"], rows)


def report_of(res: DelayResult) -> skeleton.DistributionReport:
    """The result as a report (see :mod:`polyconv.cli.distribution_report`)."""
    spec = res.spec
    network = res.descriptions.get(ROOT, "")
    stages = {name: {r.key: r.as_json() for r in rows}
              for name, rows in res.stage_rows.items() if name != ROOT}
    facts = {"unit": spec.unit, "network": network, "rule": spec.rule,
             "descriptions": res.descriptions, "stages": stages}
    return skeleton.DistributionReport(
        title=spec.title, stem="delays", value_name="delay", quantity="end-to-end delay",
        unit=spec.unit, lattice=res.total,
        described=[["network", network], *skeleton.grid_rows(res.total, spec.unit)],
        rows=res.rows, caution=caution_lines(res), facts=facts, notes=res.notes,
        explanation=["Percentiles are read off the combined distribution (percentiles of "
                     "stages do not add). A miss probability is P(delay > deadline). In the "
                     "stages table, (!) marks a measure refused or warned about (reasons in "
                     "summary.json)."],
        tables=[stage_table(res)],
        markers=skeleton.finite_markers(res.rows, "percentiles"))


def write_report(res: DelayResult, out: ReportFolder, prefix: str = "") -> list[str]:
    """Add this result's files to a report folder; returns the names written."""
    return skeleton.write_files(report_of(res), out, prefix)


def json_summary(res: DelayResult) -> dict:
    """The machine-readable summary (floats already rounded, see
    :func:`polyconv.cli.distribution_report.json_summary`)."""
    return skeleton.json_summary(report_of(res))


def run(args) -> int:
    """Entry point of ``polyconv delays``."""
    return skeleton.run_spec_command(args, name="delays", parse=parse, compute=compute,
                                     report_of=report_of,
                                     step_count=lambda spec: count_blocks(spec) + 2)
