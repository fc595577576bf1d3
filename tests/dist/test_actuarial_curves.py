"""Largest claim, exceedance curves, return periods, distortion prices, layer tables, claims
data."""

import math

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice, compound
from polyconv.dist.claims_data import claims_counts, claims_severity, dkw_band
from polyconv.dist.distortion import (
    distorted_mean,
    layer_price,
    layer_table,
    proportional_hazard,
    wang,
)
from polyconv.dist.exceedance import (
    aggregate_exceedance,
    largest_claim,
    largest_of,
    occurrence_exceedance,
    return_period_table,
)

SEV = Lattice.from_law(stats.expon(scale=10.0), step=1.0)


def test_largest_claim_against_the_poisson_closed_form():
    # source: P(M <= x) = P_N(F(x)) = exp(-lam (1 - F(x))) for Poisson counts (PGF at the cdf)
    lam = 3.0
    m = largest_claim(stats.poisson(lam), SEV)
    f = np.cumsum(SEV.pmf)
    np.testing.assert_allclose(np.cumsum(m.pmf), np.exp(-lam * (1 - f)), rtol=1e-12)
    assert m.pmf[0] == pytest.approx(math.exp(-lam * (1 - SEV.pmf[0])))
    oep = occurrence_exceedance(stats.poisson(lam), SEV, [20.0, 50.0])
    np.testing.assert_allclose(oep, 1 - np.exp(-lam * (1 - f[[20, 50]])), rtol=1e-10)


def test_largest_of_two_lines_against_the_product_of_poisson_pgfs():
    # source: independent lines, P(max <= x) = prod_i exp(-lam_i (1 - F_i(x))) (Poisson PGF at
    # the cdf); line 2 on step 2 is read as a step function on the finer grid
    a = Lattice([0.0, 0.5, 0.3, 0.2])
    b = Lattice([0.0, 0.6, 0.4], step=2.0)
    m = largest_of([largest_claim(stats.poisson(1.5), a), largest_claim(stats.poisson(0.7), b)])
    x = np.arange(5)
    fa = np.array([0, 0.5, 0.8, 1.0, 1.0])
    fb = np.array([0, 0, 0.6, 0.6, 1.0])
    ref = np.exp(-1.5 * (1 - fa)) * np.exp(-0.7 * (1 - fb))
    np.testing.assert_allclose(np.cumsum(m.pmf)[x], ref, rtol=1e-12)
    assert m.step == 1.0 and m.truncated_mass == 0.0
    assert m.errors.cumulative < 1e-14


def test_return_periods_against_the_count_pgf():
    # nbinom counts: the 1-in-T occurrence amount is the smallest x with
    # 1 - P_N(F(x)) <= 1/T, P_N(z) = (p / (1 - (1 - p) z))^n (scipy's parametrisation)
    n, p = 2.0, 0.4
    counts = stats.nbinom(n, p)
    f = np.cumsum(SEV.pmf)
    oep = 1 - (p / (1 - (1 - p) * f)) ** n
    agg = compound(counts, SEV)
    rows = return_period_table(largest_claim(counts, SEV), agg)
    assert [r.years for r in rows] == [10, 50, 100, 200, 250, 500, 1000]
    for r in rows:
        k = int(np.argmax(oep <= 1 / r.years))
        assert r.occurrence == pytest.approx(SEV.values[k])
        lo, hi = r.occurrence_bracket
        assert lo <= r.occurrence <= hi
        assert aggregate_exceedance(agg, r.aggregate) <= 1 / r.years + 1e-12
        assert aggregate_exceedance(agg, r.aggregate - 1.0) > 1 / r.years


def test_wang_and_ph_prices():
    # closed forms for the exponential with mean 10 (Wang 1995): PH with r gives
    # int exp(-x/(10 r)) dx = 10 r; identity gives the mean; on the lattice the sum of S(x_k)
    lat = Lattice.from_law(stats.expon(scale=10.0), step=0.05)
    # (the truncated mass 1e-12 counts as above each grid point: relative 3e-11)
    assert distorted_mean(lat, proportional_hazard(1.0)).value == pytest.approx(
        lat.mean(), rel=1e-9)
    ph = distorted_mean(lat, proportional_hazard(1.5)).value
    assert ph == pytest.approx(15.0, rel=5e-3)  # discretisation O(h)
    w = distorted_mean(lat, wang(0.0)).value
    assert w == pytest.approx(lat.mean(), rel=1e-9)
    assert distorted_mean(lat, wang(0.3)).value > w  # a loading (g(u) >= u)
    # a lattice sum by hand: two points 0 and 2 with mass 1/2: int g(S) = 2 g(1/2)
    two = Lattice([0.5, 0, 0.5])
    assert distorted_mean(two, proportional_hazard(2.0)).value == pytest.approx(
        2 * 0.5 ** 0.5)


def test_layer_table_and_ilf():
    lat = Lattice.from_law(stats.expon(scale=10.0), step=0.01, size=20000)
    rows = layer_table(lat, [(10.0, 0.0), (10.0, 10.0), (20.0, 20.0)],
                       {"ph 1.2": proportional_hazard(1.2)}, basic_limit=10.0)
    # E[min(max(X - a, 0), l)] = 10 (e^{-a/10} - e^{-(a+l)/10}) for the exponential (closed
    # form); the lattice's "nearest" rule is within O(h^2)
    for r in rows:
        ref = 10 * (math.exp(-r.attachment / 10) - math.exp(-(r.attachment + r.limit) / 10))
        assert r.expected == pytest.approx(ref, rel=1e-3)
        assert r.priced["ph 1.2"] > r.expected
    assert rows[0].ilf == pytest.approx(1.0)
    assert rows[2].ilf == pytest.approx((1 - math.exp(-4)) / (1 - math.exp(-1)), rel=1e-3)
    lp = layer_price(lat, 5.0, 10.0)
    assert lp.low <= lp.value <= lp.high


def test_claims_data_inputs():
    amounts = [120.0, 75.5, 300.0, 45.0, 1010.0]
    emp = claims_severity(amounts, step=10.0)
    assert emp.law.mean() == pytest.approx(np.mean(amounts), rel=1e-13)  # mean kept exactly
    assert emp.dkw_band == pytest.approx(math.sqrt(math.log(40) / 10))  # DKW, Massart
    assert any("largest claim" in c for c in emp.caveats)
    cnt = claims_counts([3, 5, 2, 4, 6, 1])
    assert cnt.law.mean() == pytest.approx(3.5)
    assert dkw_band(100) == pytest.approx(math.sqrt(math.log(40) / 200))
    with pytest.raises(ValueError, match="amounts"):
        claims_severity([-1.0], step=1.0)
