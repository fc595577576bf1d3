"""Shared wording and formatting of reports: the caution, numbers, JSON, captured warnings."""

from __future__ import annotations

import contextlib
import json
import math
import textwrap
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from ..dist import Lattice

CAUTION_LINES = (
    "CAUTION: model output, not advice.",
    "Assumptions: independence ({independence}); discretisation ({discretisation}); "
    "truncation ({truncation}).",
    "Defer to local regulation and to qualified {practice} practice before relying on "
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
    """``0.995`` -> ``"99.5%"``."""
    return f"{p * 100:.10g}%"


def jsonable(obj: Any) -> Any:
    """Replace non-finite floats by None and numpy scalars by Python numbers, recursively."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        return x if math.isfinite(x) else None
    return obj


def dumps(obj: Any) -> str:
    """Strict JSON text (no NaN/Infinity tokens)."""
    return json.dumps(jsonable(obj), indent=2, allow_nan=False)


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
