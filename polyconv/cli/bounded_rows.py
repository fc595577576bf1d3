"""One reported measure with its certified range: asked of a Lattice, shown in a table, written
to JSON and CSV.

Every row of an ``aggregate`` or ``delays`` report (mean, standard deviation, VaR, TVaR,
percentiles, stop-loss premiums, deadline-miss probabilities) is a :class:`MeasureRow`: the
lattice's own answer, the range ``[low, high]`` that contains the answer of the exact computation
on this lattice (from :meth:`polyconv.dist.Lattice.bounded`), and a flag with the library's reason
when the measure is refused (bound too wide, or the grid cannot answer).  A refused measure is
never printed as a number: its value cell reads ``refused`` and the reason stands on its row.

Ranges are printed rounded outwards (``low`` down, ``high`` up) so that what a reader sees
contains the certified range; see :data:`polyconv.cli.report.JSON_DIGITS` for the files.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from decimal import ROUND_CEILING, ROUND_FLOOR, Decimal

from ..dist import Lattice
from .report import JSON_DIGITS, csv_number, fmt, fmt_prob, round_significant

STATUS_OK = "ok"


@dataclass(frozen=True)
class MeasureRow:
    """One measure of one distribution, with its certified range.

    Attributes
    ----------
    key : str
        Where the row goes in the JSON summary (``"mean"``, ``"var"``, ``"miss_probability"``...).
    label : str
        What a reader sees, e.g. ``"VaR 99.5%"`` or ``"P(delay > 250 ms)"``.
    unit : str
        Unit of the value (currency, time unit), ``""`` for a probability.
    argument_name : str
        Name of the argument in the JSON (``"level"``, ``"retention"``, ``"deadline"``,
        ``"percentile"``), ``""`` for a measure without one.
    argument : float or None
        The level, retention, deadline or percentile the measure was asked at.
    value, low, high : float
        The lattice's own answer (nan when refused) and its certified range.
    refused : bool
        True when the library refused the measure (the reason says why).
    reason : str
        ``""`` or one sentence from the library (why refused, or what it warns about).
    """

    key: str
    label: str
    unit: str
    argument_name: str
    argument: float | None
    value: float
    low: float
    high: float
    refused: bool
    reason: str

    @property
    def is_probability(self) -> bool:
        """True for a probability (printed ``9.6e-02`` style), False for an amount."""
        return self.unit == ""

    # -- table cells -----------------------------------------------------------------------
    def cells(self) -> list[str]:
        """``[quantity, value, certified range, status]`` for a text or Markdown table."""
        name = f"{self.label} ({self.unit})" if self.unit else self.label
        if self.refused or not math.isfinite(self.value):
            value = "refused"
        else:
            value = fmt_prob(self.value) if self.is_probability else fmt(self.value)
        return [name, value, range_text(self.low, self.high, self.is_probability),
                self.status()]

    def status(self) -> str:
        """``"ok"``, ``"REFUSED: reason"`` or ``"warning: reason"``."""
        if self.refused or not math.isfinite(self.value):
            return f"REFUSED: {self.reason or 'no value on this grid'}"
        return f"warning: {self.reason}" if self.reason else STATUS_OK

    # -- files -----------------------------------------------------------------------------
    def as_json(self) -> dict:
        """The row as a JSON object; the range rounded outwards (see module docstring)."""
        out: dict = {"label": self.label}
        if self.argument_name:
            out[self.argument_name] = self.argument
        out.update(value=self.value, low=round_significant(self.low, direction="down"),
                   high=round_significant(self.high, direction="up"),
                   refused=bool(self.refused), reason=self.reason)
        return out

    def csv_line(self) -> str:
        """``measure,label,argument,value,low,high,refused,reason`` (CSV, reason quoted)."""
        arg = "" if self.argument is None else csv_number(self.argument)
        reason = '"' + self.reason.replace('"', '""') + '"' if self.reason else ""
        return ",".join([self.key, _csv_text(self.label), arg, csv_number(self.value),
                         csv_number(self.low, "down"), csv_number(self.high, "up"),
                         "true" if self.refused else "false", reason])


class GoalRow(MeasureRow):
    """A measure of a spec's ``[goal]``: status ``met`` or ``refused: reason``."""

    def status(self) -> str:
        """``"met"`` or ``"refused: reason"``."""
        if self.refused or not math.isfinite(self.value):
            return f"refused: {self.reason or 'no value on this grid'}"
        return "met"


CSV_HEADER = "measure,label,argument,value,low,high,refused,reason"


def _csv_text(text: str) -> str:
    return '"' + text.replace('"', '""') + '"' if ("," in text or '"' in text) else text


def measures_csv(rows: list[MeasureRow]) -> str:
    """The measures of a report as CSV: one row each, its certified range and refusal flag."""
    return "\n".join([CSV_HEADER] + [r.csv_line() for r in rows]) + "\n"


def rows_json(rows: list[MeasureRow]) -> dict:
    """Rows grouped by key: a measure without argument is one object, the others a list in the
    order asked (retentions, deadlines and levels stay numbers, never object keys)."""
    out: dict = {}
    for r in rows:
        if r.argument_name:
            out.setdefault(r.key, []).append(r.as_json())
        else:
            out[r.key] = r.as_json()
    return out


# -- asking the lattice --------------------------------------------------------------------


def ask(lat: Lattice, measure: str, arg: float | None = None, *, key: str, label: str,
        unit: str, argument_name: str = "", argument: float | None = None) -> MeasureRow:
    """``lat.bounded(measure, arg)`` as a report row.

    Parameters
    ----------
    lat : Lattice
        The distribution.
    measure : str
        A measure of :meth:`polyconv.dist.Lattice.bounded` (``"mean"``, ``"std"``, ``"var"``,
        ``"tvar"``, ``"quantile"``, ``"stop_loss"``, ``"sf"``, ``"cdf"``).
    arg : float, optional
        Its argument (level, retention, point).
    key, label, unit, argument_name, argument
        See :class:`MeasureRow` (``argument`` defaults to ``arg``).
    """
    with warnings.catch_warnings():  # the row carries the reason; no second note
        warnings.simplefilter("ignore")
        b = lat.bounded(measure, arg)
    return MeasureRow(key, label, unit, argument_name,
                      arg if argument is None else argument, float(b.value), float(b.low),
                      float(b.high), bool(b.refused), str(b.reason))


# -- printed ranges ------------------------------------------------------------------------


def range_text(low: float, high: float, probability: bool) -> str:
    """The certified range as a reader sees it: ``[low, high]``, each end rounded outwards,
    with just enough significant digits (4 to :data:`~polyconv.cli.report.JSON_DIGITS`) that
    the printed range is at most twice as wide as the certified one.

    ``exact on this grid`` when the range is a single number; ``none`` when no range is known.
    """
    if math.isnan(low) or math.isnan(high):
        return "none"
    if low == high:
        return "exact on this grid"
    width = high - low
    lo_text = hi_text = ""
    for digits in range(4, JSON_DIGITS + 1):
        lo_text = _outward(low, digits, ROUND_FLOOR, probability)
        hi_text = _outward(high, digits, ROUND_CEILING, probability)
        shown = _value(hi_text) - _value(lo_text)
        if math.isinf(width) or shown <= 2 * width:
            break
    return f"[{lo_text}, {hi_text}]"


def _value(text: str) -> float:
    return float(text.replace(",", ""))


def _outward(x: float, digits: int, rounding: str, probability: bool) -> str:
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if x == 0:
        return "0"
    d = Decimal(x)
    q = d.quantize(Decimal(1).scaleb(d.adjusted() - digits + 1), rounding=rounding)
    ax = abs(x)
    if probability or ax >= 1e15 or ax < 1e-3:
        mantissa, _, exponent = f"{q:.{digits - 1}e}".partition("e")
        return f"{mantissa}e{int(exponent):+03d}"
    places = max(0, -q.as_tuple().exponent)
    return f"{q:,.{places}f}"

