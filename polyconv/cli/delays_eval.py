"""Evaluating a ``delays`` spec: stage laws on one grid, the network, and what the report adds.

Data flow: the validated spec (:mod:`polyconv.cli.delays_spec`) -> stage laws (continuous laws,
inline tables, samples files, histograms; each stage's ``unit`` converted onto the grid) -> a
:class:`polyconv.dist.network.Network` (shared stages one draw) -> the end-to-end law, per-stage
laws, retries' failure probabilities, sensitivity and targets, reliability outputs.
"""

from __future__ import annotations

import contextlib
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..dist import Lattice
from ..dist.ledger import ErrorLedger
from ..dist.network import Block, Network
from ..dist.retry import hedge, retry
from ..dist.samples import Sampled, empirical, from_histogram, stage_alpha
from ..dist.sensitivity import StageEffect, Target, required_speedup, stage_effects
from . import delays_prefetch, grid_mass, laws
from .bounded_rows import MeasureRow, ask
from .delays_spec import (
    LEAF_EXTRAS,
    ROOT,
    DelaySpec,
    block_kind,
    branch_weights,
    children,
    leaf_factor,
    leaf_form,
    used_sections,
)
from .progress import Steps
from .report import collect_warnings, number_name, percent_level, percentile_name
from .sample_files import SampleFileError, read_samples
from .spec import Section


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
    sampled: dict[str, Sampled] = field(default_factory=dict)
    retries: dict[str, dict] = field(default_factory=dict)
    shared: dict[str, str] = field(default_factory=dict)
    effects: list[StageEffect] = field(default_factory=list)
    target: Target | None = None
    reliability_rows: list[MeasureRow] = field(default_factory=list)
    hazards: list[float] = field(default_factory=list)
    goal_grid: dict | None = None
    """With a ``[goal]``: the step chosen for it (numbers for ``summary.json``)."""


def count_blocks(spec: DelaySpec) -> int:
    """Blocks evaluated (for the progress bar)."""
    return len(spec.stages) + 1


# ----------------------------------------------------------------------------------- leaves


def _plain(sec: Section) -> Section:
    """The table without this command's extra keys (for :func:`laws.build`)."""
    return Section({k: v for k, v in sec.data.items() if k not in LEAF_EXTRAS}, sec.path,
                   sec.doc)


def _measured(spec: DelaySpec, name: str, sec: Section, alpha: float, ahead=None) -> Sampled:
    form = leaf_form(sec)
    c = leaf_factor(spec, sec)
    upper = sec.number("upper", None, positive=True) if sec.has("upper") else None
    upper = None if upper is None else upper * c
    if form == "histogram":
        sec.check_keys(("histogram", "unit", "scale", "upper"))
        hist = sec.table("histogram")
        hist.check_keys(("edges", "counts"))
        edges = [e * c for e in hist.numbers("edges", minimum=0.0)]
        counts = hist.numbers("counts", minimum=0.0)
        try:
            return from_histogram(edges, counts, step=spec.step, alpha=alpha, upper=upper)
        except ValueError as exc:
            raise hist.error("counts", str(exc)) from None
    if form == "table":  # values with counts: measured values, each seen counts[i] times
        sec.check_keys(("values", "counts", "unit", "scale", "upper"))
        values = sec.numbers("values", minimum=0.0)
        counts = sec.numbers_like("counts", values, minimum=0.0)
        try:
            return empirical(np.asarray(values) * c, counts=counts, step=spec.step,
                             alpha=alpha, upper=upper)
        except ValueError as exc:
            raise sec.error("counts", str(exc)) from None
    key, source = ("samples", "inline") if form == "samples" else ("samples_file", None)
    if form == "samples":
        sec.check_keys(("samples", "unit", "scale", "tail", "upper"))
        x = np.asarray(sec.numbers("samples", minimum=0.0), dtype=float)
    else:
        x, source = _file_samples(spec, sec, ahead)
    if c != 1.0:
        x = x * c
    tail = None
    if sec.has("tail"):
        t = sec.table("tail")
        t.check_keys(("threshold", "law"))
        tail = {"threshold": t.number("threshold", minimum=0.0) * c,
                "law": t.string("law", "genpareto", ("genpareto", "expon"))}
    if float(x.max()) / spec.step > spec.max_points:
        raise sec.error(key, f"samples reach {float(x.max()):g} {spec.unit}, which "
                        f"needs more than grid.max_points = {spec.max_points} points of step "
                        f"{spec.step:g}; coarsen grid.step or raise grid.max_points")
    try:
        return empirical(x, step=spec.step, alpha=alpha, upper=upper, tail=tail,
                         size=spec.max_points if tail else None)
    except ValueError as exc:
        raise sec.error(key, f"{source}: {exc}") from None


@contextlib.contextmanager
def stage_warnings(spec: DelaySpec, name: str, sec: Section, own_unit: float = 1.0):
    """Library warnings raised while one stage is built, re-issued naming the stage; a law
    built in the stage's own unit (``own_unit`` grid units per stage unit, not 1) says so, since
    its step and suggestion are in that unit."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    unit = f" (in {sec.string('unit')}: the grid step {spec.step:g} {spec.unit} is " \
        f"{spec.step / own_unit:g} {sec.string('unit')}" + \
        (", scale included)" if sec.has("scale") else ")") if own_unit != 1.0 and \
        sec.has("unit") else ""
    for w in caught:
        warnings.warn(f"stage {name}: {w.message}{unit}", w.category, stacklevel=3)


def is_measured(sec: Section) -> bool:
    """Measured data, which carries the sample-size band: a samples file, a histogram, inline
    ``samples`` or ``values`` with ``counts`` (``values`` with ``probabilities`` is a law)."""
    form = leaf_form(sec)
    return form in ("samples_file", "histogram", "samples") or \
        (form == "table" and sec.has("counts"))


def _file_samples(spec: DelaySpec, sec: Section, ahead=None) -> tuple[np.ndarray, str]:
    sec.check_keys(("samples_file", "column", "unit", "scale", "tail", "upper"))
    path = Path(sec.string("samples_file"))
    if not path.is_absolute():
        path = spec.doc.base_dir / path
    column = sec.raw("column", None)
    if column is not None and (isinstance(column, bool) or not isinstance(column, (str, int))):
        raise sec.error("column", "must be a header name or a 0-based column index")
    x = ahead.take(path, column) if ahead is not None else None  # read ahead (same values)
    try:
        x = read_samples(path, column=column) if x is None else x
    except SampleFileError as exc:
        raise sec.error("samples_file", str(exc)) from None
    if x.size == 0:
        raise sec.error("samples_file", f"{path.name} holds no samples")
    return x, path.name


def _relabel(lat: Lattice, c: float, step: float) -> Lattice:
    """A lattice built in a stage's own unit (step ``step / c``) as the law of ``c X`` on the
    grid of ``step``: the same probabilities, every value times ``c`` (exact)."""
    e = lat.errors
    return Lattice._make(np.asarray(lat.pmf), step, lat.origin * c,
                         ErrorLedger(e.point, e.l1, e.truncated, e.truncated_from,
                                     e.truncated_moment * c, e.cumulative))


def _law_points(spec: DelaySpec, sec: Section) -> float:
    c = leaf_factor(spec, sec)
    return laws.natural_points(_plain(sec), spec.step / c)


# ------------------------------------------------------------------------------- compute


def compute(spec: DelaySpec, steps: Steps | None = None, *, warm=None) -> DelayResult:
    """Read the stages, evaluate the network (shared stages one draw) and measure the total;
    samples files are parsed ahead on a worker thread while ``warm()`` (if given) runs."""
    notes: list[str] = []
    descriptions: dict[str, str] = {}
    used = used_sections(spec)
    leaves = {n: s for n, s in used.items() if block_kind(s) == "leaf"}
    measured = [n for n, s in leaves.items() if is_measured(s)]
    alpha = stage_alpha(1 - spec.confidence, len(measured))
    nodes: dict[str, Lattice | Block] = {}
    sampled: dict[str, Sampled] = {}
    ahead = delays_prefetch.start(delays_prefetch.sources(spec, [leaves[n] for n in measured]))
    with collect_warnings(notes), contextlib.closing(ahead):
        if warm is not None:
            warm()
        for name in measured:
            if steps:
                steps.step(f"stage {name}")
            with stage_warnings(spec, name, leaves[name]):
                s = _measured(spec, name, leaves[name], alpha, ahead)
            sampled[name] = s
            nodes[name] = s.lattice
            what = {"histogram": f"histogram of {s.n:,.0f} samples",
                    "samples": f"{s.n:,.0f} samples (inline)",
                    "table": f"{s.n:,.0f} measured values (with counts)"}.get(
                leaf_form(leaves[name]), f"{s.n:,.0f} measured samples")
            descriptions[name] = what + (f"; {s.tail.description}" if s.tail else "") + \
                (f"; delays x {leaves[name].number('scale'):g}" if leaves[name].has("scale")
                 else "")
        points = _horizon(spec, leaves, sampled, notes)
        for name, sec in leaves.items():
            if name in sampled:
                continue
            if steps:
                steps.step(f"stage {name}")
            c = leaf_factor(spec, sec)
            with stage_warnings(spec, name, sec, c):
                built = laws.build(_plain(sec), spec.step / c, rule=spec.rule,
                                   max_points=spec.max_points, points=points)
            lat = built.lattice if c == 1.0 else _relabel(built.lattice, c, spec.step)
            notes.extend(f"stage {name}: {n}" for n in built.notes)
            descriptions[name] = built.description + (f" (in {sec.string('unit')})"
                                                      if sec.has("unit") else "") + \
                (f" x {sec.number('scale'):g}" if sec.has("scale") else "")
            grid_mass.require_mass(lat, 0.0, *grid_mass.leaf_fail(sec),
                                   f"stage {name} ({built.description})", spec.unit)
            nodes[name] = lat
        for name, sec in used.items():
            if name not in leaves:
                nodes[name] = _block(sec, descriptions, name)
        try:
            net = Network({n: v for n, v in nodes.items() if n != ROOT}, nodes[ROOT])
            if steps:
                steps.step("combine the network")
            laws_of = net.evaluate_all()
        except ValueError as exc:
            raise spec.doc.error(("network",), str(exc)) from None
        total = laws_of[ROOT]
        grid_mass.require_mass(total, percent_level(min(spec.percentiles)),
                               lambda message: spec.doc.error(("grid", "max_points"), message),
                               "raise grid.max_points (or choose a larger grid.step)",
                               "the end-to-end delay", spec.unit)
        if steps:
            steps.step("percentiles")
        rows = measure_rows(spec, total)
        stage_rows = {n: stage_measures(lat, spec.unit) for n, lat in laws_of.items()
                      if n != ROOT}
        retries = _retry_facts(spec, net, laws_of)
        effects, target = _sensitivity(spec, net)
        rel_rows, hazards = _reliability(spec, total)
    open_tail = [n for n, s in sampled.items() if s.tail is None and
                 not leaves[n].has("upper")]
    if open_tail:
        notes.append(f"measured stage(s) {', '.join(open_tail)}: the samples bound no moment "
                     "beyond their largest value, so means and standard deviations that depend "
                     "on it are refused; give 'upper' (the largest possible delay, e.g. a "
                     "client timeout) or a fitted 'tail'")
    shared = {s: net.plan.route[s] for s in net.shared()}
    for s, route in shared.items():
        on = "its finishing events" if route == "events" else "its value"
        scope = net.label(net.plan.scope[s])
        notes.append(f"stage {s} is used in several places and is one draw there "
                     f"(conditioned on {on} within {scope})")
    return DelayResult(spec, total, {n: v for n, v in laws_of.items()}, descriptions, rows,
                       stage_rows, notes, sampled, retries, shared, effects, target, rel_rows,
                       hazards)


def _horizon(spec: DelaySpec, leaves: dict[str, Section], sampled: dict[str, Sampled],
             notes: list[str]) -> int:
    """One grid length for every continuous stage: the longest any stage needs (a join or race
    is evaluated only where all its branches are known), capped at ``grid.max_points``."""
    need = max([_law_points(spec, s) for n, s in leaves.items() if n not in sampled] +
               [len(s.lattice) for s in sampled.values()] + [2])
    if need > spec.max_points:
        notes.append(f"stage grids cut at grid.max_points = {spec.max_points} points "
                     f"({spec.max_points * spec.step:g} {spec.unit})")
        return spec.max_points
    return int(need)


def _block(sec: Section, descriptions: dict[str, str], name: str) -> Block:
    kind = block_kind(sec)
    names = tuple(c for c, _ in children(sec, kind))
    if kind == "in_sequence":
        descriptions[name] = "in sequence: " + " -> ".join(names)
        return Block("in_sequence", names)
    if kind in ("all_of", "first_of"):
        descriptions[name] = ("wait for all of: " if kind == "all_of" else
                              "first to finish of: ") + ", ".join(names)
        return Block(kind, names)
    if kind == "one_of":
        w = branch_weights(sec)
        descriptions[name] = "one of: " + ", ".join(f"{n} ({x:g})" for n, x in
                                                     zip(names, w, strict=True))
        return Block("one_of", names, weights=tuple(w))
    if kind == "k_of":
        k, copies = sec.integer("k"), sec.integer("copies", 1)
        n = len(names) * copies
        each = f" ({copies} independent copies each)" if copies > 1 else ""
        descriptions[name] = f"{k} of {n} finished: " + ", ".join(names) + each
        return Block("k_of", names, k=k, copies=copies)
    if kind == "retry":
        timeout, retries = sec.number("timeout"), sec.integer("retries")
        raw = sec.raw("backoff", 0.0)
        backoff = tuple(sec.numbers("backoff")) if isinstance(raw, list) else \
            (sec.number("backoff", 0.0),) * retries
        waits = ", ".join(map(number_name, backoff)) or "none"
        descriptions[name] = (f"{names[0]} with timeout {number_name(timeout)} and "
                              f"{retries} retries (backoff {waits})")
        return Block("retry", names, timeout=timeout, retries=retries, backoff=backoff)
    raw = sec.raw("after")
    after = tuple(sec.numbers("after")) if isinstance(raw, list) else (sec.number("after"),)
    when = ", ".join(map(number_name, after))
    descriptions[name] = f"{names[0]} hedged: extra copies after {when}"
    return Block("hedge", names, after=after)


def _retry_facts(spec: DelaySpec, net: Network, laws_of: dict[str, Lattice]) -> dict[str, dict]:
    """P(every attempt times out), expected attempts, hedges' extra load, per block."""
    out = {}
    for name, node in net.nodes.items():
        if not isinstance(node, Block) or node.kind not in ("retry", "hedge"):
            continue
        if name not in laws_of:
            continue
        part = laws_of[node.parts[0]]
        try:
            if node.kind == "retry":
                r = retry(part, timeout=node.timeout, retries=node.retries,
                          backoff=list(node.backoff) if node.backoff else 0.0)
                out[name] = {"kind": "retry", "p_all_time_out": r.p_fail._asdict(),
                             "give_up_at": r.give_up, "expected_attempts": r.expected_attempts}
            else:
                h = hedge(part, after=list(node.after))
                out[name] = {"kind": "hedge", "extra_requests": h.extra_requests._asdict(),
                             "extra_busy_time": h.extra_busy_time._asdict()}
        except ValueError as exc:
            raise spec.stages[name].error(None, str(exc)) from None
    return out


def _sensitivity(spec: DelaySpec, net: Network) -> tuple[list[StageEffect], Target | None]:
    effects: list[StageEffect] = []
    if spec.speedup is not None:
        levels = [percent_level(q) for q in spec.sensitivity_percentiles]
        effects = stage_effects(net, levels, speedup=spec.speedup)
    target = None
    if spec.target is not None:
        t = spec.target
        if t.stage not in net.nodes or t.stage not in net.evaluate_all():
            raise spec.doc.error(("report", "target", "stage"),
                                 f"stage {t.stage!r} is not used by the network")
        target = required_speedup(net, t.stage, level=percent_level(t.percentile),
                                  target=t.below)
    return effects, target


def _reliability(spec: DelaySpec, total: Lattice) -> tuple[list[MeasureRow], list[float]]:
    from ..dist.reliability import hazard
    rows = [ask(total, "sf", t, key="reliability", label=f"R({number_name(t)} {spec.unit}) = "
                f"P(T > {number_name(t)} {spec.unit})", unit="", argument_name="mission_time")
            for t in spec.mission_times]
    rows += [ask(total, "mean", key="mttf", label="MTTF (mean time to failure)",
                 unit=spec.unit)] if spec.mission_times else []
    hz = hazard(total)
    idx = [int(round((t - total.origin) / total.step)) for t in spec.mission_times]
    hazards = [float(hz[i]) if 0 <= i < hz.size else math.nan for i in idx]
    return rows, hazards


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
