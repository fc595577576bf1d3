"""The report on one computed distribution, shared by ``polyconv aggregate`` and ``delays``.

A command computes a :class:`~polyconv.dist.Lattice`, fills a :class:`DistributionReport` (what
was computed, the measures with their certified ranges, the caution with its assumptions) and
hands it to this module, which prints it, writes the report folder and the JSON:

* ``summary.md``: caution, what was computed, the measures table (value, certified range and
  status on every row), notes, the figure;
* ``summary.json``: the same numbers (:data:`polyconv.cli.report.JSON_DIGITS` significant
  digits, levels/retentions/deadlines as numbers in lists, the error ledger of the lattice).
  Each measure is an object ``{label, [level|retention|deadline|percentile], value, low, high,
  refused, reason}``; ``value`` is null when refused, ``high`` null when no finite upper end
  is known (JSON has no infinity);
* ``<stem>.csv``: the distribution (value, probability, cdf, exceedance);
* ``measures.csv``: one line per measure with its range and refusal flag;
* ``<stem>.png``: distribution and exceedance curve (when matplotlib is installed).

:func:`run_spec_command` is the whole life of a spec-driven command: read and check the spec,
compute with a progress bar, write the folder atomically, print text or JSON.  Nothing is
written when the spec or the computation is refused (exit status 2).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from ..dist import Lattice
from . import plots
from .bounded_rows import MeasureRow, measures_csv, rows_json
from .fileio import ReportFolder
from .progress import Steps
from .report import (
    JSON_DIGITS,
    add_command,
    add_spec_report_options,
    distribution_csv,
    dumps,
    fmt,
    fmt_prob,
    jsonable,
    md_table,
    number_name,
    report_folder,
    text_table,
    wrap,
)
from .spec import load_spec

MEASURE_HEADER = ["quantity", "value", "certified range", "status"]
RANGE_NOTE = ("The certified range of each measure contains the value that the exact "
              "computation on this grid would give: rounding of the convolutions and the "
              "probability beyond the grid are accounted for. It does not cover the choice of "
              "grid step (discretisation of continuous laws) nor the model itself. A measure "
              "whose range is too wide, or that the grid cannot answer, is refused on its row.")


@dataclass
class Table:
    """An extra table of a report (e.g. the stages of a delay network)."""

    heading: str
    header: list[str]
    rows: list[list[str]]


@dataclass
class DistributionReport:
    """Everything a report on one distribution shows.

    Attributes
    ----------
    title : str
        Heading of the report.
    stem : str
        File stem of the distribution CSV and figure (``"aggregate"``, ``"delays"``).
    value_name : str
        Name of the value column of the CSV (``"amount"``, ``"delay"``).
    quantity : str
        What the figure's axis measures (``"aggregate loss"``).
    unit : str
        Unit of the values.
    lattice : Lattice
        The distribution.
    described : list of [str, str]
        Rows saying what was computed (inputs, cover, network).
    rows : list of MeasureRow
        The measures, each with its certified range.
    caution : list of str
        The caution lines with this run's assumptions.
    facts : dict
        Command-specific JSON fields (inputs and settings).
    explanation : list of str
        Markdown paragraphs after the measures table.
    tables : list of Table
        Further tables (Markdown and terminal).
    preface : list of str
        Lines printed under the title.
    markers : list of (str, float)
        Vertical lines of the figure (VaR, percentiles).
    notes : list of str
        What the library warned about, and other remarks.
    """

    title: str
    stem: str
    value_name: str
    quantity: str
    unit: str
    lattice: Lattice
    described: list[list[str]]
    rows: list[MeasureRow]
    caution: list[str]
    facts: dict
    explanation: list[str] = field(default_factory=list)
    tables: list[Table] = field(default_factory=list)
    preface: list[str] = field(default_factory=list)
    markers: list[tuple[str, float]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    figure: Callable[[DistributionReport], bytes] | None = None
    """A command's own figure (``report -> PNG bytes``) instead of :func:`figure_png`."""


def grid_rows(lat: Lattice, unit: str) -> list[list[str]]:
    """The grid and the probability beyond it, as rows of the "what was computed" table."""
    end = lat.origin + lat.step * (len(lat) - 1)
    return [["probability beyond the grid", fmt_prob(lat.truncated_mass)],
            ["grid", f"{len(lat):,} points of {number_name(lat.step)} {unit}, up to "
             f"{fmt(end)} {unit}"]]


def ledger(lat: Lattice) -> dict:
    """The lattice's error ledger for the JSON (what every certified range is built from)."""
    return lat.errors._asdict()


PLAIN_STATUSES = ("ok", "met")
"""Statuses without a reason (``met``: a goal row of :mod:`polyconv.cli.aggregate_goal`)."""


def measure_cells(rep: DistributionReport) -> list[list[str]]:
    """The measures table, one row per measure."""
    return [r.cells() for r in rep.rows]


def footnoted_cells(rep: DistributionReport) -> tuple[list[list[str]], list[str]]:
    """The measures table for the terminal: a long status becomes ``REFUSED [1]`` or
    ``warning [1]``, its reason a footnote under the table (the same reason once)."""
    rows, notes = [], []
    for r in rep.rows:
        cells = r.cells()
        status = cells[3]
        if status not in PLAIN_STATUSES:
            flag, _, reason = status.partition(": ")
            if reason not in notes:
                notes.append(reason)
            cells[3] = f"{flag} [{notes.index(reason) + 1}]"
        rows.append(cells)
    return rows, [f"[{i}] {n}" for i, n in enumerate(notes, start=1)]


def terminal_text(rep: DistributionReport, folder: Path | None) -> str:
    """What the command prints."""
    cells, footnotes = footnoted_cells(rep)
    lines = [rep.title, *rep.preface, text_table(["input", "value"], rep.described),
             text_table(MEASURE_HEADER, cells)]
    lines += wrap(footnotes, indent="  ")
    for t in rep.tables:
        lines.append(text_table(t.header, t.rows))
    if rep.notes:
        lines.append("notes:")
        lines += wrap([f"- {n}" for n in rep.notes], indent="  ")
    lines += wrap(rep.caution)
    if folder is not None:
        lines.append(f"report written to {folder}/")
    return "\n".join(lines)


def caution_quote(lines: list[str]) -> str:
    """The caution as a Markdown block quote."""
    return "> " + "\n>\n> ".join(lines)


def markdown(rep: DistributionReport, figure: str | None, prefix: str = "") -> str:
    """``summary.md`` of the report folder."""
    parts = [f"# {rep.title}", "", caution_quote(rep.caution), ""]
    parts += [line for p in rep.preface for line in (p, "")]
    parts += [md_table(["input", "value"], rep.described), "",
              md_table(MEASURE_HEADER, measure_cells(rep)), "", RANGE_NOTE, ""]
    parts += [line for p in rep.explanation for line in (p, "")]
    for t in rep.tables:
        parts += [f"## {t.heading}", "", md_table(t.header, t.rows), ""]
    if rep.notes:
        parts += ["## Notes", ""] + [f"- {n}" for n in rep.notes] + [""]
    parts += ["## Files", "",
              f"- `{prefix}{rep.stem}.csv`: {rep.value_name}, probability, cdf, exceedance",
              f"- `{prefix}measures.csv`: every measure with its certified range and status",
              f"- `{prefix}summary.json`: the numbers above"]
    if figure:
        parts += [f"- `{figure}`: distribution and exceedance curve", "", f"![]({figure})"]
    return "\n".join(parts) + "\n"


def brief_markdown(rep: DistributionReport, number: str, source: str) -> str:
    """A report as one section of a longer document (the demo's ``report.md``)."""
    parts = [f"## {number}{rep.title}", "", caution_quote(rep.caution), "", source, ""]
    parts += [line for p in rep.preface for line in (p, "")]
    parts += [md_table(["input", "value"], rep.described), "",
              md_table(MEASURE_HEADER, measure_cells(rep)), "", RANGE_NOTE]
    return "\n".join(parts)


def brief_text(rep: DistributionReport, number: str, indent: str) -> list[str]:
    """A report in a few terminal lines: every measure (flagged when refused), the caution."""
    measures = []
    for r in rep.rows:
        _, value, _, status = r.cells()
        unit = f" {r.unit}" if r.unit and value != "refused" else ""
        measures.append(f"{r.label} {value}{unit}" + ("" if status in PLAIN_STATUSES else " (!)"))
    lines = [f"{number}{rep.title}"]
    lines += wrap(["; ".join(measures)], indent=indent)
    if any(r.status() not in PLAIN_STATUSES for r in rep.rows):
        lines += wrap(["(!) refused or warned: see the status column of the report"],
                      indent=indent)
    return lines + wrap(rep.caution, indent=indent)


def json_summary(rep: DistributionReport) -> dict:
    """The machine-readable summary: plain JSON values, every float rounded to
    :data:`~polyconv.cli.report.JSON_DIGITS` significant digits (ranges outwards), no
    infinities (``null``), so any ``json.dumps`` of it is free of float noise."""
    lat = rep.lattice
    return jsonable({"title": rep.title, **rep.facts, **rows_json(rep.rows),
                     "grid_step": lat.step, "grid_points": len(lat),
                     "truncated_mass": lat.truncated_mass, "errors": ledger(lat),
                     "notes": rep.notes, "caution": rep.caution}, JSON_DIGITS)


def json_text(summary: dict) -> str:
    """A summary as JSON text (strict: no NaN or Infinity tokens)."""
    return dumps(summary, digits=JSON_DIGITS)


def figure_png(rep: DistributionReport) -> bytes:
    """The figure of the report."""
    return plots.distribution_figure(rep.lattice, title=rep.title, quantity=rep.quantity,
                                     unit=rep.unit, markers=rep.markers,
                                     deadlines=[(r.argument, r.value, r.low, r.high)
                                                for r in rep.rows
                                                if r.argument_name == "deadline"])


PLOT_LIMIT = 1e250
"""Largest amount a report figure draws: tick and limit arithmetic (differences, margins,
products of the step) must stay finite in float64."""


def write_files(rep: DistributionReport, out: ReportFolder, prefix: str = "") -> list[str]:
    """Add the report's files to a report folder; returns the names written."""
    names = []
    fig_name = None
    top = rep.lattice.origin + rep.lattice.step * len(rep.lattice)
    if not (math.isfinite(top) and abs(top) <= PLOT_LIMIT and
            abs(rep.lattice.origin) <= PLOT_LIMIT):
        note = (f"figure left out: amounts up to {top:.3g} are beyond what a figure can draw "
                f"(|x| <= {PLOT_LIMIT:g})")
        if note not in rep.notes:
            rep.notes.append(note)
    elif plots.available():
        fig_name = f"{prefix}{rep.stem}.png"
        out.write_bytes(fig_name, (rep.figure or figure_png)(rep))
        names.append(fig_name)
    elif plots.MISSING_NOTE not in rep.notes:
        rep.notes.append(plots.MISSING_NOTE)
    files = {f"{prefix}{rep.stem}.csv": distribution_csv(rep.lattice, rep.value_name),
             f"{prefix}measures.csv": measures_csv(rep.rows),
             f"{prefix}summary.json": json_text(json_summary(rep)) + "\n",
             f"{prefix}summary.md": markdown(rep, fig_name, prefix)}
    for name, text in files.items():
        out.write_text(name, text)
    return names + list(files)


def finite_markers(rows: list[MeasureRow], key: str, most: int | None = None
                   ) -> list[tuple[str, float]]:
    """``(label, value)`` of the rows under ``key`` that have a value (for the figure)."""
    marks = [(r.label, r.value) for r in rows
             if r.key == key and not r.refused and math.isfinite(r.value)]
    return marks if most is None else marks[-most:]


def add_spec_command(sub, *, name: str, help: str, description: str, epilog: str,
                     run: Callable) -> None:
    """Register a spec-driven report command (``SPEC``, ``-o DIR``, ``--json``, ``--quiet``)."""
    p = add_command(sub, name, help=help, description=description, epilog=epilog)
    add_spec_report_options(p)
    p.set_defaults(run=run)


def run_spec_command(args, *, name: str, parse: Callable, compute: Callable,
                     report_of: Callable, step_count: Callable) -> int:
    """Read the spec, compute, write the report folder, print text or JSON; exit status 0.

    Parameters
    ----------
    args : argparse.Namespace
        ``spec``, ``output``, ``json`` and ``quiet`` (see
        :func:`polyconv.cli.report.add_spec_report_options`).
    name : str
        The command's name (progress bar).
    parse : callable
        ``SpecDoc -> spec`` (raises SpecError).
    compute : callable
        ``(spec, steps) -> result`` (raises SpecError when the spec cannot be answered).
    report_of : callable
        ``result -> DistributionReport``.
    step_count : callable
        ``spec -> int``: progress steps of ``compute`` plus one for writing.
    """
    spec = parse(load_spec(args.spec))
    with Steps(step_count(spec), name, args.quiet) as steps:
        rep = report_of(compute(spec, steps))
        steps.step("write report")
        folder = report_folder(args.spec, args.output)
        with ReportFolder(folder) as out:
            write_files(rep, out)
    if args.json:
        print(json_text({**json_summary(rep), "output": str(folder)}))
    else:
        print(terminal_text(rep, folder))
    return 0


@dataclass(frozen=True)
class SpecCommand:
    """The entry points of one spec-driven report command (``aggregate``, ``delays``): its own
    ``parse``, ``compute``, ``report_of`` and ``step_count`` (as in :func:`run_spec_command`),
    the rest from this skeleton."""

    name: str
    parse: Callable
    compute: Callable
    report_of: Callable
    step_count: Callable

    def write_report(self, res, out: ReportFolder, prefix: str = "") -> list[str]:
        """Add this result's files to a report folder; returns the names written."""
        return write_files(self.report_of(res), out, prefix)

    def json_summary(self, res) -> dict:
        """The machine-readable summary (floats already rounded, see :func:`json_summary`)."""
        return json_summary(self.report_of(res))

    def run(self, args) -> int:
        """Entry point of ``polyconv <name>``."""
        return run_spec_command(args, name=self.name, parse=self.parse, compute=self.compute,
                                report_of=self.report_of, step_count=self.step_count)
