"""Largest claim, occurrence and aggregate exceedance curves, return periods.

With ``N`` claims (occurrences) in a year, independent of their i.i.d. amounts ``X_i``, the
largest claim ``M = max_i X_i`` (``M = 0`` when ``N = 0``) has

    ``P(M <= x) = E[F(x)^N] = P_N(F(x))``

(the count's generating function at the severity cdf; common practice, no source; e.g. Klugman,
Panjer & Willmot, *Loss Models*, from memory).  The occurrence exceedance probability is
``OEP(x) = 1 - P_N(F(x))``, the aggregate one ``AEP(x) = P(S > x)``.  A "1 in T years" amount is
the smallest grid amount whose exceedance probability is at most ``1/T``: the lattice's own
quantile at level ``1 - 1/T`` (never below; its certified bracket from the ledger).

Error ledger of the largest-claim law: a PGF is Lipschitz on ``[0, 1]`` with constant
``P_N'(1) = E[N]``, so the cdf of ``M`` errs by at most ``E[N] K`` where ``K`` bounds the
severity's cumulative error (plus rounding of ``exp``/``log``).

Caution: a model output, not advice; return periods assume years independent and identically
distributed, and state nothing about the timing of losses.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .counts import classify
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound

RETURN_PERIODS = (10, 50, 100, 200, 250, 500, 1000)
"""Default return periods in years."""

_U = 2.0 ** -53


def largest_claim(counts, severity: Lattice) -> Lattice:
    """Law of the largest of ``N`` claims (0 when there is none) on the severity's grid.

    ``P(M <= x_k) = P_N(F(x_k))`` (module docstring); the mass beyond the grid,
    ``1 - P_N(F(last))``, is the truncated part (it lies beyond, where the severity's does).
    When the severity's origin is above 0, the atom ``P(N = 0)`` at 0 is added below it.
    """
    law = classify(counts)
    if not isinstance(severity, Lattice):
        raise TypeError(f"severity must be a Lattice; got {type(severity).__name__}")
    h = severity.step
    k0 = round(severity.origin / h)
    if k0 < 0 or abs(severity.origin / h - k0) > 1e-9 * max(1.0, abs(k0)):
        raise ValueError("severity origin must be a non-negative whole multiple of its step")
    cdf = np.zeros(k0 + len(severity))
    cdf[k0:] = np.minimum(np.cumsum(severity.pmf), 1.0)
    big = np.array([law.log_pgf_at(float(c)) for c in cdf])
    cdf_m = np.where(np.isfinite(big), np.exp(np.minimum(big, 0.0)), 0.0)
    pmf = np.diff(np.concatenate([[0.0], cdf_m]))
    pmf = np.maximum(pmf, 0.0)
    e = severity.errors
    mean_n = float(counts.mean())
    cum = mean_n * cum_bound(e) + 8 * _U * (1 + float(np.max(np.abs(big[np.isfinite(big)]),
                                                             initial=0.0)))
    l1 = min(2.0, 2 * cum * pmf.size, 2 * mean_n * e.l1 + pmf.size * 16 * _U)
    moment = e.truncated_moment if not math.isinf(e.truncated_moment) else math.inf
    if e.truncated_moment != 0:
        moment = mean_n * e.truncated_moment if math.isfinite(e.truncated_moment) else math.inf
    led = ErrorLedger(min(2 * cum, l1), l1, 0.0, pmf.size if e.truncated_from >= len(severity)
                      else k0 + e.truncated_from, moment, min(cum, l1))
    return Lattice._make(pmf, h, 0.0, led)


def largest_of(lines: list[Lattice], step: float | None = None) -> Lattice:
    """Law of the largest of independent maxima (e.g. the year's largest claim over several
    lines, each from :func:`largest_claim`): ``P(M <= x) = prod_i P(M_i <= x)``.

    Evaluated at ``x = H j`` for ``H = step`` (default the finest step of the lines), so a
    point of a coarser or shifted grid moves up to the next multiple of ``H`` (never down: the
    exceedance is not understated).  Ledger: the cumulative errors add (``|prod a_i - prod b_i|
    <= sum |a_i - b_i|`` for numbers in [0, 1]) plus rounding; the mass beyond lies past the
    longest grid.
    """
    lines = list(lines)
    if not lines or not all(isinstance(x, Lattice) for x in lines):
        raise TypeError("lines must be a non-empty sequence of Lattice")
    h = min(x.step for x in lines) if step is None else float(step)
    if not (h > 0 and math.isfinite(h)):
        raise ValueError(f"step must be positive and finite; got {step!r}")
    n = max(math.ceil((x.origin + x.step * (len(x) - 1)) / h - 1e-9) + 1 for x in lines)
    grid = h * np.arange(n)
    cdf = np.ones(n)
    cum = 0.0
    for x in lines:
        k = np.floor((grid - x.origin) / x.step + 1e-9).astype(np.int64)
        c = np.minimum(np.cumsum(x.pmf), 1.0)
        cdf *= np.where(k < 0, 0.0, c[np.clip(k, 0, len(x) - 1)])
        cum += cum_bound(x.errors)
    cum += 4 * len(lines) * _U
    pmf = np.maximum(np.diff(np.concatenate([[0.0], cdf])), 0.0)
    truncated = max(0.0, 1.0 - float(cdf[-1]))
    l1 = min(2.0, 2 * cum * n)
    led = ErrorLedger(min(2 * cum, l1), l1, truncated, n, 0.0 if truncated == 0 else math.inf,
                      min(cum, l1))
    return Lattice._make(pmf, h, 0.0, led)


def occurrence_exceedance(counts, severity: Lattice, x) -> np.ndarray:
    """``OEP(x) = 1 - P_N(F(x))`` at amounts ``x`` (``nan`` past the grid where the severity's
    truncated mass may lie)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.asarray(largest_claim(counts, severity).sf(x))


def aggregate_exceedance(aggregate: Lattice, x) -> np.ndarray:
    """``AEP(x) = P(S > x)`` (the aggregate lattice's own survival function)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.asarray(aggregate.sf(x))


@dataclass(frozen=True)
class ReturnPeriodRow:
    """One row of a return-period table (amounts on the grid, with certified brackets)."""

    years: float
    probability: float
    occurrence: float
    occurrence_bracket: tuple[float, float]
    aggregate: float
    aggregate_bracket: tuple[float, float]


def return_period_table(largest: Lattice | None, aggregate: Lattice | None,
                        periods=RETURN_PERIODS) -> list[ReturnPeriodRow]:
    """Amounts exceeded with probability ``1/T`` per year, for each return period ``T``.

    Parameters
    ----------
    largest : Lattice or None
        Law of the year's largest claim (:func:`largest_claim`): the occurrence column.
    aggregate : Lattice or None
        Law of the year's total: the aggregate column.
    periods : sequence of float
        Return periods in years, each ``> 1``.

    Returns
    -------
    list of ReturnPeriodRow
        ``nan`` where the grid does not reach the level (the bracket then ends in ``inf``).
    """
    rows = []
    for t in periods:
        if not (isinstance(t, (int, float)) and t > 1 and math.isfinite(t)):
            raise ValueError(f"return periods must be finite numbers > 1 (years); got {t!r}")
        p = 1.0 - 1.0 / float(t)
        cells = []
        for lat in (largest, aggregate):
            if lat is None:
                cells.append((math.nan, (math.nan, math.nan)))
                continue
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                value = float(lat.quantile(p))
                bracket = lat.quantile_bracket(p)
            cells.append((value, bracket))
        rows.append(ReturnPeriodRow(float(t), 1.0 / float(t), cells[0][0], cells[0][1],
                                    cells[1][0], cells[1][1]))
    return rows
