"""The ``delays`` spec: keys, validation and the network's references (no computation here).

See :mod:`polyconv.cli.delays_cmd` for the format.  Every key is checked here, before any file
is read or any distribution computed; errors name the key and its line.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from . import laws
from .spec import Section, SpecDoc

DEFAULT_PERCENTILES = (50.0, 90.0, 99.0, 99.9)
COMBINATORS = ("in_sequence", "all_of", "first_of", "one_of", "k_of", "retry", "hedge")
BLOCK_KEYS = {"in_sequence": ("in_sequence",), "all_of": ("all_of",), "first_of": ("first_of",),
              "one_of": ("one_of",), "k_of": ("k_of", "k", "copies"),
              "retry": ("retry", "timeout", "retries", "backoff"), "hedge": ("hedge", "after")}
MEASURED = ("samples_file", "histogram")
"""Leaf forms read by this command (the others go to :mod:`polyconv.cli.laws`)."""
LEAF_EXTRAS = ("unit", "scale", "tail", "upper", "column")
RULES = ("nearest", "down", "up", "moments")
TIME_AXES = ("auto", "linear", "log")
UNIT_SECONDS = {"ns": 1e-9, "us": 1e-6, "ms": 1e-3, "s": 1.0, "min": 60.0, "h": 3600.0}
"""Time units a stage may be given in (converted onto the grid's unit)."""
ROOT = "(network)"
"""Internal name of the evaluated block (stage names are letters, digits, '_' and '-')."""


@dataclass
class Target:
    """``[report.target]``: how much faster must ``stage`` be for the percentile to be below."""

    stage: str
    percentile: float
    below: float


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
    confidence: float = 0.95
    mission_times: list[float] = field(default_factory=list)
    stage_curves: bool = False
    time_axis: str = "auto"
    speedup: float | None = None
    sensitivity_percentiles: list[float] = field(default_factory=list)
    target: Target | None = None


def parse(doc: SpecDoc) -> DelaySpec:
    """Validate a parsed spec; the network's references are checked here too."""
    root = doc.root()
    root.check_keys(("title", "unit", "grid", "report", "network", "stage"))
    title = root.string("title", "Delay network")
    unit = root.string("unit", "units")
    grid = root.table("grid")
    grid.check_keys(("step", "max_points", "rule"))
    step = grid.lattice_step("step")
    max_points = grid.integer("max_points", 1 << 20, minimum=2, maximum=1 << 24)
    rule = grid.string("rule", "nearest", RULES)
    rep = root.table("report", {})
    rep.check_keys(("percentiles", "deadlines", "confidence", "mission_times", "stage_curves",
                    "time_axis", "sensitivity", "target"))
    percentiles = rep.numbers("percentiles", list(DEFAULT_PERCENTILES), minimum=0.0,
                              maximum=100.0)
    if any(not 0 < q < 100 for q in percentiles):
        raise rep.error("percentiles", "must lie strictly between 0 and 100 (e.g. 99.9)")
    deadlines = rep.numbers("deadlines", [], minimum=0.0, nonempty=False)
    confidence = rep.number("confidence", 0.95)
    if not 0 < confidence < 1:
        raise rep.error("confidence", "must lie strictly between 0 and 1 (e.g. 0.95)")
    missions = rep.numbers("mission_times", [], minimum=0.0, nonempty=False)
    curves = rep.raw("stage_curves", False)
    if not isinstance(curves, bool):
        raise rep.error("stage_curves", "must be true or false")
    axis = rep.string("time_axis", "auto", TIME_AXES)
    network = root.table("network")
    stage_table = root.table("stage", {})
    stages = {}
    for name in stage_table.keys():
        if not re.fullmatch(r"[A-Za-z0-9_-]+", name):
            raise stage_table.error(name, "stage names may hold only letters, digits, '_' "
                                    "and '-'")
        stages[name] = stage_table.table(name)
    spec = DelaySpec(doc, title, unit, step, max_points, rule, percentiles, deadlines, network,
                     stages, confidence, missions, curves, axis)
    _sensitivity(spec, rep)
    _check_graph(spec)
    for sec in stages.values():
        if block_kind(sec) == "leaf":
            leaf_factor(spec, sec)
    return spec


def _sensitivity(spec: DelaySpec, rep: Section) -> None:
    if rep.has("sensitivity"):
        sens = rep.table("sensitivity")
        sens.check_keys(("speedup_percent", "percentiles"))
        x = sens.number("speedup_percent", 10.0)
        if not 0 < x < 100:
            raise sens.error("speedup_percent", "must lie strictly between 0 and 100 (10 = "
                             "each stage 10 % faster)")
        spec.speedup = x / 100.0
        spec.sensitivity_percentiles = sens.numbers("percentiles", [99.0], minimum=0.0,
                                                    maximum=100.0)
        if any(not 0 < q < 100 for q in spec.sensitivity_percentiles):
            raise sens.error("percentiles", "must lie strictly between 0 and 100")
    if rep.has("target"):
        tgt = rep.table("target")
        tgt.check_keys(("stage", "percentile", "below"))
        name = tgt.string("stage")
        if name not in spec.stages:
            raise tgt.error("stage", f"names the stage {name!r}, which is not defined")
        q = tgt.number("percentile")
        if not 0 < q < 100:
            raise tgt.error("percentile", "must lie strictly between 0 and 100")
        spec.target = Target(name, q, tgt.number("below", positive=True))


def leaf_factor(spec: DelaySpec, sec: Section) -> float:
    """Grid units per unit of the stage (``unit`` of the stage over the spec's ``unit``), times
    the stage's ``scale`` (its delay multiplied, e.g. 0.8 for a stage 20 % faster)."""
    scale = sec.number("scale", 1.0, positive=True) if sec.has("scale") else 1.0
    if not sec.has("unit"):
        return scale
    u = sec.string("unit", None, tuple(UNIT_SECONDS))
    if spec.unit not in UNIT_SECONDS:
        raise sec.error("unit", f"cannot be converted: the spec's unit {spec.unit!r} is not a "
                        f"time unit ({', '.join(UNIT_SECONDS)}); set the top-level 'unit'")
    return scale * UNIT_SECONDS[u] / UNIT_SECONDS[spec.unit]


def leaf_form(sec: Section) -> str:
    """``"samples_file"``, ``"histogram"`` or the form of :func:`laws.describe_kind`."""
    measured = [k for k in MEASURED if sec.has(k)]
    if measured:
        other = [k for k in ("law", "samples", "values", *MEASURED) if sec.has(k)
                 and k != measured[0]]
        if other:
            raise sec.error(other[0], f"give one description of the stage: '{measured[0]}' "
                            f"and '{other[0]}' cannot be combined")
        return measured[0]
    return laws.describe_kind(sec)


def block_kind(sec: Section) -> str:
    """A combinator of :data:`COMBINATORS` or ``"leaf"``."""
    present = [k for k in COMBINATORS if sec.has(k)]
    if len(present) > 1:
        raise sec.error(present[1], f"a block is one thing: '{present[0]}' and '{present[1]}' "
                        "cannot be combined (make a named stage for one of them)")
    if present:
        sec.check_keys(BLOCK_KEYS[present[0]])
        return present[0]
    leaf_form(sec)
    return "leaf"


def children(sec: Section, kind: str) -> list[tuple[str, tuple]]:
    """``(name, key path)`` of each block a combinator refers to."""
    if kind == "one_of":
        weights = sec.table("one_of")
        if not weights.keys():
            raise sec.error("one_of", "must name at least one branch with its weight")
        return [(name, sec.path + ("one_of", name)) for name in weights.keys()]
    if kind in ("retry", "hedge"):
        return [(sec.string(kind), sec.path + (kind,))]
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


def _check_block(sec: Section, kind: str) -> None:
    if kind == "one_of":
        branch_weights(sec)
    elif kind == "k_of":
        n = len(sec.strings("k_of"))
        copies = sec.integer("copies", 1, minimum=1, maximum=1 << 20)
        sec.integer("k", minimum=1, maximum=n * copies)
    elif kind == "retry":
        sec.number("timeout", positive=True)
        retries = sec.integer("retries", minimum=0, maximum=1000)
        backoff = sec.raw("backoff", 0.0)
        if isinstance(backoff, list):
            if len(sec.numbers("backoff", minimum=0.0)) != retries:
                raise sec.error("backoff", f"gives {len(backoff)} waits; one per retry "
                                f"({retries}) is needed (or one number for all)")
        else:
            sec.number("backoff", 0.0, minimum=0.0)
    elif kind == "hedge":
        after = sec.raw("after")
        values = sec.numbers("after", minimum=0.0) if isinstance(after, list) else \
            [sec.number("after", minimum=0.0)]
        if any(b <= a for a, b in zip(values, values[1:], strict=False)):
            raise sec.error("after", "delays of the extra copies must increase")


def _check_graph(spec: DelaySpec) -> None:
    """Unknown names, cycles and bad block keys are spec errors naming the key."""
    state: dict[str, str] = {}

    def visit(sec: Section) -> None:
        kind = block_kind(sec)
        if kind == "leaf":
            return
        _check_block(sec, kind)
        for child, path in children(sec, kind):
            if child not in spec.stages:
                known = ", ".join(sorted(spec.stages)) or "none"
                raise spec.doc.error(path, f"names the stage {child!r}, which is not defined "
                                     f"(define [stage.{child}]; defined: {known})")
            if state.get(child) == "open":
                raise spec.doc.error(path, f"stage {child!r} contains itself (a cycle)")
            if state.get(child) != "done":
                state[child] = "open"
                visit(spec.stages[child])
                state[child] = "done"

    visit(spec.network)


def used_sections(spec: DelaySpec) -> dict[str, Section]:
    """The network and every stage reachable from it (an unused stage decides nothing)."""
    out = {ROOT: spec.network}
    todo = [spec.network]
    while todo:
        sec = todo.pop()
        kind = block_kind(sec)
        if kind == "leaf":
            continue
        for child, _ in children(sec, kind):
            if child not in out and child in spec.stages:
                out[child] = spec.stages[child]
                todo.append(spec.stages[child])
    return out
