"""``polyconv aggregate``: the distribution of total claims in a period, from a TOML spec.

Spec format (keys are polyconv's own; every key is checked, unknown keys are refused)::

    title = "Quillmere Mutual: escape-of-water claims, one year"   # optional
    currency = "EUR"                  # optional label of amounts (default "units")

    [claims]                          # number of claims N in the period
    law = "poisson"                   # "poisson" | "negative-binomial" | "binomial"
    mean = 42.0                       # poisson and negative-binomial
    variance = 90.0                   # negative-binomial only, > mean
    # trials = 500                    # binomial: number of exposures
    # probability = 0.08              # binomial: chance that one exposure claims

    [severity]                        # one claim's ground-up amount X
    law = "lognorm"                   # a continuous law of scipy.stats ...
    params = { s = 1.3, scale = 6000.0 }
    # values = [500, 2000, 10000]     # ... or an empirical table (see polyconv.cli.laws)
    # probabilities = [0.6, 0.3, 0.1]

    [cover]                           # optional, per claim: min(max(X - deductible, 0), limit)
    deductible = 1000.0
    limit = 150000.0

    [grid]
    step = 250.0                      # lattice step, in currency units (required)
    points = 20000                    # optional: aggregate grid points (default: from the tail)
    max_points = 1048576              # optional: cap of a severity grid without a limit
    rule = "nearest"                  # "nearest" | "down" | "up" | "moments"
    method = "auto"                   # "auto" | "fft" | "recursion"

    [report]                          # optional
    levels = [0.90, 0.95, 0.99, 0.995, 0.999]
    retentions = [1.0e6, 1.5e6]       # stop-loss E[(S - d)+] at these d

Outputs in the report folder (see :mod:`polyconv.cli.distribution_report`): ``summary.md``,
``summary.json``, ``aggregate.csv`` (amount, probability, cdf, exceedance), ``measures.csv``
(every measure with its certified range and status) and ``aggregate.png``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..dist import Lattice, compound
from . import distribution_report as skeleton
from . import grid_mass, laws
from .bounded_rows import MeasureRow, ask
from .fileio import ReportFolder
from .progress import Steps
from .report import (
    caution,
    collect_warnings,
    fmt,
    fmt_prob,
    level_name,
    number_name,
)
from .spec import Section, SpecDoc

DEFAULT_LEVELS = (0.90, 0.95, 0.99, 0.995, 0.999)
COUNT_LAWS = ("poisson", "negative-binomial", "binomial")
RULES = ("nearest", "down", "up", "moments")
METHODS = ("auto", "fft", "recursion")

EXAMPLE = """example:
  polyconv aggregate claims.toml -o claims-report
  polyconv aggregate claims.toml --json > summary.json

a minimal spec (claims.toml):
  currency = "EUR"
  [claims]
  law = "poisson"
  mean = 42.0
  [severity]
  law = "lognorm"
  params = { s = 1.3, scale = 6000.0 }
  [cover]
  deductible = 1000.0
  limit = 150000.0
  [grid]
  step = 250.0

Write 'polyconv demo' to see a full spec (polyconv-demo/quillmere_claims.toml).
"""


def register(sub) -> None:
    """Add the ``aggregate`` sub-command to ``sub``."""
    skeleton.add_spec_command(
        sub, name="aggregate",
        help="aggregate loss distribution from a TOML spec (claim counts x severities)",
        description=(
            "Compute the distribution of total claims S = X_1 + ... + X_N for a claim "
            "count law N and a severity law X (optionally after a per-claim deductible and limit), "
            "and write a summary (mean, sd, VaR and TVaR, stop-loss premiums, each with its "
            "certified range or refused on its row), the distribution as CSV and a figure."),
        epilog=EXAMPLE, run=run)


# ------------------------------------------------------------------------------------ spec


@dataclass
class AggregateSpec:
    """A validated aggregate spec."""

    title: str
    currency: str
    counts: object
    counts_text: str
    severity: Section
    deductible: float
    limit: float
    step: float
    points: int | None
    max_points: int
    rule: str
    method: str
    levels: list[float]
    retentions: list[float]


def parse(doc: SpecDoc) -> AggregateSpec:
    """Validate a parsed spec (raises :class:`~polyconv.cli.errors.SpecError`)."""
    root = doc.root()
    root.check_keys(("title", "currency", "claims", "severity", "cover", "grid", "report"))
    title = root.string("title", "Aggregate loss distribution")
    currency = root.string("currency", "units")
    counts, counts_text = parse_counts(root.table("claims"))
    severity = root.table("severity")
    laws.describe_kind(severity)
    grid = root.table("grid")
    grid.check_keys(("step", "points", "max_points", "rule", "method"))
    step = grid.number("step", positive=True)
    points = grid.integer("points", None, minimum=2, maximum=1 << 24)
    max_points = grid.integer("max_points", 1 << 20, minimum=2, maximum=1 << 24)
    rule = grid.string("rule", "nearest", RULES)
    method = grid.string("method", "auto", METHODS)
    cover = root.table("cover", {})
    cover.check_keys(("deductible", "limit"))
    deductible = cover.number("deductible", 0.0, minimum=0.0)
    limit = cover.number("limit", math.inf, positive=True)
    for key, value in (("deductible", deductible), ("limit", limit)):
        if math.isfinite(value) and not _on_step(value, step):
            raise cover.error(key, f"must be a whole multiple of grid.step = {step:g}; got "
                              f"{value:g}")
    rep = root.table("report", {})
    rep.check_keys(("levels", "retentions"))
    levels = rep.numbers("levels", list(DEFAULT_LEVELS), minimum=0.0, below=1.0)
    if any(p_ <= 0 for p_ in levels):
        raise rep.error("levels", "must lie strictly between 0 and 1 (e.g. 0.995)")
    retentions = rep.numbers("retentions", [], minimum=0.0, nonempty=False)
    return AggregateSpec(title, currency, counts, counts_text, severity, deductible, limit, step,
                         points, max_points, rule, method, levels, retentions)


def _on_step(value: float, step: float) -> bool:
    k = value / step
    return math.isfinite(k) and abs(k - round(k)) <= 1e-9 * max(1.0, abs(k))


def parse_counts(sec: Section) -> tuple[object, str]:
    """The claim-count law as a frozen scipy.stats distribution and a description."""
    from scipy import stats  # on first use: every command builds the parser (test_import_light)

    law = sec.string("law", choices=COUNT_LAWS)
    if law == "poisson":
        sec.check_keys(("law", "mean"))
        mean = sec.number("mean", minimum=0.0)
        return stats.poisson(mean), f"Poisson, mean {mean:g}"
    if law == "negative-binomial":
        sec.check_keys(("law", "mean", "variance"))
        mean = sec.number("mean", positive=True)
        var = sec.number("variance", positive=True)
        if not var > mean:
            raise sec.error("variance", f"must exceed the mean ({mean:g}) for a negative "
                            f"binomial; got {var:g} (equal: use law = \"poisson\")")
        r = mean * mean / (var - mean)
        p = mean / var
        return stats.nbinom(r, p), f"negative binomial, mean {mean:g}, variance {var:g}"
    sec.check_keys(("law", "trials", "probability"))
    trials = sec.integer("trials", minimum=0)
    prob = sec.number("probability", minimum=0.0, maximum=1.0)
    return stats.binom(trials, prob), f"binomial, {trials} trials, probability {prob:g}"


# ------------------------------------------------------------------------------- compute


@dataclass
class AggregateResult:
    """Everything the report shows."""

    spec: AggregateSpec
    total: Lattice
    per_claim: Lattice
    severity_text: str
    rows: list[MeasureRow]
    notes: list[str] = field(default_factory=list)


def compute(spec: AggregateSpec, steps: Steps | None = None) -> AggregateResult:
    """Discretise, apply the cover, compound and measure.

    Raises SpecError (nothing is written) when the severity puts no probability on its grid,
    or when the aggregate grid holds less probability than the lowest level asked.
    """
    notes: list[str] = []
    with collect_warnings(notes):
        if steps:
            steps.step("discretise severity")
        points = None
        if math.isfinite(spec.limit):
            points = laws.span_points(spec.deductible + spec.limit, spec.step)
        built = laws.build(spec.severity, spec.step, rule=spec.rule,
                           max_points=spec.max_points, points=points)
        notes.extend(built.notes)
        grid_mass.require_mass(built.lattice, 0.0, *grid_mass.leaf_fail(spec.severity),
                              f"the severity ({built.description})", spec.currency)
        per_claim = built.lattice
        if spec.deductible > 0 or math.isfinite(spec.limit):
            try:
                per_claim = per_claim.layer(spec.deductible, spec.limit)
            except ValueError as exc:
                raise spec.severity.doc.error(("cover",), str(exc)) from None
        if steps:
            steps.step("compound")
        total = compound(spec.counts, per_claim, method=spec.method, size=spec.points)
        grid_key = ("grid", "points") if spec.points else ("grid", "step")
        held = grid_mass.held_mass(per_claim)
        grid_mass.require_mass(
            total, min(spec.levels),
            lambda message: spec.severity.doc.error(grid_key, message),
            "choose a larger grid.step (or more grid.points)",
            f"the aggregate loss (E[N] = {fmt(float(spec.counts.mean()))} claims; the severity "
            f"grid holds {held:.3g} of the probability of one claim)", spec.currency)
        if steps:
            steps.step("risk measures")
        rows = measure_rows(spec, total, per_claim)
    return AggregateResult(spec, total, per_claim, built.description, rows, notes)


def measure_rows(spec: AggregateSpec, total: Lattice, per_claim: Lattice) -> list[MeasureRow]:
    """Mean per claim, mean and sd of the total, VaR/TVaR at the levels, stop-loss at the
    retentions: each the lattice's own answer with its certified range."""
    cur = spec.currency
    rows = [ask(per_claim, "mean", key="mean_per_claim", label="mean per claim after cover",
                unit=cur),
            ask(total, "mean", key="mean", label="mean E[S]", unit=cur),
            ask(total, "std", key="sd", label="standard deviation", unit=cur)]
    for p in spec.levels:
        name = level_name(p)
        rows.append(ask(total, "var", p, key="var", label=f"VaR {name}", unit=cur,
                        argument_name="level"))
        rows.append(ask(total, "tvar", p, key="tvar", label=f"TVaR {name}", unit=cur,
                        argument_name="level"))
    for d in spec.retentions:
        rows.append(ask(total, "stop_loss", d, key="stop_loss",
                        label=f"stop-loss E[(S - {number_name(d)})+]", unit=cur,
                        argument_name="retention"))
    return rows


# -------------------------------------------------------------------------------- report


def caution_lines(res: AggregateResult) -> list[str]:
    """The caution with this run's assumptions."""
    return caution(
        independence="the claim count and the claim amounts are independent, the amounts "
        "independent and identically distributed",
        discretisation=f"claim amounts on a grid of step {res.spec.step:g} "
        f"{res.spec.currency} ({res.spec.rule} rule)",
        truncation=f"aggregate grid of {len(res.total)} points; mass beyond it "
        f"{fmt_prob(res.total.truncated_mass)}, beyond the severity grid "
        f"{fmt_prob(res.per_claim.truncated_mass)}",
        practice="actuarial",
    )


def cover_text(spec: AggregateSpec) -> str:
    """The per-claim cover in words."""
    if spec.deductible == 0 and not math.isfinite(spec.limit):
        return "none (ground-up)"
    lim = f"{spec.limit:,.0f}" if math.isfinite(spec.limit) else "unlimited"
    return f"deductible {spec.deductible:,.0f}, limit {lim} {spec.currency}"


def report_of(res: AggregateResult) -> skeleton.DistributionReport:
    """The result as a report (see :mod:`polyconv.cli.distribution_report`)."""
    spec = res.spec
    mean_n = float(spec.counts.mean())
    mean_check = mean_n * res.per_claim.mean()
    described = [["claims", spec.counts_text], ["severity", res.severity_text],
                 ["cover per claim", cover_text(spec)],
                 ["expected claims E[N]", fmt(mean_n)],
                 [f"check E[N] x mean per claim ({spec.currency})", fmt(mean_check)],
                 *skeleton.grid_rows(res.total, spec.currency)]
    facts = {"currency": spec.currency, "claims": spec.counts_text,
             "severity": res.severity_text, "expected_claims": mean_n,
             "mean_check": mean_check,
             "severity_truncated_mass": res.per_claim.truncated_mass,
             "deductible": spec.deductible,
             "limit": spec.limit if math.isfinite(spec.limit) else None,
             "rule": spec.rule, "method": spec.method}
    return skeleton.DistributionReport(
        title=spec.title, stem="aggregate", value_name="amount", quantity="aggregate loss",
        unit=spec.currency, lattice=res.total, described=described, rows=res.rows,
        caution=caution_lines(res), facts=facts, notes=res.notes,
        explanation=["VaR is the smallest grid amount whose cumulative probability reaches "
                     "the level; TVaR = VaR + E[(S - VaR)+] / (1 - level) (expected "
                     "shortfall)."],
        markers=skeleton.finite_markers(res.rows, "var", most=3))


def write_report(res: AggregateResult, out: ReportFolder, prefix: str = "") -> list[str]:
    """Add this result's files to a report folder; returns the names written."""
    return skeleton.write_files(report_of(res), out, prefix)


def json_summary(res: AggregateResult) -> dict:
    """The machine-readable summary (floats already rounded, see
    :func:`polyconv.cli.distribution_report.json_summary`)."""
    return skeleton.json_summary(report_of(res))


def run(args) -> int:
    """Entry point of ``polyconv aggregate``."""
    return skeleton.run_spec_command(args, name="aggregate", parse=parse, compute=compute,
                                     report_of=report_of, step_count=lambda spec: 4)
