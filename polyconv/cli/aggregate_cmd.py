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

Outputs in the report folder: ``summary.md``, ``summary.json``, ``aggregate.csv`` (amount,
probability, cdf, exceedance) and ``aggregate.png``.
"""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass, field
from pathlib import Path

from scipy import stats

from ..dist import Lattice, compound
from . import laws, plots
from .fileio import ReportFolder
from .progress import Steps
from .report import (
    add_spec_report_options,
    caution,
    collect_warnings,
    distribution_csv,
    dumps,
    fmt,
    fmt_prob,
    level_name,
    md_table,
    paragraph,
    report_folder,
    text_table,
    wrap,
)
from .spec import Section, SpecDoc, load_spec

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
    p = sub.add_parser(
        "aggregate",
        help="aggregate loss distribution from a TOML spec (claim counts x severities)",
        description=paragraph(
            "Compute the distribution of total claims S = X_1 + ... + X_N for a claim "
            "count law N and a severity law X (optionally after a per-claim deductible and limit), "
            "and write a summary (mean, sd, VaR and TVaR, stop-loss premiums, trust floor), the "
            "distribution as CSV and a figure."),
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_spec_report_options(p)
    p.set_defaults(run=run)


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
    summary: dict
    notes: list[str] = field(default_factory=list)


def compute(spec: AggregateSpec, steps: Steps | None = None) -> AggregateResult:
    """Discretise, apply the cover, compound and measure."""
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
        per_claim = built.lattice
        if spec.deductible > 0 or math.isfinite(spec.limit):
            try:
                per_claim = per_claim.layer(spec.deductible, spec.limit)
            except ValueError as exc:
                raise spec.severity.doc.error(("cover",), str(exc)) from None
        if steps:
            steps.step("compound")
        total = compound(spec.counts, per_claim, method=spec.method, size=spec.points)
        if steps:
            steps.step("risk measures")
        summary = measures(spec, total, per_claim)
    return AggregateResult(spec, total, per_claim, built.description, summary, notes)


def measures(spec: AggregateSpec, total: Lattice, per_claim: Lattice) -> dict:
    """Mean, sd, VaR/TVaR at the levels, stop-loss at the retentions, floors and masses."""
    mean_n = float(spec.counts.mean())
    out = {
        "title": spec.title,
        "currency": spec.currency,
        "claims": spec.counts_text,
        "expected_claims": mean_n,
        "mean_per_claim": per_claim.mean(),
        "mean": total.mean(),
        "mean_check": mean_n * per_claim.mean(),
        "sd": total.std(),
        "var": {level_name(p): total.value_at_risk(p) for p in spec.levels},
        "tvar": {level_name(p): total.tail_value_at_risk(p) for p in spec.levels},
        "stop_loss": {f"{d:g}": total.stop_loss(d) for d in spec.retentions},
        "trust_floor": total.trust_floor,
        "truncated_mass": total.truncated_mass,
        "severity_truncated_mass": per_claim.truncated_mass,
        "grid_step": spec.step,
        "grid_points": len(total),
        "deductible": spec.deductible,
        "limit": spec.limit if math.isfinite(spec.limit) else None,
        "rule": spec.rule,
        "method": spec.method,
    }
    return out


# -------------------------------------------------------------------------------- report


def caution_lines(res: AggregateResult) -> list[str]:
    """The caution with this run's assumptions."""
    s = res.summary
    return caution(
        independence="the claim count and the claim amounts are independent, the amounts "
        "independent and identically distributed",
        discretisation=f"claim amounts on a grid of step {res.spec.step:g} "
        f"{res.spec.currency} ({res.spec.rule} rule)",
        truncation=f"aggregate grid of {s['grid_points']} points; mass beyond it "
        f"{s['truncated_mass']:.2e}, beyond the severity grid {s['severity_truncated_mass']:.2e}",
        practice="actuarial",
    )


def _rows(res: AggregateResult) -> list[list[str]]:
    s = res.summary
    cur = res.spec.currency
    rows = [["claims", s["claims"]],
            ["severity", res.severity_text],
            ["cover per claim", _cover_text(res.spec)],
            ["expected claims E[N]", fmt(s["expected_claims"])],
            [f"mean per claim after cover ({cur})", fmt(s["mean_per_claim"])],
            [f"mean E[S] ({cur})", fmt(s["mean"])],
            [f"check E[N] E[X] ({cur})", fmt(s["mean_check"])],
            [f"standard deviation ({cur})", fmt(s["sd"])]]
    for key in s["var"]:
        rows.append([f"VaR {key} ({cur})", fmt(s["var"][key])])
        rows.append([f"TVaR {key} ({cur})", fmt(s["tvar"][key])])
    for d, v in s["stop_loss"].items():
        rows.append([f"stop-loss E[(S - {fmt(float(d))})+] ({cur})", fmt(v)])
    rows += [["trust floor (error bound per probability)", fmt_prob(s["trust_floor"])],
             ["truncated mass (beyond the grid)", fmt_prob(s["truncated_mass"])],
             ["grid", f"{s['grid_points']} points of {res.spec.step:g} {cur}"]]
    return rows


def _cover_text(spec: AggregateSpec) -> str:
    if spec.deductible == 0 and not math.isfinite(spec.limit):
        return "none (ground-up)"
    lim = f"{spec.limit:,.0f}" if math.isfinite(spec.limit) else "unlimited"
    return f"deductible {spec.deductible:,.0f}, limit {lim} {spec.currency}"


def terminal_text(res: AggregateResult, folder: Path | None) -> str:
    """What ``polyconv aggregate`` prints."""
    lines = [res.spec.title, text_table(["quantity", "value"], _rows(res))]
    if res.notes:
        lines.append("notes:")
        lines += wrap([f"- {n}" for n in res.notes], indent="  ")
    lines += wrap(caution_lines(res))
    if folder is not None:
        lines.append(f"report written to {folder}/")
    return "\n".join(lines)


def markdown(res: AggregateResult, figure: str | None) -> str:
    """``summary.md`` for the report folder."""
    parts = [f"# {res.spec.title}", "", "> " + "\n>\n> ".join(caution_lines(res)), "",
             md_table(["quantity", "value"], _rows(res)), ""]
    parts += ["VaR is the smallest grid amount whose cumulative probability reaches the level; "
              "TVaR = VaR + E[(S - VaR)+] / (1 - level) (expected shortfall).", ""]
    if res.notes:
        parts += ["## Notes", ""] + [f"- {n}" for n in res.notes] + [""]
    parts += ["## Files", "", "- `aggregate.csv`: amount, probability, cdf, exceedance",
              "- `summary.json`: the numbers above"]
    if figure:
        parts += [f"- `{figure}`: distribution and exceedance curve", "", f"![]({figure})"]
    return "\n".join(parts) + "\n"


def write_report(res: AggregateResult, out: ReportFolder, prefix: str = "") -> list[str]:
    """Add this result's files to a report folder; returns the names written."""
    names = []
    fig_name = None
    if plots.available():
        fig_name = f"{prefix}aggregate.png"
        markers = [(f"VaR {k}", v) for k, v in res.summary["var"].items()
                   if v is not None and math.isfinite(v)][-3:]
        out.write_bytes(fig_name, plots.distribution_figure(
            res.total, title=res.spec.title, quantity="aggregate loss",
            unit=res.spec.currency, markers=markers))
        names.append(fig_name)
    elif plots.MISSING_NOTE not in res.notes:
        res.notes.append(plots.MISSING_NOTE)
    out.write_text(f"{prefix}aggregate.csv", distribution_csv(res.total, "amount"))
    out.write_text(f"{prefix}summary.json", dumps(json_summary(res)) + "\n")
    out.write_text(f"{prefix}summary.md", markdown(res, fig_name))
    return names + [f"{prefix}aggregate.csv", f"{prefix}summary.json", f"{prefix}summary.md"]


def json_summary(res: AggregateResult) -> dict:
    """The machine-readable summary."""
    return {**res.summary, "severity": res.severity_text, "notes": res.notes,
            "caution": caution_lines(res)}


def run(args) -> int:
    """Entry point of ``polyconv aggregate``."""
    doc = load_spec(args.spec)
    spec = parse(doc)
    with Steps(4, "aggregate", args.quiet) as steps:
        res = compute(spec, steps)
        steps.step("write report")
        folder = report_folder(args.spec, args.output)
        with ReportFolder(folder) as out:
            write_report(res, out)
    if args.json:
        print(dumps({**json_summary(res), "output": str(folder)}))
    else:
        print(terminal_text(res, folder))
    return 0
