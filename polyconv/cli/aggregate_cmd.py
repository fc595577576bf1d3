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

    [goal]                            # optional: measures and precision; the grid follows
    var = [0.995]                     # VaR / TVaR levels, stop-loss retentions to meet
    tvar = [0.995]
    rtol = 1e-4                       # and/or atol (currency units); grid.step then optional,
                                      # grid.points refused (see polyconv.cli.aggregate_goal)

Several lines (each with its own step, re-gridded to a common step keeping mass and mean,
summed as independent lines), reinsurance per line (quota share, surplus, per-occurrence excess
of loss with reinstatements and annual aggregate terms), richer counts and severities, claims
files, allocation, return periods and layer prices: see :mod:`polyconv.cli.aggregate_line`,
:mod:`polyconv.cli.aggregate_laws` and :mod:`polyconv.cli.aggregate_tables`.  A spec with
``[[lines]]`` tables (each with ``name``, ``claims``, ``severity``, optional ``cover``, ``grid``,
``reinsurance``) has no top-level ``claims``/``severity``/``cover``/``reinsurance``; its top-level
``[grid]`` holds only the optional common ``step``.

Outputs in the report folder (see :mod:`polyconv.cli.distribution_report`): ``summary.md``,
``summary.json``, ``aggregate.csv`` (amount, probability, cdf, exceedance), ``measures.csv``
(every measure with its certified range and status) and ``aggregate.png``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..dist import Lattice
from ..dist.portfolio import portfolio
from . import aggregate_goal as goal_mod
from . import aggregate_line as line_mod
from . import aggregate_tables as tabs
from . import distribution_report as skeleton
from . import grid_mass
from .bounded_rows import MeasureRow, ask
from .progress import Steps
from .report import caution, collect_warnings, fmt, fmt_prob, level_name, number_name
from .spec import SpecDoc

DEFAULT_LEVELS = (0.90, 0.95, 0.99, 0.995, 0.999)
COUNT_LAWS = line_mod.al.COUNT_LAWS
RULES = line_mod.RULES
METHODS = line_mod.METHODS

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

Write 'polyconv demo' to see full specs (polyconv-demo/quillmere_claims.toml, and the
reinsurance programme of several lines in polyconv-demo/quillmere_programme.toml).
"""


def register(sub) -> None:
    """Add the ``aggregate`` sub-command to ``sub``."""
    skeleton.add_spec_command(
        sub, name="aggregate",
        help="aggregate loss distribution from a TOML spec (claim counts x severities)",
        description=(
            "Compute the distribution of total claims S = X_1 + ... + X_N for a claim "
            "count law N and a severity law X (optionally after a per-claim deductible and limit), "
            "for one line or several independent lines, with an optional reinsurance programme "
            "(gross, ceded and net from one joint law), and write a summary (mean, sd, VaR and "
            "TVaR, stop-loss premiums, each with its certified range or refused on its row; "
            "allocation, return periods, layer prices), the distribution as CSV and a figure."),
        epilog=EXAMPLE, run=run)


# ------------------------------------------------------------------------------------ spec


@dataclass
class AggregateSpec:
    """A validated aggregate spec (one or several lines)."""

    title: str
    currency: str
    lines: list[line_mod.LineSpec]
    several: bool
    step: float | None
    levels: list[float]
    retentions: list[float]
    extras: dict
    goal: goal_mod.GoalSpec | None = None


def parse(doc: SpecDoc) -> AggregateSpec:
    """Validate a parsed spec (raises :class:`~polyconv.cli.errors.SpecError`)."""
    root = doc.root()
    root.check_keys(("title", "currency", "claims", "severity", "cover", "grid", "report",
                     "reinsurance", "lines", "goal"))
    goal = goal_mod.parse_goal(root)
    title = root.string("title", "Aggregate loss distribution")
    currency = root.string("currency", "units")
    common = None
    if root.has("lines"):
        for key in ("claims", "severity", "cover", "reinsurance"):
            if root.has(key):
                raise root.error(key, "with [[lines]], give it inside each line")
        raw = root.raw("lines")
        if not isinstance(raw, list) or not raw or not all(isinstance(x, dict) for x in raw):
            raise root.error("lines", "must be a list of tables ([[lines]])")
        grid = root.table("grid", {})
        grid.check_keys(("step",))
        common = grid.lattice_step("step", None)
        lines = []
        for i in range(len(raw)):
            sec = line_mod.Section(raw[i], ("lines", i), doc)
            sec.check_keys(line_mod.LINE_KEYS)
            name = sec.string("name", f"line {i + 1}")
            lines.append(line_mod.parse_line(sec, name))
        names = [x.name for x in lines]
        if len(set(names)) != len(names):
            raise root.error("lines", f"line names must differ; got {names}")
        several = True
    else:
        root_line = line_mod.Section({k: v for k, v in root.data.items()
                                      if k in line_mod.LINE_KEYS}, (), doc)
        lines = [line_mod.parse_line(root_line, "the line", step_optional=goal is not None)]
        several = False
    rep = root.table("report", {})
    rep.check_keys(("levels", "retentions", "return_periods", "allocation", "layers",
                    "distortions", "basic_limit"))
    levels = rep.numbers("levels", list(DEFAULT_LEVELS), minimum=0.0, below=1.0)
    if any(p_ <= 0 for p_ in levels):
        raise rep.error("levels", "must lie strictly between 0 and 1 (e.g. 0.995)")
    retentions = rep.numbers("retentions", [], minimum=0.0, nonempty=False)
    extras = tabs.parse_report_extras(rep)
    if extras["basic_limit"] is not None and several:
        raise rep.error("basic_limit", "increased-limit factors are per claim of one line; "
                        "give it in a one-line spec")
    return AggregateSpec(title, currency, lines, several, common, levels, retentions, extras,
                         goal)


# ------------------------------------------------------------------------------- compute


@dataclass
class AggregateResult:
    """Everything the report shows."""

    spec: AggregateSpec
    total: Lattice
    per_claim: Lattice | None
    severity_text: str
    rows: list[MeasureRow]
    lines: list = field(default_factory=list)
    net: Lattice | None = None
    tables: list = field(default_factory=list)
    facts: dict = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def step_count(spec: AggregateSpec) -> int:
    """Progress steps of :func:`compute` plus one for writing."""
    return 2 * len(spec.lines) + 3


def compute(spec: AggregateSpec, steps: Steps | None = None) -> AggregateResult:
    """Each line (discretise, cover, compound, reinsurance), the total, measures and tables.

    Raises SpecError (nothing is written) when a severity puts no probability on its grid,
    or when the aggregate grid holds less probability than the lowest level asked.
    """
    notes: list[str] = []
    goal_rows: list[MeasureRow] = []
    if spec.goal is not None:  # one line (polyconv.cli.aggregate_goal)
        first_line, goal_rows = goal_mod.compute_goal_line(spec.lines[0], spec.goal,
                                                           spec.currency, steps)
        results = [first_line]
    else:
        results = [line_mod.compute_line(x, spec.currency, steps) for x in spec.lines]
    for r in results:
        notes.extend(r.notes if not spec.several else [f"{r.spec.name}: {n}" for n in r.notes])
    reinsured = any(r.programme is not None or r.qs_ceded is not None for r in results)
    with collect_warnings(notes):
        if steps:
            steps.step("total")
        facts: dict = {}
        if results[0].goal_grid is not None:
            facts["goal_grid"] = results[0].goal_grid
        tables = []
        if spec.several:
            names = [r.spec.name for r in results]
            pf = portfolio([r.gross for r in results], spec.step, names)
            total = pf.total
            net = portfolio([r.net for r in results], pf.total.step, names).total \
                if reinsured else None
            t, facts["lines"] = tabs.lines_table(names, pf.lines, total, spec.levels)
            tables.append(t)
            facts["regrid"] = [{"line": n, "from_step": r.gross.step, "to_step": total.step,
                                "cdf_shift": e.cdf_shift, "variance_added": e.variance_added}
                               for n, r, e in zip(names, results, pf.effects, strict=True)]
            for n, r, e in zip(names, results, pf.effects, strict=True):
                if r.gross.step != total.step:
                    notes.append(f"{n}: re-gridded from step {r.gross.step:g} to "
                                 f"{total.step:g} (mass and mean kept; largest cdf change "
                                 f"{e.cdf_shift:.3g}, variance added {e.variance_added:.4g})")
            t, facts["allocation"] = tabs.allocation_table(names, pf.lines,
                                                           spec.extras["allocation"])
            tables.append(t)
        else:
            total = results[0].gross
            net = results[0].net if reinsured else None
        first = results[0]
        grid_key = ("goal",) if spec.goal else ("grid", "points") if first.spec.points \
            else ("grid", "step")
        grid_mass.require_mass(
            total, min(spec.levels),
            lambda message: first.spec.severity.doc.error(
                (("lines", 0) if spec.several else ()) + grid_key, message),
            goal_mod.MASS_HINT if spec.goal else "choose a larger grid.step (or more grid.points)",
            f"the aggregate loss (E[N] = {fmt(first.spec.claims_mean())} claims in "
            f"{first.spec.name})", spec.currency)
        if steps:
            steps.step("risk measures and tables")
        per_claim = None if spec.several else first.per_claim
        rows = goal_rows + goal_mod.replaced(measure_rows(spec, total, per_claim, net),
                                             goal_rows)
        tables += tabs.reinsurance_tables(spec.levels, spec.extras["allocation"], results, facts)
        largest = tabs.occurrence_law(results)
        t, facts["return_periods"] = tabs.return_table(largest, total, net,
                                                       spec.extras["return_periods"])
        if spec.extras["return_periods"]:
            tables.append(t)
        if spec.retentions:
            t, facts["exceedance"] = tabs.exceedance_table(largest, total, spec.retentions)
            tables.append(t)
        lt = tabs.layers_table(total, spec.extras, per_claim)
        if lt is not None:
            tables.append(lt[0])
            facts["layers"] = lt[1]
        tables.append(tabs.checks_table(results))
        facts["mean_checks"] = [{"line": r.spec.name, "quantity": q, "law": a, "lattice": b}
                                for r in results for q, a, b in r.checks]
    sev = "; ".join(f"{r.spec.name}: {r.severity_text}" if spec.several else r.severity_text
                    for r in results)
    return AggregateResult(spec, total, per_claim, sev, rows, results, net, tables, facts,
                           notes)


def measure_rows(spec: AggregateSpec, total: Lattice, per_claim: Lattice | None,
                 net: Lattice | None = None) -> list[MeasureRow]:
    """Mean per claim, mean and sd of the total, VaR/TVaR at the levels, stop-loss at the
    retentions (and net mean, VaR, TVaR under reinsurance): each the lattice's own answer with
    its certified range."""
    cur = spec.currency
    rows = []
    if per_claim is not None:
        rows.append(ask(per_claim, "mean", key="mean_per_claim",
                        label="mean per claim after cover", unit=cur))
    rows += [ask(total, "mean", key="mean", label="mean E[S]", unit=cur),
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
    if net is not None:
        rows.append(ask(net, "mean", key="net_mean", label="net mean", unit=cur))
        for p in spec.levels:
            name = level_name(p)
            rows.append(ask(net, "var", p, key="net_var", label=f"net VaR {name}", unit=cur,
                            argument_name="level"))
            rows.append(ask(net, "tvar", p, key="net_tvar", label=f"net TVaR {name}",
                            unit=cur, argument_name="level"))
    return rows


# -------------------------------------------------------------------------------- report


def caution_lines(res: AggregateResult) -> list[str]:
    """The caution with this run's assumptions."""
    steps = sorted({x.step for x in res.spec.lines})
    sev_cut = max(r.per_claim.truncated_mass for r in res.lines)
    indep = "the claim count and the claim amounts are independent, the amounts " \
        "independent and identically distributed"
    if res.spec.several:
        indep += "; the lines are independent of each other"
    if res.net is not None:
        indep += "; one claim is one occurrence (per-occurrence terms)"
    return caution(
        independence=indep,
        discretisation=f"claim amounts on a grid of step {', '.join(f'{h:g}' for h in steps)} "
        f"{res.spec.currency} ({', '.join(sorted({x.rule for x in res.spec.lines}))} rule)"
        + (f", lines re-gridded to step {res.total.step:g}" if len(steps) > 1 else ""),
        truncation=f"aggregate grid of {len(res.total)} points; mass beyond it "
        f"{fmt_prob(res.total.truncated_mass)}, beyond the severity grid "
        f"{fmt_prob(sev_cut)}",
        practice="actuarial",
    )


def report_of(res: AggregateResult) -> skeleton.DistributionReport:
    """The result as a report (see :mod:`polyconv.cli.distribution_report`)."""
    spec = res.spec
    described = []
    for r in res.lines:
        pre = f"{r.spec.name}: " if spec.several else ""
        mean_n = r.spec.claims_mean()
        described += [[f"{pre}claims", r.spec.counts.text + (
                           f"; claims per occurrence: {r.spec.cluster.text}"
                           if r.spec.cluster is not None else "")],
                      [f"{pre}severity", r.severity_text],
                      [f"{pre}cover per claim", line_mod.cover_text(r.spec, spec.currency)],
                      [f"{pre}reinsurance", line_mod.reinsurance_text(r.spec)],
                      [f"{pre}expected claims E[N]", fmt(mean_n)],
                      [f"{pre}check E[N] x mean per claim ({spec.currency})",
                       fmt(mean_n * r.per_claim.mean())]]
    described += skeleton.grid_rows(res.total, spec.currency)
    first = res.lines[0]
    facts = {"currency": spec.currency, "claims": first.spec.counts.text,
             "severity": res.severity_text,
             "expected_claims": sum(r.spec.claims_mean() for r in res.lines),
             "mean_check": sum(r.spec.claims_mean() * r.per_claim.mean() for r in res.lines),
             "severity_truncated_mass": max(r.per_claim.truncated_mass for r in res.lines),
             "deductible": first.spec.deductible,
             "limit": first.spec.limit if math.isfinite(first.spec.limit) else None,
             "rule": first.spec.rule, "method": first.spec.method, **res.facts}
    return skeleton.DistributionReport(
        title=spec.title, stem="aggregate", value_name="amount", quantity="aggregate loss",
        unit=spec.currency, lattice=res.total, described=described, rows=res.rows,
        caution=caution_lines(res), facts=facts, notes=res.notes, tables=res.tables,
        explanation=["VaR is the smallest grid amount whose cumulative probability reaches "
                     "the level; TVaR = VaR + E[(S - VaR)+] / (1 - level) (expected "
                     "shortfall)."],
        markers=skeleton.finite_markers(res.rows, "var", most=3))


COMMAND = skeleton.SpecCommand("aggregate", parse, compute, report_of, step_count)
write_report, json_summary, run = COMMAND.write_report, COMMAND.json_summary, COMMAND.run
