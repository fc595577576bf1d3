"""Shared wording and formatting of reports: the caution, numbers, JSON, captured warnings."""

from __future__ import annotations

import argparse
import contextlib
import json
import math
import textwrap
import warnings
from collections.abc import Iterator
from decimal import ROUND_CEILING, ROUND_FLOOR, ROUND_HALF_EVEN, Decimal
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from ..dist import Lattice

CAUTION_LINES = (
    "CAUTION: model output, not advice.",
    "Assumptions: independence ({independence}); discretisation ({discretisation}); "
    "truncation ({truncation}).",
    "Defer to local regulation and codes and to licensed {practice} practice before relying on "
    "these numbers.",
)


def caution(independence: str, discretisation: str, truncation: str, practice: str) -> list[str]:
    """The caution every aggregate and delays report carries, with its assumptions filled in.

    Parameters
    ----------
    independence : str
        What is assumed independent of what.
    discretisation : str
        How continuous laws were put on the grid.
    truncation : str
        What was cut off, and how much mass that was.
    practice : str
        ``"actuarial"`` or ``"engineering"``.
    """
    values = dict(independence=independence, discretisation=discretisation,
                  truncation=truncation, practice=practice)
    return [line.format(**values) for line in CAUTION_LINES]


def paragraph(text: str, width: int = 88) -> str:
    """A help description wrapped for the terminal (argparse's raw formatter keeps it as is)."""
    return textwrap.fill(" ".join(text.split()), width=width)


def add_command(sub, name: str, *, help: str, description: str, epilog: str):
    """Register sub-command ``name`` on ``sub`` (an argparse subparsers object) and return its
    parser: ``description`` wrapped by :func:`paragraph`, the ``epilog`` examples kept as
    written."""
    return sub.add_parser(name, help=help, description=paragraph(description), epilog=epilog,
                          formatter_class=argparse.RawDescriptionHelpFormatter)


def wrap(lines: list[str], width: int = 96, indent: str = "") -> list[str]:
    """Wrap each line for the terminal; continuation lines are indented two more spaces."""
    out = []
    for line in lines:
        out += textwrap.wrap(line, width=width, initial_indent=indent,
                             subsequent_indent=indent + "  ") or [indent]
    return out


def fmt(x: float | None) -> str:
    """A number for a table: ``n/a`` for None/nan, thousands separators for large values."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if isinstance(x, (int, np.integer)):
        return f"{int(x):,}"
    x = float(x)
    if x.is_integer() and abs(x) < 1e15:
        return f"{x:,.0f}"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    ax = abs(x)
    if ax >= 1e12 or (0 < ax < 1e-3):
        return f"{x:.4e}"
    if ax >= 1e4:
        return f"{x:,.0f}"
    if ax >= 1:
        return f"{x:,.2f}"
    return f"{x:.4f}"


def fmt_prob(p: float | None) -> str:
    """A probability: ``3.1e-04`` style, ``n/a`` for nan."""
    if p is None or (isinstance(p, float) and math.isnan(p)):
        return "n/a"
    if p == 0:
        return "0"
    return f"{p:.3e}"


def level_name(p: float) -> str:
    """``0.995`` -> ``"99.5%"``; ``0.999999`` -> ``"99.9999%"`` (never rounded up to 100%).

    The label is the decimal shift of ``repr(p)`` (the shortest decimal that reads back as
    ``p``), so it shows every digit the user wrote and no float noise of ``p * 100``.
    """
    return f"{_decimal_text(Decimal(repr(float(p))) * 100)}%"


def percentile_name(q: float) -> str:
    """``99.9`` -> ``"p99.9"``, ``99.9999`` -> ``"p99.9999"`` (the shortest decimal of ``q``)."""
    return f"p{_decimal_text(Decimal(repr(float(q))))}"


def percent_level(q: float) -> float:
    """A percentile as a level without float noise: ``99.9`` -> ``0.999`` (not
    ``0.9990000000000001``, which ``99.9 / 100`` gives)."""
    return float(Decimal(repr(float(q))) / 100)


def number_name(x: float) -> str:
    """A number as written, e.g. a retention, deadline or step: ``5e6`` -> ``"5,000,000"``,
    ``2.5`` -> ``"2.5"``; ``repr`` style (``1e-300``) below 1e-4 or from 1e15 on."""
    ax = abs(float(x))
    if ax != 0 and (ax < 1e-4 or ax >= 1e15 or not math.isfinite(ax)):
        return repr(float(x))
    text = _decimal_text(Decimal(repr(float(x))))
    whole, _, frac = text.partition(".")
    sign = "-" if whole.startswith("-") else ""
    whole = f"{int(whole.lstrip('-') or 0):,}"
    return sign + whole + (f".{frac}" if frac else "")


def _decimal_text(d: Decimal) -> str:
    """Plain positional text of a decimal, no exponent, no trailing zeros."""
    text = format(d.normalize(), "f")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


JSON_DIGITS = 12
"""Significant digits of every float in a report's JSON and CSV files.

Each float is rounded to 12 significant digits and written as the shortest text that reads
back as that rounded float (so ``0.30000000000000004`` is written ``0.3``).  Twelve digits keep
every reported measure well inside its certified range (the bounds we print are far wider than
a relative 5e-13), while dropping the last bits of binary float noise.  The two ends of a
certified range are rounded outwards (``low`` down, ``high`` up) so the written range still
contains the computed one; see :func:`round_significant`.
"""


def round_significant(x: float, digits: int = JSON_DIGITS, direction: str = "nearest") -> float:
    """``x`` rounded to ``digits`` significant decimal digits.

    Parameters
    ----------
    x : float
        The number; nan and infinities are returned as they are.
    digits : int
        Significant digits kept.
    direction : {"nearest", "down", "up"}
        Round to nearest (ties to even), towards -inf, or towards +inf.  With ``"down"`` the
        result is never above ``x`` and with ``"up"`` never below it (the decimal is rounded in
        that direction, and the float nearest to it cannot cross ``x``, itself a float).

    Returns
    -------
    float
        Its shortest ``repr`` has at most ``digits`` significant digits.
    """
    x = float(x)
    if not math.isfinite(x) or x == 0.0:
        return x
    mode = {"nearest": ROUND_HALF_EVEN, "down": ROUND_FLOOR, "up": ROUND_CEILING}[direction]
    d = Decimal(x)
    quantum = Decimal(1).scaleb(d.adjusted() - digits + 1)
    return float(d.quantize(quantum, rounding=mode))


def jsonable(obj: Any, digits: int | None = None) -> Any:
    """Replace non-finite floats by None and numpy scalars by Python numbers, recursively;
    with ``digits``, round every float to that many significant digits (:data:`JSON_DIGITS`)."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v, digits) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v, digits) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v, digits) for v in obj.tolist()]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        if not math.isfinite(x):
            return None
        return x if digits is None else round_significant(x, digits)
    return obj


def dumps(obj: Any, digits: int | None = None) -> str:
    """Strict JSON text (no NaN/Infinity tokens); ``digits``: see :func:`jsonable`."""
    return json.dumps(jsonable(obj, digits), indent=2, allow_nan=False)


def csv_number(x: float, direction: str = "nearest") -> str:
    """A float for a CSV cell: :data:`JSON_DIGITS` significant digits, shortest text, no
    ``.0`` on whole numbers, empty for nan; ``inf``/``-inf`` spelled out."""
    x = float(x)
    if math.isnan(x):
        return ""
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    r = round_significant(x, JSON_DIGITS, direction)
    return str(int(r)) if r.is_integer() and abs(r) < 1e16 else repr(r)


def plan_dict(plan) -> dict:
    """The public fields of a :class:`polyconv.Plan` as a dict."""
    return {"engine": plan.engine, "exact": bool(plan.exact), "certificate": plan.certificate,
            "error_bound": float(plan.error_bound),
            "predicted_seconds": float(plan.predicted_seconds), "reason": plan.reason}


@contextlib.contextmanager
def collect_warnings(notes: list[str]) -> Iterator[None]:
    """Record library warnings (TruncationWarning, AccuracyWarning...) as report notes.

    Each distinct message is appended once to ``notes`` prefixed with its category name, so the
    report says what the library cautioned about instead of printing Python warning lines.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for w in caught:
        text = f"{w.category.__name__}: {w.message}"
        if text not in notes:
            notes.append(text)


def md_table(header: list[str], rows: list[list[str]]) -> str:
    """A Markdown table."""
    out = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(out)


def text_table(header: list[str], rows: list[list[str]], indent: str = "  ") -> str:
    """An aligned plain-text table for the terminal (first column left, others right)."""
    widths = [max(len(str(c)) for c in col) for col in zip(header, *rows, strict=True)]
    lines = []
    for r in [header, *rows]:
        cells = [str(c).ljust(w) if i == 0 else str(c).rjust(w)
                 for i, (c, w) in enumerate(zip(r, widths, strict=True))]
        lines.append(indent + "  ".join(cells).rstrip())
    return "\n".join(lines)


def exceedance(lat: Lattice) -> np.ndarray:
    """``P(X > x_k)`` at every lattice point, summed from the right, truncated mass included."""
    pmf = np.asarray(lat.pmf)
    tail = np.cumsum(pmf[::-1])[::-1]
    return np.concatenate((tail[1:], [0.0])) + lat.truncated_mass


def distribution_csv(lat: Lattice, value_name: str) -> str:
    """CSV of value, probability, cdf and exceedance, stopping once the exceedance is noise
    (below the trust floor) or zero."""
    pmf = np.asarray(lat.pmf)
    sf = exceedance(lat)
    cdf = np.cumsum(pmf)
    cut = np.nonzero(sf <= lat.trust_floor)[0]
    end = int(cut[0]) + 1 if cut.size else pmf.size
    x = lat.values
    rows = [f"{value_name},probability,cdf,exceedance"]
    rows += [f"{x[i]:.10g},{float(pmf[i])!r},{float(cdf[i])!r},{float(sf[i])!r}"
             for i in range(end)]
    return "\n".join(rows) + "\n"


def add_spec_report_options(parser) -> None:
    """The options every spec-driven report command shares: SPEC, -o DIR, --json, --quiet."""
    parser.add_argument("spec", help="the TOML spec file")
    parser.add_argument("-o", "--output", metavar="DIR", default=None,
                        help="report folder (default: SPEC-NAME-report in the current folder)")
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def report_folder(spec_path: str, output: str | None) -> Path:
    """``-o DIR`` if given, else ``claims.toml`` -> ``./claims-report``."""
    return Path(output) if output else Path(Path(spec_path).stem + "-report")
