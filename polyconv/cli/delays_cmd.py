"""``polyconv delays``: the end-to-end delay of a network of stages, from a TOML spec.

Spec format (polyconv's own keys; unknown keys are refused)::

    title = "Larkspur Parcel: order to dispatch"     # optional
    unit = "ms"                                      # unit of the grid (s, ms, us, ns, min, h
                                                     # convert; any other word is a label)
    [grid]
    step = 1.0                        # common time step (required)
    max_points = 1048576              # optional cap of one stage's grid
    rule = "nearest"                  # "nearest" | "down" | "up" | "moments"

    [report]                          # optional
    percentiles = [50, 90, 99, 99.9]
    deadlines = [250.0, 400.0]        # miss probability P(delay > deadline) for each
    confidence = 0.95                 # joint confidence of the sample-size bands
    mission_times = [100.0, 500.0]    # reliability R(t) = P(T > t), hazard rate, MTTF
    stage_curves = false              # draw each stage's curve in the figure
    time_axis = "auto"                # "auto" (log when the tail is heavy) | "linear" | "log"
    sensitivity = { speedup_percent = 10, percentiles = [99] }
    target = { stage = "db", percentile = 99, below = 500.0 }   # how much faster must db be

    [goal]                            # optional: percentiles to a stated precision; grid.step
    percentiles = [99.9]              # is then the first step tried, halved until met
    atol = 0.1                        # and/or rtol (see polyconv.cli.delays_goal)

    [network]                         # what is evaluated: a block like those below
    in_sequence = ["accept", "checks", "dispatch"]

    [stage.accept]                    # a single stage: a law ...
    law = "gamma"
    params = { a = 3.0, scale = 4.0 }
    unit = "s"                        # optional: this stage's unit (converted onto the grid)
    scale = 0.8                       # optional: the stage's delay times this (any stage form)

    [stage.pick]                      # ... or a table: samples, values + probabilities/counts
    samples = [31, 35, 29, 44, 38]

    [stage.db]                        # ... or measured samples from a file
    samples_file = "db_latency.csv"   # .csv (with 'column', a header name or index), .npy, text
    column = "latency_us"
    unit = "us"
    tail = { threshold = 900.0, law = "genpareto" }   # optional fitted tail beyond a threshold
    upper = 5000.0                    # optional largest possible value (e.g. a client timeout)

    [stage.cache]                     # ... or a histogram of measurements
    histogram = { edges = [0, 1, 2, 5, 10], counts = [700, 200, 80, 20] }

    [stage.checks]                    # parallel branches, wait for all of them (maximum)
    all_of = ["pick", "charge"]

    [stage.dispatch]                  # parallel branches, take the first to finish (minimum)
    first_of = ["courier_a", "courier_b"]

    [stage.charge]                    # one branch at random with these weights (sum to 1)
    one_of = { fast = 0.93, manual_review = 0.07 }

    [stage.quorum]                    # the k-th of n to finish (quorum, k-out-of-n)
    k_of = ["replica_a", "replica_b", "replica_c"]
    k = 2
    copies = 1                        # optional: each name stands for this many copies

    [stage.call]                      # timeouts with retries: success, or give up at the end
    retry = "attempt"
    timeout = 200.0
    retries = 2
    backoff = [10.0, 20.0]            # one wait per retry, or one number for all

    [stage.hedged]                    # a second copy after 'after' unless answered
    hedge = "backend"
    after = 50.0

A stage named in several places is **one draw** (the same host, cache or queue), conditioned on
exactly (see :mod:`polyconv.dist.network`); give each use its own stage when they are truly
independent.  Measured stages (``samples_file``, ``histogram``, inline ``samples``, ``values``
with ``counts``) carry the Dvoretzky-Kiefer-Wolfowitz band (Massart's constant) of their
sample size at the report's joint confidence (split over the measured stages by Bonferroni's
inequality); tail probabilities past the data are bounds, and the report says how many samples
back each percentile.  Only ``values`` with ``probabilities`` is taken as an exact law.

Outputs in the report folder (see :mod:`polyconv.cli.distribution_report`): ``summary.md``,
``summary.json``, ``delays.csv`` (delay, probability, cdf, exceedance), ``measures.csv`` (every
measure with its certified range and status) and ``delays.png``.  The evaluation is
:mod:`polyconv.cli.delays_eval`, the spec :mod:`polyconv.cli.delays_spec`.
"""

from __future__ import annotations

import math

from ..dist.samples import samples_beyond
from . import delays_goal
from . import distribution_report as skeleton
from .bounded_rows import range_text
from .delays_eval import DelayResult, compute, count_blocks
from .delays_figure import delays_figure
from .delays_figure import warm as figure_modules
from .delays_spec import ROOT, DelaySpec, parse
from .report import caution, fmt, fmt_prob, percent_level, percentile_name

__all__ = ["DelaySpec", "DelayResult", "parse", "compute", "report_of", "write_report",
           "json_summary", "run", "register"]

ENGINEERING_NOTE = ("Engineering use: check deadlines, timeouts, capacity and safety margins "
                    "against the applicable engineering codes and standards and a qualified "
                    "engineer's review; measured samples describe the system only as it was "
                    "measured (load, versions and hardware change it).")

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


# -------------------------------------------------------------------------------- report


def caution_lines(res: DelayResult) -> list[str]:
    """The caution with this run's assumptions (engineering wording)."""
    shared = (f"; stages used in several places are one draw ({', '.join(res.shared)})"
              if res.shared else "")
    sampled = (f"; {len(res.sampled)} measured stage(s) with sample-size bands at joint "
               f"confidence {res.spec.confidence:g}" if res.sampled else "")
    return caution(
        independence="distinct stages and parallel branches are independent of one another; "
        "shared hosts, queues or networks not named as one stage break this" + shared,
        discretisation=f"delays on a grid of step {res.spec.step:g} {res.spec.unit} "
        f"({res.spec.rule} rule){sampled}",
        truncation=f"{len(res.total)} grid points; mass beyond the grid "
        f"{fmt_prob(res.total.truncated_mass)}",
        practice="engineering",
    ) + [ENGINEERING_NOTE]


def _stage_cell(row) -> str:
    """A stage's measure in the stages table: the value, or ``refused`` (range in the JSON)."""
    return row.cells()[1] + ("" if row.status() == "ok" else " (!)")


def stage_table(res: DelayResult) -> skeleton.Table:
    """Mean, p50 and p99 of every named stage."""
    u = res.spec.unit
    rows = [[name, res.descriptions.get(name, "")] + [_stage_cell(r) for r in measures]
            for name, measures in res.stage_rows.items() if name != ROOT]
    return skeleton.Table("Stages", ["stage", "what", f"mean ({u})", f"p50 ({u})",
                                     f"p99 ({u})"], rows)


def sample_support(res: DelayResult) -> list[dict]:
    """For each reported percentile: how many samples of the least-sampled measured stage lie
    beyond that level, and whether the end-to-end sample-size band leaves it supported."""
    if not res.sampled:
        return []
    fewest = min(res.sampled, key=lambda n: res.sampled[n].n)
    n = res.sampled[fewest].n
    band = float(min(res.total.errors.cumulative, 1.0))
    return [{"percentile": q, "samples_beyond": samples_beyond(n, percent_level(q)),
             "stage": fewest, "stage_samples": n, "band": band,
             "supported": 1 - percent_level(q) > band} for q in res.spec.percentiles]


def extra_tables(res: DelayResult) -> list[skeleton.Table]:
    """Sample support, retries and hedges, sensitivity, target, reliability."""
    u = res.spec.unit
    out = []
    support = sample_support(res)
    if support:
        out.append(skeleton.Table(
            "Sample support of the percentiles",
            ["percentile", "samples beyond it", "end-to-end band", "supported by the samples"],
            [[percentile_name(r["percentile"]),
              f"{r['samples_beyond']:,} of {r['stage_samples']:,.0f} ({r['stage']})",
              f"+/- {r['band']:.2e}",
              "yes" if r["supported"] else "no: the level is inside the band (read the range)"]
             for r in support]))
        out.append(skeleton.Table(
            "Measured stages", ["stage", "samples", "band (DKW, Massart)", "largest sample",
                                "samples beyond its p50 / p99"],
            [[name, f"{s.n:,.0f}", f"+/- {s.eps:.2e} at alpha {s.alpha:.2g}",
              f"{fmt(s.largest)} {u}",
              f"{samples_beyond(s.n, 0.5):,} / {samples_beyond(s.n, 0.99):,}"]
             for name, s in res.sampled.items()]))
    if res.retries:
        rows = []
        for name, f in res.retries.items():
            if f["kind"] == "retry":
                b = f["p_all_time_out"]
                rows.append([name, "P(every attempt times out)", fmt_prob(b["value"]),
                             range_text(b["low"], b["high"], True)])
                rows.append([name, "expected attempts", fmt(f["expected_attempts"]), ""])
            else:
                for key, label, prob in (("extra_requests", "extra copies per request", True),
                                         ("extra_busy_time", f"extra busy time ({u})", False)):
                    b = f[key]
                    value = fmt(b["value"]) if math.isfinite(b["value"]) else "refused"
                    rows.append([name, label, value, range_text(b["low"], b["high"], prob)])
        out.append(skeleton.Table("Retries and hedges", ["stage", "quantity", "value",
                                                         "certified range"], rows))
    if res.effects:
        pct = f"{100 * res.spec.speedup:g} % faster"
        out.append(skeleton.Table(
            "Sensitivity: end-to-end percentile with one stage changed",
            ["stage", "percentile", f"as is ({u})", f"{pct} ({u})", f"removed ({u})"],
            [[e.stage, f"p{100 * e.level:g}", fmt(e.base), fmt(e.faster), fmt(e.removed)]
             for e in res.effects]))
    if res.target is not None:
        t, spec_t = res.target, res.spec.target
        what = (f"{100 * t.speedup:.1f} % faster (delay x {t.factor:.4f}): "
                f"{percentile_name(spec_t.percentile)} = {fmt(t.quantile)} {u}"
                if t.reachable and t.speedup > 0 else
                f"already met ({percentile_name(spec_t.percentile)} = {fmt(t.quantile)} {u})"
                if t.reachable else
                f"not reachable by this stage alone: removed, "
                f"{percentile_name(spec_t.percentile)} = {fmt(t.quantile)} {u}")
        out.append(skeleton.Table(
            "Target", ["stage", "goal", "needed"],
            [[t.stage, f"{percentile_name(spec_t.percentile)} < {fmt(spec_t.below)} {u}",
              what]]))
    if res.reliability_rows:
        rows = [r.cells()[:3] for r in res.reliability_rows]
        out.append(skeleton.Table(
            "Reliability (the end-to-end delay read as a lifetime)",
            ["quantity", "value", "certified range"], rows))
        if res.hazards:
            out.append(skeleton.Table(
                "Hazard rate at the mission times", ["time", f"hazard (per {u})"],
                [[f"{fmt(t)} {u}", f"{h:.3e}" if math.isfinite(h) else "n/a"]
                 for t, h in zip(res.spec.mission_times, res.hazards, strict=True)]))
    return out


def report_of(res: DelayResult) -> skeleton.DistributionReport:
    """The result as a report (see :mod:`polyconv.cli.distribution_report`)."""
    spec = res.spec
    network = res.descriptions.get(ROOT, "")
    stages = {name: {r.key: r.as_json() for r in rows}
              for name, rows in res.stage_rows.items() if name != ROOT}
    facts = {"unit": spec.unit, "network": network, "rule": spec.rule,
             "descriptions": res.descriptions, "stages": stages,
             "shared_stages": res.shared, "sample_support": sample_support(res),
             "measured_stages": {n: {"samples": s.n, "band": s.eps, "alpha": s.alpha,
                                     "largest": s.largest,
                                     "samples_beyond_p50": samples_beyond(s.n, 0.5),
                                     "samples_beyond_p99": samples_beyond(s.n, 0.99),
                                     "tail": s.tail.description if s.tail else None}
                                 for n, s in res.sampled.items()},
             "retries_and_hedges": res.retries,
             "sensitivity": [e._asdict() for e in res.effects],
             "target": res.target._asdict() if res.target else None,
             "reliability": [r.as_json() for r in res.reliability_rows],
             "hazard_at_mission_times": res.hazards}
    if res.goal_grid is not None:
        facts["goal_grid"] = res.goal_grid
    markers = skeleton.finite_markers(res.rows, "percentiles")
    deadlines = [(r.argument, r.value, r.low, r.high) for r in res.rows
                 if r.argument_name == "deadline"]
    curves = {n: lat for n, lat in res.stages.items()
              if n != ROOT and n in spec.stages} if spec.stage_curves else None

    def figure(rep):
        return delays_figure(res.total, title=spec.title, unit=spec.unit, axis=spec.time_axis,
                             stages=curves, markers=markers, deadlines=deadlines)

    return skeleton.DistributionReport(
        title=spec.title, stem="delays", value_name="delay", quantity="end-to-end delay",
        unit=spec.unit, lattice=res.total,
        described=[["network", network], *skeleton.grid_rows(res.total, spec.unit)],
        rows=res.rows, caution=caution_lines(res), facts=facts, notes=res.notes,
        explanation=["Percentiles are read off the combined distribution (percentiles of "
                     "stages do not add). A miss probability is P(delay > deadline). In the "
                     "stages table, (!) marks a measure refused or warned about (reasons in "
                     "summary.json). For measured stages the certified ranges include the "
                     "sample-size band: a tail probability past the data is a bound."],
        tables=[stage_table(res), *extra_tables(res)], markers=markers, figure=figure)


def _compute_warm(spec, steps):
    """:func:`compute` with the figure's modules imported while the sample files are parsed;
    a spec with a ``[goal]`` goes to :func:`polyconv.cli.delays_goal.compute_with_goal`."""
    if getattr(spec, "goal", None) is not None:
        return delays_goal.compute_with_goal(spec, steps)
    return compute(spec, steps, warm=figure_modules)


COMMAND = skeleton.SpecCommand("delays", delays_goal.parse, _compute_warm, report_of,
                                lambda spec: count_blocks(spec) + 2)  # [goal]: cli.delays_goal
write_report, json_summary, run = COMMAND.write_report, COMMAND.json_summary, COMMAND.run
