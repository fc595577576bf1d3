"""One line of business of an ``aggregate`` spec: counts, severity, cover, grid, reinsurance.

A line is the top level of a one-line spec, or one ``[[lines]]`` table (with its own ``name``
and ``[grid]`` step).  Reinsurance of a line (``[reinsurance]``, all keys optional)::

    [reinsurance]
    quota_share = 0.25                   # share ceded of the net after the XoL ...
    # surplus = { sum_insured = 2.0e6, retention = 5.0e5, lines = 3 }   # ... or a surplus share
    [reinsurance.xol]                    # per-occurrence excess of loss (one claim = one event)
    deductible = 100000.0                # per claim, multiples of grid.step
    limit = 400000.0
    reinstatements = 2                   # omitted: unlimited
    rates = [1.0, 0.5]                   # rate of each reinstatement (pro rata as to amount)
    aggregate_deductible = 0.0           # annual aggregate deductible on the layer
    aggregate_limit = 1.0e6              # annual aggregate limit
    premium = 30000.0                    # upfront premium; omitted: the pure premium

``[claims]`` may carry ``per_occurrence = { law = "zero-truncated", base = { law = "poisson",
mean = 0.5 } }`` (claims per occurrence ``K``, any count form of
:mod:`polyconv.cli.aggregate_laws`): ``[claims]`` then counts occurrences, and
``[reinsurance.xol] basis = "per-occurrence"`` (default: the layer on each occurrence's total)
or ``"per-risk"`` (on each claim) tells the two apart; without it each claim is one occurrence
and the two coincide.

Gross, XoL recovery and net come from one joint law (:func:`polyconv.dist.xol_programme`); the
quota share scales the net after the XoL (:func:`polyconv.dist.quota_share`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..dist import Lattice, compound
from ..dist.reinsurance import ProgrammeResult, XoLLayer, quota_share, surplus_share, xol_programme
from . import aggregate_laws as al
from . import grid_mass
from .report import collect_warnings, fmt
from .spec import Section

RULES = ("nearest", "down", "up", "moments")
METHODS = ("auto", "fft", "recursion")
LINE_KEYS = ("name", "claims", "severity", "cover", "grid", "reinsurance")
XOL_KEYS = ("deductible", "limit", "reinstatements", "rates", "aggregate_deductible",
            "aggregate_limit", "premium", "basis")
BASES = ("per-occurrence", "per-risk")


@dataclass
class LineSpec:
    """A validated line."""

    name: str
    counts: al.Counts
    severity: Section
    deductible: float
    limit: float
    step: float
    points: int | None
    max_points: int
    rule: str
    method: str
    layer: XoLLayer | None = None
    share: float = 0.0
    share_text: str = ""
    cluster: al.Counts | None = None
    basis: str = "per-occurrence"

    def claims_mean(self) -> float:
        """``E[N] E[K]``: expected claims (``K`` claims per occurrence, 1 without a cluster)."""
        k = float(self.cluster.law.mean()) if self.cluster is not None else 1.0
        return float(self.counts.law.mean()) * k


def on_step(value: float, step: float) -> bool:
    """Whether ``value`` is a whole multiple of ``step``."""
    k = value / step
    return math.isfinite(k) and abs(k - round(k)) <= 1e-9 * max(1.0, abs(k))


def parse_line(sec: Section, name: str, default_step: float | None = None, *,
               step_optional: bool = False) -> LineSpec:
    """Validate one line (the keys of :data:`LINE_KEYS` in ``sec``); ``step_optional``: the
    step may be absent (None: chosen later, for a ``[goal]``)."""
    claims = sec.table("claims")
    cluster = None
    if claims.has("per_occurrence"):  # claims per occurrence K: [claims] then counts events
        cluster = al.parse_counts(claims.table("per_occurrence"))
        claims = Section({k: v for k, v in claims.data.items() if k != "per_occurrence"},
                         claims.path, claims.doc)
    counts = al.parse_counts(claims)
    severity = sec.table("severity")
    if not al.is_composite(severity):
        al.laws.describe_kind(severity)
    grid = sec.table("grid", {}) if default_step is not None or step_optional \
        else sec.table("grid")
    grid.check_keys(("step", "points", "max_points", "rule", "method"))
    if default_step is None or grid.has("step"):
        step = grid.lattice_step("step", None) if step_optional \
            else grid.lattice_step("step")
    else:
        step = default_step
    points = grid.integer("points", None, minimum=2, maximum=1 << 24)
    max_points = grid.integer("max_points", 1 << 20, minimum=2, maximum=1 << 24)
    rule = grid.string("rule", "nearest", RULES)
    method = grid.string("method", "auto", METHODS)
    cover = sec.table("cover", {})
    cover.check_keys(("deductible", "limit"))
    deductible = cover.number("deductible", 0.0, minimum=0.0)
    limit = cover.number("limit", math.inf, positive=True)
    for key, value in (("deductible", deductible), ("limit", limit)):
        if step is not None and math.isfinite(value) and not on_step(value, step):
            raise cover.error(key, f"must be a whole multiple of grid.step = {step:g}; got "
                              f"{value:g}")
    line = LineSpec(name, counts, severity, deductible, limit, step, points, max_points, rule,
                    method, cluster=cluster)
    if sec.has("reinsurance"):
        parse_reinsurance(sec.table("reinsurance"), line)
    return line


def parse_reinsurance(sec: Section, line: LineSpec) -> None:
    """Fill ``line.layer`` and ``line.share`` from a ``[reinsurance]`` table."""
    sec.check_keys(("quota_share", "surplus", "xol"))
    if sec.has("quota_share") and sec.has("surplus"):
        raise sec.error("surplus", "give either quota_share or surplus, not both")
    if sec.has("quota_share"):
        line.share = sec.number("quota_share", minimum=0.0, maximum=1.0)
        line.share_text = f"quota share {line.share:.4g}"
    elif sec.has("surplus"):
        sp = sec.table("surplus")
        sp.check_keys(("sum_insured", "retention", "lines"))
        v, r = sp.number("sum_insured", positive=True), sp.number("retention", positive=True)
        n_lines = sp.number("lines", minimum=0.0)
        line.share = surplus_share(v, r, n_lines)
        line.share_text = (f"surplus of {n_lines:g} lines over a retention of {r:g} on a sum "
                           f"insured of {v:g}: ceded share {line.share:.4g}")
    if not sec.has("xol"):
        return
    x = sec.table("xol")
    x.check_keys(XOL_KEYS)
    vals = {"deductible": x.number("deductible", minimum=0.0),
            "limit": x.number("limit", positive=True),
            "aggregate_deductible": x.number("aggregate_deductible", 0.0, minimum=0.0),
            "aggregate_limit": x.number("aggregate_limit", math.inf, positive=True)}
    for key, value in vals.items():
        if math.isfinite(value) and not on_step(value, line.step):
            raise x.error(key, f"must be a whole multiple of grid.step = {line.step:g}; got "
                          f"{value:g}")
    k = x.integer("reinstatements", None, minimum=0, maximum=1000)
    rates = tuple(x.numbers("rates", [1.0], minimum=0.0))
    if k is not None and len(rates) not in (1, k) and k > 0:
        raise x.error("rates", f"must give one rate or one per reinstatement ({k}); got "
                      f"{len(rates)}")
    premium = x.number("premium", None, minimum=0.0)
    line.basis = x.string("basis", "per-occurrence", BASES)
    line.layer = XoLLayer(vals["deductible"], vals["limit"], k, rates,
                          vals["aggregate_deductible"], vals["aggregate_limit"], premium)


@dataclass
class LineResult:
    """A computed line."""

    spec: LineSpec
    per_claim: Lattice
    severity_text: str
    gross: Lattice
    net: Lattice
    programme: ProgrammeResult | None = None
    qs_ceded: Lattice | None = None
    severity_mean: float | None = None
    per_occurrence: Lattice | None = None
    checks: list[list] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    goal_grid: dict | None = None
    """With a ``[goal]``: the grid chosen for it (numbers for ``summary.json``)."""


def compute_line(line: LineSpec, currency: str, steps=None) -> LineResult:
    """Discretise, apply the cover, compound, apply the reinsurance."""
    notes: list[str] = list(line.counts.caveats)
    with collect_warnings(notes):
        if steps:
            steps.step(f"discretise severity ({line.name})")
        points = None
        if math.isfinite(line.limit):
            points = al.laws.span_points(line.deductible + line.limit, line.step)
        built = al.build_severity(line.severity, line.step, rule=line.rule,
                                  max_points=line.max_points, points=points)
        notes.extend(built.notes)
        grid_mass.require_mass(built.lattice, 0.0, *grid_mass.leaf_fail(line.severity),
                               f"the severity ({built.description})", currency)
        ground_up = built.lattice
        per_claim = ground_up
        if line.deductible > 0 or math.isfinite(line.limit):
            try:
                per_claim = per_claim.layer(line.deductible, line.limit)
            except ValueError as exc:
                raise line.severity.doc.error(line.severity.path[:-1] + ("cover",),
                                              str(exc)) from None
        if steps:
            steps.step(f"compound ({line.name})")
        programme = None
        cluster = line.cluster.law if line.cluster is not None else None
        occurrence = per_claim if cluster is None else compound(cluster, per_claim)
        if line.layer is not None:
            try:
                programme = xol_programme(line.counts.law, per_claim, line.layer,
                                          size=line.points, cluster=cluster, basis=line.basis)
            except ValueError as exc:
                raise line.severity.doc.error(line.severity.path[:-1] + ("reinsurance", "xol"),
                                              str(exc)) from None
            gross, net = programme.gross, programme.net
            notes.extend(programme.notes)
        else:
            gross = compound(line.counts.law, occurrence, method=line.method, size=line.points)
            net = gross
        qs_ceded = None
        if line.share > 0:
            net, qs_ceded = quota_share(net, line.share)
    sev_mean = al.exact_mean(line.severity)
    if line.cluster is not None:
        notes.extend(line.cluster.caveats)
    res = LineResult(line, per_claim, built.description, gross, net, programme, qs_ceded,
                     sev_mean, occurrence, notes=notes)
    res.checks = mean_checks(res, ground_up)
    return res


def mean_checks(res: LineResult, ground_up: Lattice) -> list[list]:
    """Rows ``[quantity, exact, on the lattice]``: the severity's mean (or its limited mean up to
    a grid cut), the cover's and the XoL layer's limited expected values per claim, and
    ``E[N] E[K] E[per claim]`` against the lattice (:func:`polyconv.cli.aggregate_laws.
    exact_law`: the law before discretisation)."""
    line = res.spec
    ex = al.exact_law(line.severity)
    rows = []
    if ex is None:
        return [["aggregate mean E[N] x E[per claim]", None, res.gross.mean()]]
    if ground_up.truncated_mass > 1e-9:  # grid cut (e.g. past the cover): E[min(X, top)]
        top = ground_up.origin + ground_up.step * (len(ground_up) - 1)
        on = float(np.dot(np.minimum(ground_up.values, top), ground_up.pmf)) + \
            top * ground_up.truncated_mass
        rows.append([f"severity limited mean E[min(X, {fmt(top)})]", ex.limited(top), on])
    else:
        rows.append(["severity mean E[X]", ex.mean, ground_up.mean()])

    def lev(lo: float, hi: float) -> float:
        return (ex.limited(hi) if math.isfinite(hi) else ex.mean) - ex.limited(lo)

    top = line.deductible + line.limit
    per_claim_exact = lev(line.deductible, top)
    if line.deductible > 0 or math.isfinite(line.limit):
        rows.append([f"per-claim cover mean E[min((X - {fmt(line.deductible)})+, "
                     f"{fmt(line.limit)})]", per_claim_exact, res.per_claim.mean()])
    if line.layer is not None:
        d, w = line.deductible + line.layer.deductible, line.layer.limit
        on = res.per_claim.layer(line.layer.deductible, line.layer.limit).mean()
        rows.append([f"XoL layer per claim (limited expected values, {fmt(w)} xs "
                     f"{fmt(line.layer.deductible)})", lev(min(d, top), min(d + w, top)), on])
    rows.append(["aggregate mean E[N] x E[per claim]", line.claims_mean() * per_claim_exact,
                 res.gross.mean()])
    return rows


def programme_table(res: LineResult, levels: list[float]) -> list[list[str]]:
    """Gross / XoL recovery / quota share ceded / net: mean, VaR and TVaR side by side."""
    cols = [("gross", res.gross)]
    if res.programme is not None:
        cols.append(("XoL recovery", res.programme.ceded))
        if res.spec.share > 0:
            cols.append(("net of XoL", res.programme.net))
    if res.qs_ceded is not None:
        cols.append(("quota share ceded", res.qs_ceded))
    cols.append(("net", res.net))
    rows = [["mean"] + [fmt(lat.mean()) for _, lat in cols]]
    for p in levels:
        for name, fn in (("VaR", "value_at_risk"), ("TVaR", "tail_value_at_risk")):
            with collect_warnings([]):
                rows.append([f"{name} {p:g}"] + [fmt(float(getattr(lat, fn)(p)))
                                                for _, lat in cols])
    return [["measure"] + [c for c, _ in cols]] + rows


def cover_text(line: LineSpec, currency: str = "") -> str:
    """The per-claim cover in words."""
    if line.deductible == 0 and not math.isfinite(line.limit):
        return "none (ground-up)"
    lim = f"{line.limit:,.0f}" if math.isfinite(line.limit) else "unlimited"
    return f"deductible {line.deductible:,.0f}, limit {lim} {currency}".rstrip()


def reinsurance_text(line: LineSpec) -> str:
    """The reinsurance of a line in words."""
    parts = []
    if line.layer is not None:
        lay = line.layer
        k = "unlimited" if lay.reinstatements is None else str(lay.reinstatements)
        basis = line.basis.replace("-", " ") if line.cluster is not None else \
            "per occurrence (one claim each)"
        parts.append(f"XoL {lay.limit:,.0f} xs {lay.deductible:,.0f} {basis}, {k} "
                     f"reinstatements at {', '.join(f'{r:g}' for r in lay.rates)}, AAD "
                     f"{lay.aggregate_deductible:,.0f}, AAL "
                     + (f"{lay.aggregate_limit:,.0f}" if math.isfinite(
                         lay.aggregate_limit) else "none"))
    if line.share_text:
        parts.append(line.share_text + (" of the net after the XoL" if line.layer else ""))
    return "; ".join(parts) or "none"
