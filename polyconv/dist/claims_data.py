"""Observed claims as model input: empirical severity and count laws with sample-size caveats.

Amounts go on the grid ``step * k`` by linear splitting between the two neighbouring points
(mass and mean of the sample kept exactly; the method of :func:`polyconv.dist.portfolio.regrid`).
The caveats are those of any empirical law: with ``n`` observations the empirical cdf is within
``eps = sqrt(ln(2 / alpha) / (2 n))`` of the true one everywhere with probability ``1 - alpha``
(Dvoretzky-Kiefer-Wolfowitz inequality with Massart's constant, Ann. Probab. 18 (1990)); nothing
is known beyond the largest observation, so levels above ``1 - 1/n`` of one claim (and the tail
of the aggregate they drive) rest on a handful of claims; counts from ``m`` years give a mean
with standard error ``sd / sqrt(m)``.

Caution: a model output, not advice; the data's relevance (inflation, exposure changes, IBNR) is
for the actuary to judge.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .count_laws import empirical_counts
from .lattice import Lattice


@dataclass
class EmpiricalInput:
    """A law built from data, with what the report must say about it."""

    law: object
    n: int
    caveats: list[str] = field(default_factory=list)
    dkw_band: float = math.nan


def dkw_band(n: int, alpha: float = 0.05) -> float:
    """Half-width of the distribution-free ``1 - alpha`` band of an empirical cdf of ``n``
    points (Dvoretzky-Kiefer-Wolfowitz-Massart)."""
    if n < 1:
        raise ValueError(f"n must be >= 1; got {n!r}")
    return math.sqrt(math.log(2.0 / alpha) / (2.0 * n))


def claims_severity(amounts, step: float, *, alpha: float = 0.05) -> EmpiricalInput:
    """Empirical severity on the grid of ``step`` from observed claim amounts (each ``1/n``)."""
    x = np.asarray(amounts, dtype=float)
    if x.ndim != 1 or x.size == 0 or not np.all(np.isfinite(x)) or np.any(x < 0):
        raise ValueError("amounts must be a non-empty list of finite amounts >= 0")
    h = float(step)
    if not (h > 0 and math.isfinite(h)):
        raise ValueError(f"step must be positive and finite; got {step!r}")
    n = x.size
    pos = x / h
    lo = np.floor(pos).astype(np.int64)
    w = pos - lo
    pmf = np.zeros(int(lo.max()) + 2)
    np.add.at(pmf, lo, (1.0 - w) / n)
    np.add.at(pmf, lo + 1, w / n)
    if pmf[-1] == 0:
        pmf = pmf[:-1]
    lat = Lattice(np.minimum(pmf, 1.0), h, 0.0)
    band = dkw_band(n, alpha)
    caveats = [
        f"severity from {n} observed claims (mean {float(x.mean()):,.6g}, largest "
        f"{float(x.max()):,.6g}): the empirical cdf is within {band:.3g} of the true one with "
        f"probability {1 - alpha:g} (Dvoretzky-Kiefer-Wolfowitz)",
        f"nothing is known beyond the largest claim {float(x.max()):,.6g}: per-claim levels above "
        f"{1 - 1 / n:.4g} rest on single observations; consider a fitted or spliced tail",
    ]
    if n < 30:
        caveats.append(f"only {n} claims: the severity's mean itself is uncertain by about "
                       f"{float(x.std(ddof=1)) / math.sqrt(n) if n > 1 else math.nan:,.3g} "
                       "(one standard error)")
    return EmpiricalInput(lat, n, caveats, band)


def claims_counts(per_year) -> EmpiricalInput:
    """Empirical claim-count law from the number of claims in each observed year."""
    c = np.asarray(per_year)
    if c.ndim != 1 or c.size == 0:
        raise ValueError("per_year must be a non-empty list of counts")
    law = empirical_counts(c)
    m = c.size
    mean = float(c.mean())
    sd = float(c.std(ddof=1)) if m > 1 else math.nan
    caveats = [f"claim counts from {m} years (mean {mean:.4g}, sd {sd:.3g}): the mean is known "
               f"to about {sd / math.sqrt(m):.3g} (one standard error); no year can have more "
               f"than {int(c.max())} claims under this law"]
    if m > 1 and sd * sd > 1.5 * mean:
        caveats.append("the counts are overdispersed (variance above the mean): a negative "
                       "binomial or mixed Poisson law may suit better than this table")
    return EmpiricalInput(law, m, caveats, dkw_band(m))
