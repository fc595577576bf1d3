"""Turning a spec's description of a non-negative random amount into a :class:`Lattice`.

One table describes one law, in one of four ways (used by ``aggregate`` severities and by
``delays`` stages alike):

``law`` + ``params``
    A continuous law of :mod:`scipy.stats` by name with its keyword parameters, e.g.
    ``law = "lognorm"``, ``params = { s = 1.2, scale = 8000 }``; put on the grid by
    :meth:`polyconv.dist.Lattice.from_law`.
``values`` + ``probabilities``
    An empirical table; the probabilities must sum to 1 (they are never renormalised).
``values`` + ``counts``
    A histogram; probabilities are ``counts / sum(counts)``.
``samples``
    Observed amounts, each weighted ``1 / len(samples)``.

Empirical amounts that are not on the grid are moved to the nearest grid point (and the report
says how many were).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..dist import Lattice
from .spec import Section

LAW_KEYS = ("law", "params")
TABLE_KEYS = ("values", "probabilities", "counts", "samples")
TAIL = 1e-12
"""Continuous laws are discretised far enough that the mass beyond the grid is below this."""


@dataclass
class Built:
    """A discretised law and what the report should say about it."""

    lattice: Lattice
    description: str
    notes: list[str] = field(default_factory=list)


def describe_kind(sec: Section) -> str:
    """Which of the four forms a table uses (raises if none or several)."""
    has_law = sec.has("law")
    table_like = [k for k in ("values", "samples") if sec.has(k)]
    if has_law and table_like:
        raise sec.error(table_like[0], "give either 'law' (with 'params') or an empirical "
                        "table ('values' with 'probabilities' or 'counts', or 'samples'), "
                        "not both")
    if has_law:
        return "law"
    if sec.has("samples"):
        if sec.has("values"):
            raise sec.error("values", "give either 'samples' or 'values', not both")
        return "samples"
    if sec.has("values"):
        return "table"
    raise sec.error(None, "describes no law: give 'law' and 'params' (a scipy.stats "
                    "continuous law), 'values' with 'probabilities' or 'counts', or 'samples'")


def frozen_law(sec: Section):
    """The frozen scipy.stats continuous law named by ``law`` with keyword ``params``."""
    from scipy import stats  # on first use: every command builds the parser (test_import_light)

    name = sec.string("law")
    dist = getattr(stats, name, None)
    if not isinstance(dist, stats.rv_continuous):
        hint = " (a discrete law: give 'values' and 'probabilities' instead)" \
            if isinstance(dist, stats.rv_discrete) else ""
        raise sec.error("law", f"{name!r} is not a continuous law of scipy.stats{hint}; "
                        "e.g. 'lognorm', 'gamma', 'weibull_min', 'pareto', 'expon'")
    params = sec.table("params", {})
    kwargs = {}
    for key in params.keys():
        kwargs[key] = params.number(key)
    try:
        frozen = dist(**kwargs)
        lo, hi = (float(v) for v in frozen.support())
    except TypeError as exc:
        msg = str(exc).replace("_parse_args() ", "")
        raise sec.error("params", f"do not fit scipy.stats.{name}: {msg}; its parameters are "
                        f"{_param_names(dist)}") from None
    if math.isnan(lo) or math.isnan(hi):
        raise sec.error("params", f"are outside the valid range of scipy.stats.{name} "
                        f"(parameters {_param_names(dist)}; shapes and scale must usually "
                        "be positive)")
    if lo < 0:
        raise sec.error("law", f"scipy.stats.{name} with these parameters takes values below 0 "
                        f"(its support starts at {lo:g}); amounts and delays must be >= 0: "
                        "choose a law on [0, inf) or raise 'loc'")
    return frozen


def _param_names(dist) -> str:
    shapes = [s.strip() for s in dist.shapes.split(",")] if dist.shapes else []
    return ", ".join(shapes + ["loc", "scale"])


def natural_points(sec: Section, step: float) -> float:
    """Grid points a law needs from 0: past its ``1 - TAIL`` quantile for a continuous law
    (``inf`` if that is infinite), past its largest value for an empirical one."""
    if describe_kind(sec) == "law":
        top = float(frozen_law(sec).isf(TAIL)) / step
        return math.ceil(top) + 3 if math.isfinite(top) else math.inf
    key = "samples" if sec.has("samples") else "values"
    top = max(sec.numbers(key, minimum=0.0)) / step + 0.5
    return math.floor(top) + 1 if math.isfinite(top) else math.inf


def span_points(span: float, step: float) -> int | float:
    """Grid points from 0 just past ``span`` (``round(span / step) + 2``); ``inf`` when the
    ratio overflows (e.g. a step of 5e-324), which :func:`build` then refuses by name."""
    ratio = span / step
    return int(round(ratio)) + 2 if math.isfinite(ratio) else math.inf


def build(sec: Section, step: float, *, rule: str = "nearest", max_points: int = 1 << 20,
          points: int | None = None) -> Built:
    """Put the law described by ``sec`` on the grid ``0, step, 2 step, ...``.

    Parameters
    ----------
    sec : Section
        The table describing the law (see the module docstring).
    step : float
        Grid step.
    rule : str
        Discretisation rule of :meth:`polyconv.dist.Lattice.from_law` for continuous laws.
    max_points : int
        Cap on the number of points of a continuous law's grid (the mass beyond is reported).
    points : int, optional
        Exact number of points for a continuous law (e.g. just past a policy limit).

    Returns
    -------
    Built
    """
    kind = describe_kind(sec)
    if points is not None and not points <= max_points:
        raise sec.doc.error(("grid", "max_points"), f"is {max_points}, but the cover (deductible "
                            f"+ limit) spans {points:.6g} grid points of step {step:g}; raise "
                            "grid.max_points or coarsen grid.step")
    if kind == "law":
        sec.check_keys(LAW_KEYS)
        frozen = frozen_law(sec)
        notes: list[str] = []
        if points is None:
            need = natural_points(sec, step)
            points = int(min(need, max_points))
            if need > max_points:
                notes.append(f"the grid of {sec.string('law')} was cut at {max_points} points "
                             "(raise grid.max_points to go further)")
        lat = Lattice.from_law(frozen, step=step, size=max(points, 2), rule=rule)
        params = ", ".join(f"{k}={v:g}" for k, v in
                           ((k, sec.table("params", {}).number(k))
                            for k in sec.table("params", {}).keys()))
        return Built(lat, f"{sec.string('law')}({params})", notes)
    sec.check_keys(TABLE_KEYS)
    need = natural_points(sec, step)
    if not need <= max_points:
        key = "samples" if kind == "samples" else "values"
        raise sec.error(key, f"reach {max(sec.numbers(key)):g}, which needs {need:.6g} grid points "
                        f"of step {step:g}, above grid.max_points = {max_points}; coarsen "
                        "grid.step or raise grid.max_points")
    if kind == "samples":
        values = sec.numbers("samples", minimum=0.0)
        probs = [1.0 / len(values)] * len(values)
        what = f"{len(values)} samples"
    else:
        values = sec.numbers("values", minimum=0.0)
        if sec.has("probabilities") == sec.has("counts"):
            raise sec.error("values", "needs exactly one of 'probabilities' or 'counts' beside it")
        key = "probabilities" if sec.has("probabilities") else "counts"
        weights = sec.numbers_like(key, values, minimum=0.0)
        if key == "counts":
            total = sum(weights)
            if total <= 0:
                raise sec.error("counts", "must not all be zero")
            probs = [w / total for w in weights]
            what = f"histogram of {len(values)} values"
        else:
            total = math.fsum(weights)
            if abs(total - 1.0) > 1e-9:
                raise sec.error("probabilities", f"must sum to 1 (they sum to {total!r}); "
                                "polyconv does not renormalise probabilities")
            # decimal probabilities summing to 1 may add up to a hair above 1 in floating
            # point: that rounding (at most 1e-9) is removed, nothing more
            probs = [w / total for w in weights] if total > 1.0 else weights
            what = f"table of {len(values)} values"
    lat, moved = on_grid(values, probs, step)
    notes = [f"{moved} of the {len(values)} empirical values were not multiples of the step "
             f"{step:g} and were moved to the nearest grid point"] if moved else []
    return Built(lat, f"empirical: {what}", notes)


def on_grid(values: list[float], probs: list[float], step: float) -> tuple[Lattice, int]:
    """Empirical law on the grid ``k * step``: each value's mass at the nearest point.

    Returns the Lattice and how many values were not exactly on the grid.
    """
    v = np.asarray(values, dtype=float) / step
    k = np.rint(v).astype(np.int64)
    moved = int(np.sum(np.abs(v - k) > 1e-9 * np.maximum(1.0, np.abs(v))))
    pmf = np.zeros(int(k.max()) + 1)
    np.add.at(pmf, k, np.asarray(probs, dtype=float))
    return Lattice(np.minimum(pmf, 1.0), step, 0.0), moved
