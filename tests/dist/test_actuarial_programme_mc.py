"""Monte Carlo check of a full reinsurance programme (gross, XoL recovery with reinstatements,
annual aggregate deductible and limit, net, reinstatement premium) against the bivariate lattice.

The severity is a table on the grid, so the lattice answer is exact up to rounding and the only
difference is Monte Carlo noise: every check allows 4.5 standard errors of the mean (or of a
binomial proportion) estimated from the same sample (central limit theorem; the chance that one
of the checks fails by noise alone is below 1e-4).  Fixed seed, 2e5 simulated years (about a
second).
"""

import math

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice
from polyconv.dist.reinsurance import XoLLayer, xol_programme

VALUES = np.array([1, 2, 3, 5, 8, 13, 20])
PROBS = np.array([0.30, 0.25, 0.15, 0.12, 0.10, 0.05, 0.03])
LAM = 3.0
LAYER = XoLLayer(deductible=2.0, limit=6.0, reinstatements=2, rates=(1.0, 0.5),
                 aggregate_deductible=2.0, aggregate_limit=15.0)
YEARS = 200_000
Z = 4.5


def _simulate(seed: int = 20261203):
    rng = np.random.default_rng(seed)
    n = rng.poisson(LAM, YEARS)
    year = np.repeat(np.arange(YEARS), n)
    x = rng.choice(VALUES, size=year.size, p=PROBS)
    per_claim = np.clip(x - LAYER.deductible, 0, LAYER.limit)
    gross = np.bincount(year, x, minlength=YEARS)
    layer_loss = np.bincount(year, per_claim, minlength=YEARS)
    cap = LAYER.aggregate_cap()
    rec = np.clip(layer_loss - LAYER.aggregate_deductible, 0, cap)
    return gross, rec, gross - rec


def _close(sample: np.ndarray, exact: float) -> bool:
    se = float(sample.std(ddof=1)) / math.sqrt(sample.size)
    return abs(float(sample.mean()) - exact) <= Z * se


def _prob_close(hits: np.ndarray, exact: float) -> bool:
    se = math.sqrt(max(exact * (1 - exact), 1e-12) / hits.size)
    return abs(float(hits.mean()) - exact) <= Z * se + 1e-12


def test_full_programme_against_monte_carlo():
    pmf = np.zeros(VALUES.max() + 1)
    pmf[VALUES] = PROBS
    res = xol_programme(stats.poisson(LAM), Lattice(pmf), LAYER, size=400)
    gross, rec, net = _simulate()
    assert _close(gross, res.gross.mean())
    assert _close(rec, res.ceded.mean())
    assert _close(net, res.net.mean())
    # gross = recovery + net holds path by path; the lattice means must add up the same way
    assert abs(res.gross.mean() - res.ceded.mean() - res.net.mean()) < 1e-9
    # reinstatement premium, pro rata as to amount (common practice, no source), with the
    # lattice's upfront premium: RP = P sum_i c_i min(max(C - (i-1) W, 0), W) / W
    w = LAYER.limit
    rp = res.premium * sum(c * np.clip(rec - i * w, 0, w) / w
                           for i, c in enumerate(LAYER.rate_list()))
    assert _close(rp, res.expected_reinstatement_premium)
    for lat, sample in ((res.gross, gross), (res.ceded, rec), (res.net, net)):
        for p in (0.9, 0.99):
            v = float(lat.value_at_risk(p))
            # the lattice's own quantile v: P(X <= v) >= p > P(X < v), checked on the sample
            assert _prob_close(sample <= v, float(lat.cdf(v)))
            assert float(lat.cdf(v)) >= p
        for t in (5.0, 20.0, 40.0):
            assert _prob_close(sample > t, float(lat.sf(t)))


def _simulate_clustered(basis: str, layer: XoLLayer, seed: int = 7):
    """Occurrences Poisson(1.5), claims per occurrence 1 + Poisson(0.8), amounts from the
    table; the layer on each claim (per risk) or on each occurrence's total."""
    rng = np.random.default_rng(seed)
    n = rng.poisson(1.5, YEARS)
    occ_year = np.repeat(np.arange(YEARS), n)
    k = 1 + rng.poisson(0.8, occ_year.size)
    occ = np.repeat(np.arange(occ_year.size), k)
    x = rng.choice(VALUES, size=occ.size, p=PROBS)
    occ_loss = np.bincount(occ, x, minlength=occ_year.size)
    if basis == "per-risk":
        per_occ = np.bincount(occ, np.clip(x - layer.deductible, 0, layer.limit),
                              minlength=occ_year.size)
    else:
        per_occ = np.clip(occ_loss - layer.deductible, 0, layer.limit)
    gross = np.bincount(occ_year, occ_loss, minlength=YEARS)
    layer_loss = np.bincount(occ_year, per_occ, minlength=YEARS)
    rec = np.clip(layer_loss - layer.aggregate_deductible, 0, layer.aggregate_cap())
    return gross, rec, gross - rec


@pytest.mark.parametrize("basis", ["per-risk", "per-occurrence"])
@pytest.mark.parametrize("layer", [LAYER, XoLLayer(deductible=4.0, limit=10.0),
                                   XoLLayer(deductible=2.0, limit=6.0, aggregate_deductible=3.0)],
                         ids=["aggregate-terms", "no-aggregate-terms", "deductible-only"])
def test_clustered_claims_per_risk_and_per_occurrence_against_monte_carlo(basis, layer):
    pmf = np.zeros(VALUES.max() + 1)
    pmf[VALUES] = PROBS
    # 1 + Poisson(0.8) claims per occurrence: scipy's poisson with loc = 1
    res = xol_programme(stats.poisson(1.5), Lattice(pmf), layer, size=600,
                        cluster=stats.poisson(0.8, loc=1), basis=basis)
    gross, rec, net = _simulate_clustered(basis, layer)
    assert _close(gross, res.gross.mean())
    assert _close(rec, res.ceded.mean())
    assert _close(net, res.net.mean())
    for lat, sample in ((res.ceded, rec), (res.net, net)):
        for t in (5.0, 15.0, 30.0):
            assert _prob_close(sample > t, float(lat.sf(t)))
