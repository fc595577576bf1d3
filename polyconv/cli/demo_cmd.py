"""``polyconv demo``: the three kinds of work on bundled, invented scenarios.

* ``aggregate`` on ``quillmere_claims.toml``: a fictional regional insurer, Quillmere Mutual;
* ``delays`` on ``larkspur_pipeline.toml``: the order pipeline of a fictional shop, Larkspur
  Parcel;
* exact counting by polynomial products: three dice, fifty dice (big integers) and coin change.

Everything is written to one report folder (``./polyconv-demo`` by default): ``report.md``, the
CSVs and PNGs of each part, and copies of the two spec files to edit and re-run (a copy the user
has edited is kept, never overwritten).  The folder is built in a temporary sibling and swapped
into place (see :mod:`polyconv.cli.fileio`).
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import numpy as np

from ..pipeline.execute import convolve
from ..pipeline.prepare import plan
from . import aggregate_cmd, delays_cmd, plots
from . import distribution_report as skeleton
from .fileio import ReportFolder, unlimited_int_digits
from .progress import Steps
from .report import add_command, dumps, md_table
from .spec import parse_spec

SCENARIOS = ("quillmere_claims.toml", "larkspur_pipeline.toml")
EXAMPLES = ("quillmere_programme.toml",)
"""Bundled specs copied beside the report but not run by the demo (each names its command)."""
COINS = (1, 5, 10, 25, 50)
"""Coin values in cents for the coin-change count."""

EXAMPLE = """example:
  polyconv demo                       writes ./polyconv-demo/ (report.md, CSVs, PNGs, specs)
  polyconv demo --output /tmp/demo    somewhere else
  polyconv demo --json                the numbers as JSON
"""


def register(sub) -> None:
    """Add the ``demo`` sub-command to ``sub``."""
    p = add_command(
        sub, "demo",
        help="run aggregate, delays and exact counting on bundled invented scenarios",
        description=(
            "Run the three kinds of work on invented data: the aggregate claims of a "
            "fictional insurer (Quillmere Mutual), the delays of a fictional order pipeline "
            "(Larkspur Parcel) and exact counts from polynomial products (dice, coin change). "
            "Writes a report folder and prints where."),
        epilog=EXAMPLE,
    )
    p.add_argument("-o", "--output", metavar="DIR", default="polyconv-demo",
                   help="report folder (default: ./polyconv-demo)")
    p.add_argument("--json", action="store_true", help="print a machine-readable summary")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


def scenario_text(name: str) -> str:
    """The text of a bundled scenario file."""
    return resources.files("polyconv").joinpath(f"data/demo/{name}").read_text(encoding="utf-8")


# ------------------------------------------------------------------------ exact counting


def dice_counts(dice: int, faces: int = 6) -> dict[int, int]:
    """Ways to roll each total with ``dice`` fair dice: coefficients of
    ``(x + x^2 + ... + x^faces)^dice``, by repeated exact products (square and multiply)."""
    die = np.array([0] + [1] * faces, dtype=np.int64)
    result = np.array([1], dtype=np.int64)
    power = die
    k = dice
    while k:
        if k & 1:
            result = convolve(result, power)
        k >>= 1
        if k:
            power = convolve(power, power)
    return {t: int(w) for t, w in enumerate(result) if w}


def coin_change(amount: int, coins: tuple[int, ...] = COINS) -> list[int]:
    """Ways to pay every amount ``0..amount`` with unlimited coins: the first ``amount + 1``
    coefficients of ``prod_c 1 / (1 - x^c)``, as truncated exact products (``length=``)."""
    ways = np.zeros(amount + 1, dtype=np.int64)
    ways[0] = 1
    for c in coins:
        series = np.zeros(amount + 1, dtype=np.int64)
        series[::c] = 1
        ways = convolve(ways, series, length=amount + 1)
    return [int(w) for w in ways]


def counting() -> dict:
    """The counting part of the demo."""
    three = dice_counts(3)
    fifty = dice_counts(50)
    mode_total = max(fifty, key=fifty.get)
    change = coin_change(10_000)
    return {
        "three_dice": three,
        "fifty_dice": {"most_likely_total": mode_total, "ways": fifty[mode_total],
                       "all_outcomes": sum(fifty.values()), "six_to_the_50": 6**50,
                       "probability": fifty[mode_total] / 6**50},
        "coin_change": {"coins_cents": list(COINS), "ways_100": change[100],
                        "ways_10000": change[10_000],
                        "plan": str(plan(np.ones(10_001, dtype=np.int64),
                                             np.ones(10_001, dtype=np.int64),
                                             length=10_001).engine)},
        "_change_table": change,
    }


def counting_markdown(c: dict, figure: str | None) -> str:
    """The counting section of report.md."""
    three = c["three_dice"]
    f = c["fifty_dice"]
    cc = c["coin_change"]
    lines = ["## 3. Exact counts from polynomial products", "",
             "Three six-sided dice: the coefficient of x^s in (x + x^2 + ... + x^6)^3 is the "
             "number of ways to roll the total s.", "",
             md_table(["total"] + [str(t) for t in three], [["ways"] + [str(w) for w in
                                                                      three.values()]]), "",
             f"Total {sum(three.values())} = 6^3 outcomes.", "",
             f"Fifty dice (exact big integers): the most likely total is {f['most_likely_total']}"
             f", reached in {f['ways']} of the 6^50 = {f['six_to_the_50']} outcomes "
             f"(probability {f['probability']:.6f}).", "",
             f"Coin change with coins of {', '.join(map(str, cc['coins_cents']))} cents: "
             f"{cc['ways_100']} ways to pay 1.00 and {cc['ways_10000']} ways to pay 100.00 "
             "(first coefficients of the product of 1 / (1 - x^c), truncated products).", "",
             "Files: `dice.csv` (three dice), `coin_change.csv` (ways to pay 0..10000 cents)"
             + (f", `{figure}`." if figure else "."), ""]
    if figure:
        lines += [f"![]({figure})", ""]
    return "\n".join(lines)


# ------------------------------------------------------------------------------- report


def report_markdown(claims, pipeline, counts: dict, figures: dict[str, str | None]) -> str:
    """``report.md``: the three parts, each with its caution where it applies."""
    parts = ["# polyconv demo (invented scenarios)", "",
             "Every name and number in this report is invented to show what polyconv "
             "computes. Edit the copied spec files and re-run `polyconv aggregate` or "
             "`polyconv delays` on them.", ""]
    for number, (res, command, spec_name, part) in enumerate(
            ((claims, aggregate_cmd, SCENARIOS[0], "claims"),
             (pipeline, delays_cmd, SCENARIOS[1], "pipeline")), start=1):
        parts += [skeleton.brief_markdown(command.report_of(res), f"{number}. ",
                                          f"Spec: `{spec_name}`; details: `{part}_summary.md`."),
                  ""]
        if figures.get(part):
            parts += [f"![]({figures[part]})", ""]
    parts.append(counting_markdown(counts, figures.get("dice")))
    parts += ["", "Also copied: `quillmere_programme.toml`, three invented lines of Quillmere "
              "Mutual with a reinsurance programme (excess of loss with reinstatements and an "
              "aggregate limit, a quota share), allocation and return periods; run "
              "`polyconv aggregate quillmere_programme.toml`. Model output, not advice."]
    return "\n".join(parts)


def run(args) -> int:
    """Entry point of ``polyconv demo``."""
    folder = Path(args.output)
    with Steps(7, "demo", args.quiet) as steps, unlimited_int_digits():
        claims_spec = aggregate_cmd.parse(parse_spec(scenario_text(SCENARIOS[0]), SCENARIOS[0]))
        claims = aggregate_cmd.compute(claims_spec)
        steps.step("claims")
        pipe_spec = delays_cmd.parse(parse_spec(scenario_text(SCENARIOS[1]), SCENARIOS[1]))
        pipeline = delays_cmd.compute(pipe_spec)
        steps.step("pipeline")
        counts = counting()
        steps.step("counting")
        with ReportFolder(folder) as out:
            figures: dict[str, str | None] = {}
            names = aggregate_cmd.write_report(claims, out, prefix="claims_")
            figures["claims"] = next((n for n in names if n.endswith(".png")), None)
            steps.step("claims report")
            names = delays_cmd.write_report(pipeline, out, prefix="pipeline_")
            figures["pipeline"] = next((n for n in names if n.endswith(".png")), None)
            steps.step("pipeline report")
            three = counts["three_dice"]
            out.write_text("dice.csv", "total,ways\n" + "".join(f"{t},{w}\n"
                                                              for t, w in three.items()))
            out.write_text("coin_change.csv", "cents,ways\n" + "".join(
                f"{i},{w}\n" for i, w in enumerate(counts["_change_table"])))
            if plots.available():
                figures["dice"] = "dice.png"
                out.write_bytes("dice.png", plots.counts_figure(
                    list(three), list(three.values()),
                    title="Three six-sided dice: ways to roll each total (exact)",
                    xlabel="total of three dice (pips)", ylabel="number of ways (of 216)"))
            kept = write_spec_copies(out)
            out.write_text("report.md", report_markdown(claims, pipeline, counts, figures))
            steps.step("report.md")
        summary = {"output": str(folder), "kept_edited_specs": kept,
                   "claims": aggregate_cmd.json_summary(claims),
                   "pipeline": delays_cmd.json_summary(pipeline),
                   "counting": {k: v for k, v in counts.items() if not k.startswith("_")}}
        if args.json:
            print(dumps(summary))
            return 0
        print(terminal_text(claims, pipeline, counts, folder))
        for name in kept:
            print(f"kept your edited {folder / name} (the bundled copy was not written; delete "
                  "the file to get it back)")
    return 0


def write_spec_copies(out: ReportFolder) -> list[str]:
    """Copy the bundled specs into the report, except where the folder being replaced holds an
    edited copy (one that differs from ours): that copy is kept.  Returns the kept names."""
    kept = []
    for name in SCENARIOS + EXAMPLES:
        ours = scenario_text(name).encode("utf-8")
        old = out.existing(name)
        if old is not None:
            try:
                edited = old.read_bytes() != ours
            except OSError:
                edited = True
            if edited:  # ReportFolder carries it over into the new folder
                kept.append(name)
                continue
        out.write_bytes(name, ours)
    return kept


def terminal_text(claims, pipeline, counts: dict, folder: Path) -> str:
    """The short printed summary."""
    f = counts["fifty_dice"]
    cc = counts["coin_change"]
    lines = ["polyconv demo: invented scenarios", ""]
    for number, (res, command) in enumerate(((claims, aggregate_cmd), (pipeline, delays_cmd)),
                                            start=1):
        lines += skeleton.brief_text(command.report_of(res), f"{number}. ", indent="   ")
        lines.append("")
    lines += ["3. Exact counts by polynomial products",
              "   three dice: " + " ".join(f"{t}:{w}" for t, w in
                                           counts["three_dice"].items()),
              f"   fifty dice: total {f['most_likely_total']} in {f['ways']} of 6^50 ways",
              f"   coin change: {cc['ways_100']} ways to pay 1.00, {cc['ways_10000']} ways "
              "to pay 100.00", "",
              f"report written to {folder}/ (open {folder / 'report.md'})"]
    if not plots.available():
        lines.append(plots.MISSING_NOTE)
    return "\n".join(lines)
