"""The actuarial tables of an ``aggregate`` report: lines and diversification, reinsurance side by
side, TVaR allocation, return periods and exceedance, layer prices, mean checks.

Each function returns a :class:`polyconv.cli.distribution_report.Table` for ``summary.md`` and
the terminal, and a plain dict for ``summary.json`` (numbers, never text).

``[report]`` keys read here (the rest in :mod:`polyconv.cli.aggregate_cmd`)::

    return_periods = [10, 50, 100, 200, 250, 500, 1000]   # years (default); [] for none
    allocation = 0.99                 # level of the TVaR (Euler) allocation (default 0.99)
    layers = [{ limit = 1.0e6, attachment = 5.0e5 }]    # annual aggregate layers to price
    distortions = { wang = 0.25, proportional_hazard = 1.25 }   # extra price columns
    basic_limit = 100000.0            # increased-limit factors per claim (one-line specs)
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..dist import Lattice
from ..dist.allocation import split_contributions, tvar_contributions
from ..dist.distortion import layer_table, proportional_hazard, wang
from ..dist.exceedance import RETURN_PERIODS, largest_claim, largest_of, return_period_table
from .aggregate_line import programme_table
from .distribution_report import Table
from .report import fmt, fmt_prob, level_name
from .spec import Section

DISTORTIONS = {"wang": wang, "proportional_hazard": proportional_hazard}


def parse_report_extras(rep: Section) -> dict:
    """The keys of the module docstring, validated."""
    periods = rep.numbers("return_periods", list(RETURN_PERIODS), nonempty=False)
    for i, t in enumerate(periods):
        if not t > 1:
            raise rep.doc.error(rep.path + ("return_periods", i), f"must be above 1 (years); "
                                f"got {t:g}")
    allocation = rep.number("allocation", 0.99, positive=True, below=1.0)
    layers = []
    raw = rep.raw("layers", [])
    if not isinstance(raw, list):
        raise rep.error("layers", "must be a list of tables { limit, attachment }")
    for i, item in enumerate(raw):
        if not isinstance(item, dict):
            raise rep.doc.error(rep.path + ("layers", i), "must be a table { limit, attachment }")
        one = Section(item, rep.path + ("layers", i), rep.doc)
        one.check_keys(("limit", "attachment"))
        layers.append((one.number("limit", positive=True),
                       one.number("attachment", 0.0, minimum=0.0)))
    dist = rep.table("distortions", {})
    dist.check_keys(tuple(DISTORTIONS))
    distortions = {}
    if dist.has("wang"):
        distortions["wang"] = dist.number("wang", minimum=0.0)
    if dist.has("proportional_hazard"):
        distortions["proportional_hazard"] = dist.number("proportional_hazard", minimum=1.0)
    basic = rep.number("basic_limit", None, positive=True)
    return {"return_periods": periods, "allocation": allocation, "layers": layers,
            "distortions": distortions, "basic_limit": basic}


def _q(lat: Lattice, fn: str, p: float) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(getattr(lat, fn)(p))


def lines_table(names, lines, total, levels) -> tuple[Table, dict]:
    """Per-line and total mean, VaR and TVaR; diversification benefit ``sum - total``."""
    header = ["measure"] + list(names) + ["sum of lines", "total", "diversification"]
    rows, facts = [], []
    for label, fn, p in [("mean", None, None)] + [
            (f"{m} {level_name(p)}", f, p) for p in levels
            for m, f in (("VaR", "value_at_risk"), ("TVaR", "tail_value_at_risk"))]:
        vals = [lat.mean() if fn is None else _q(lat, fn, p) for lat in lines]
        tot = total.mean() if fn is None else _q(total, fn, p)
        rows.append([label] + [fmt(v) for v in vals] + [fmt(sum(vals)), fmt(tot),
                                                         fmt(sum(vals) - tot)])
        facts.append({"measure": label, "level": p, "lines": vals, "total": tot,
                      "diversification": sum(vals) - tot})
    return Table("Lines and diversification (independent lines)", header, rows), \
        {"names": list(names), "rows": facts}


def allocation_table(names, lines, p: float) -> tuple[Table, dict]:
    """Euler (co-TVaR) contributions of independent lines to the total's TVaR at ``p``."""
    c = tvar_contributions(lines, p)
    rows = [[n, fmt(part), fmt(alone), f"{part / c.tvar:.4g}" if c.tvar else "-"]
            for n, part, alone in zip(names, c.parts, c.stand_alone, strict=True)]
    rows.append(["total", fmt(sum(c.parts)), fmt(sum(c.stand_alone)), "1"])
    return (Table(f"TVaR {level_name(p)} allocation (Euler contributions, atom at VaR "
                  f"{fmt(c.var)} shared)", ["line", "contribution", "stand-alone TVaR",
                                             "share"], rows),
            {"level": p, "var": c.var, "tvar": c.tvar, "contributions": list(c.parts),
             "stand_alone": list(c.stand_alone), "names": list(names)})


def split_table(name: str, programme, p: float) -> tuple[Table, dict] | None:
    """Contributions of the XoL recovery and the net to the gross TVaR (capped layers)."""
    try:
        c = split_contributions(programme, p)
    except ValueError:
        return None
    rows = [["XoL recovery", fmt(c.parts[0]), fmt(c.stand_alone[0])],
            ["net of XoL", fmt(c.parts[1]), fmt(c.stand_alone[1])],
            ["gross", fmt(sum(c.parts)), fmt(c.tvar)]]
    return (Table(f"{name}: gross TVaR {level_name(p)} split into recovery and net",
                  ["part", "contribution", "stand-alone TVaR"], rows),
            {"level": p, "tvar": c.tvar, "ceded": c.parts[0], "net": c.parts[1]})


def programme_facts(res) -> dict:
    """JSON of a line's reinsurance: terms, expected recovery and reinstatement premium."""
    out: dict = {"quota_share": res.spec.share or None}
    prog = res.programme
    if prog is not None:
        lay = prog.layer
        out.update({"deductible": lay.deductible, "limit": lay.limit,
                    "reinstatements": lay.reinstatements, "rates": list(lay.rates),
                    "aggregate_deductible": lay.aggregate_deductible,
                    "aggregate_limit": lay.aggregate_limit if math.isfinite(
                        lay.aggregate_limit) else None,
                    "expected_recovery": prog.expected_ceded, "premium": prog.premium,
                    "expected_reinstatement_premium": prog.expected_reinstatement_premium})
    out.update({"gross_mean": res.gross.mean(), "net_mean": res.net.mean()})
    if res.qs_ceded is not None:
        out["quota_share_ceded_mean"] = res.qs_ceded.mean()
    return out


def occurrence_law(results) -> Lattice:
    """The year's largest occurrence (claim, without clusters): per line from its count law's
    generating function, over several independent lines the product of their cdfs
    (:func:`~polyconv.dist.exceedance.largest_of`)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        each = [largest_claim(r.spec.counts.law, r.per_occurrence) for r in results]
        return each[0] if len(each) == 1 else largest_of(each)


def return_table(largest, gross, net, periods) -> tuple[Table, list]:
    """Occurrence (largest claim) and aggregate amounts at each return period."""
    rows_g = return_period_table(largest, gross, periods)
    rows_n = return_period_table(None, net, periods) if net is not None else None
    header = ["return period", "probability per year", "largest occurrence (OEP)",
              "aggregate gross (AEP)"] + (["aggregate net"] if net is not None else [])
    rows, facts = [], []
    for i, r in enumerate(rows_g):
        cells = [f"1 in {r.years:g}", fmt_prob(r.probability),
                 fmt(r.occurrence) if largest is not None else "-", fmt(r.aggregate)]
        fact = {"years": r.years, "probability": r.probability,
                "occurrence": r.occurrence if largest is not None else None,
                "aggregate": r.aggregate}
        if rows_n is not None:
            cells.append(fmt(rows_n[i].aggregate))
            fact["aggregate_net"] = rows_n[i].aggregate
        rows.append(cells)
        facts.append(fact)
    return Table("Return periods (amount exceeded with probability 1/T per year)", header,
                 rows), facts


def exceedance_table(largest, gross, amounts) -> tuple[Table, list]:
    """OEP and AEP at the given amounts (the exceedance curves at the retentions)."""
    rows, facts = [], []
    for x in amounts:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            aep = _sf(gross, x)
            oep = _sf(largest, x) if largest is not None else math.nan
        rows.append([fmt(x), fmt_prob(oep) if largest is not None else "-", fmt_prob(aep)])
        facts.append({"amount": x, "oep": oep if largest is not None else None, "aep": aep})
    return Table("Exceedance probabilities", ["amount", "OEP P(largest occurrence > x)",
                                              "AEP P(S > x)"], rows), facts


def _sf(lat: Lattice, x: float) -> float:
    """``P(X > x)``; 0 past a grid that holds all the mass."""
    end = lat.origin + lat.step * (len(lat) - 1)
    if x >= end and lat.truncated_mass == 0:
        return 0.0
    return float(lat.sf(x))


def layers_table(total: Lattice, extras: dict, per_claim: Lattice | None
                 ) -> tuple[Table, list] | None:
    """Expected loss (and distorted prices) of the annual layers; ILFs per claim."""
    layers = extras["layers"]
    if not layers:
        return None
    g = {f"{k} {v:g}": DISTORTIONS[k](v) for k, v in extras["distortions"].items()}
    rows_t = layer_table(total, layers, g)
    basic = extras["basic_limit"]
    ilf = layer_table(per_claim, layers, None, basic) if basic and per_claim is not None \
        else None
    header = ["layer (annual)", "expected loss"] + list(g) + (
        ["ILF per claim (limit a + l)"] if ilf else [])
    rows, facts = [], []
    for i, r in enumerate(rows_t):
        cells = [f"{fmt(r.limit)} xs {fmt(r.attachment)}", fmt(r.expected)] + \
            [fmt(r.priced[k]) for k in g]
        fact = {"limit": r.limit, "attachment": r.attachment, "expected": r.expected,
                "priced": dict(r.priced)}
        if ilf:
            cells.append(f"{ilf[i].ilf:.5g}")
            fact["ilf"] = ilf[i].ilf
        rows.append(cells)
        facts.append(fact)
    return Table("Layer prices", header, rows), facts


def checks_table(results) -> Table:
    """The mean checks of every line: law's exact value beside the lattice's."""
    rows = [[r.spec.name, q, fmt(a) if a is not None else "-", fmt(b)]
            for r in results for q, a, b in r.checks]
    return Table("Mean checks (exact law vs lattice)", ["line", "quantity", "law (exact)",
                                                       "lattice"], rows)


def ceded_rows(results) -> list[list[str]]:
    """``[name, E[recovery], premium, E[RP]]`` per line with an XoL layer."""
    return [[r.spec.name, fmt(r.programme.expected_ceded), fmt(r.programme.premium),
             fmt(r.programme.expected_reinstatement_premium)]
            for r in results if r.programme is not None]


def as_floats(x) -> list[float]:
    """Helper for JSON lists."""
    return [float(v) for v in np.asarray(x, dtype=float)]


def reinsurance_tables(levels, level: float, results, facts: dict) -> list:
    """Side-by-side programme tables and the recovery/net split of the gross TVaR."""
    tables = []
    reins = {}
    for r in results:
        if r.programme is None and r.qs_ceded is None:
            continue
        tab = programme_table(r, levels)
        tables.append(Table(f"Reinsurance ({r.spec.name}): gross, ceded and net "
                                     "side by side", tab[0], tab[1:]))
        reins[r.spec.name] = programme_facts(r)
        if r.programme is not None:
            split = split_table(r.spec.name, r.programme, level)
            if split is not None:
                tables.append(split[0])
                reins[r.spec.name]["split"] = split[1]
    ceded = ceded_rows(results)
    if ceded:
        tables.append(Table("Excess of loss: expected recovery and premiums",
                                     ["line", "expected recovery", "upfront premium",
                                      "expected reinstatement premium"], ceded))
    if reins:
        facts["reinsurance"] = reins
    return tables
