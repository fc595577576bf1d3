"""Tests of Lattice.from_law (polyconv.dist.from_law) against scipy.stats and closed forms."""

import math
import warnings

import mpmath
import numpy as np
import pytest
from scipy import stats

from polyconv.dist import AccuracyWarning, CoarseStepWarning, Lattice, check_step, law_moments


def irwin_hall_cdf(x, n):
    """CDF of the sum of n independent U(0, 1): (1/n!) sum_{k=0}^{floor x} (-1)^k C(n,k) (x-k)^n
    (Irwin, Biometrika 19 (1927) 225-239; Hall, Biometrika 19 (1927) 240-245)."""
    x = np.asarray(x, dtype=float)
    out = np.zeros_like(x)
    for k in range(n + 1):
        out += np.where(x >= k, (-1) ** k * math.comb(n, k) * np.clip(x - k, 0, None) ** n, 0.0)
    return out / math.factorial(n)


@pytest.fixture(autouse=True)
def _quiet_floor():
    # cdf values of order 1e-20 near the origin are flagged as below the floor; not under test
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        yield


@pytest.mark.parametrize("rule, lo_edge, hi_edge", [
    ("nearest", -0.5, 0.5), ("down", 0.0, 1.0), ("up", -1.0, 0.0)])
def test_cell_masses_are_scipy_cdf_differences(rule, lo_edge, hi_edge):
    # cell j of the rule is ((j + lo) h, (j + hi) h]; its mass is F(hi) - F(lo) by scipy.stats
    # (Klugman, Panjer & Willmot, Loss Models, ch. 9); everything below the first edge joins
    # point 0
    law, h, n = stats.gamma(2.5, scale=1.5), 0.2, 80
    x = Lattice.from_law(law, step=h, size=n, rule=rule)
    j = np.arange(n)
    want = law.cdf((j + hi_edge) * h) - law.cdf((j + lo_edge) * h)
    want[0] = law.cdf(hi_edge * h)
    np.testing.assert_allclose(x.pmf, want, rtol=1e-12, atol=1e-16)
    # mass beyond the grid: the law's sf at the last upper edge (scipy.stats)
    assert x.truncated_mass == pytest.approx(float(law.sf((n - 1 + hi_edge) * h)), rel=1e-9)


def test_moments_rule_against_limited_expected_values():
    # exponential(scale t): E[X ^ u] = t (1 - e^{-u/t}) (integrate the sf; Loss Models,
    # appendix A); Gerber (1982) masses f_0 = 1 - L(h)/h, f_j = (2 L(jh) - L((j-1)h) - L((j+1)h))/h
    # = (I_j - I_{j+1}) / h with I_j = L(jh) - L((j-1)h) = t e^{-(j-1)h/t} (1 - e^{-h/t})
    t, h, n = 2.0, 0.25, 120
    x = Lattice.from_law(stats.expon(scale=t), step=h, size=n, rule="moments")
    cell = -t * math.expm1(-h / t) * np.exp(-np.arange(n + 1) * h / t)  # I_1, I_2, ...
    want = np.empty(n)
    want[0] = 1.0 - cell[0] / h
    want[1:] = (cell[:-2] - cell[1:-1]) / h
    np.testing.assert_allclose(x.pmf, want, rtol=1e-9, atol=1e-15)


def test_moments_rule_keeps_the_mean():
    # local moment matching keeps E[X] (Gerber 1982; Loss Models ch. 9); scipy gamma mean
    g = stats.gamma(2.5, scale=1.5)
    x = Lattice.from_law(g, step=0.25, rule="moments")
    assert x.mean() == pytest.approx(g.mean(), abs=1e-8)
    r = Lattice.from_law(g, step=0.25, rule="nearest")
    assert abs(r.mean() - g.mean()) > 1e-6  # nearest does not (common practice, no source)


def test_irwin_hall_bracketed_by_down_and_up():
    # down/up are stochastically smaller/larger (Loss Models, ch. 9), and sums keep the order:
    # F_up <= F_IrwinHall <= F_down
    n, h = 4, 1 / 40
    lo = Lattice.from_law(stats.uniform(), step=h, rule="down").nfold(n)
    up = Lattice.from_law(stats.uniform(), step=h, rule="up").nfold(n)
    f_lo = lo.cdf(lo.values)
    f_up = up.cdf(up.values)
    assert np.all(f_lo >= irwin_hall_cdf(lo.values, n) - 1e-13)
    assert np.all(f_up <= irwin_hall_cdf(up.values, n) + 1e-13)
    # the gap closes as O(h): here at most n h (common practice, no source)
    assert np.max(f_lo - irwin_hall_cdf(lo.values, n)) < n * h


def test_irwin_hall_nearest_converges_quadratically():
    # nearest: P(S_h <= x_k) approximates F(x_k + h/2); the error shrinks ~4x per halving of h
    # (O(h^2) for smooth laws: common practice, no source)
    errs = []
    for h in (1 / 20, 1 / 40, 1 / 80):
        s = Lattice.from_law(stats.uniform(), step=h, rule="nearest").nfold(4)
        errs.append(np.max(np.abs(s.cdf(s.values) - irwin_hall_cdf(s.values + h / 2, 4))))
    assert errs[0] < 1e-3
    assert errs[1] < errs[0] / 3 and errs[2] < errs[1] / 3


def test_gamma_sums_within_discretisation_error():
    # gamma(a1, s) + gamma(a2, s) = gamma(a1 + a2, s) (common practice, no source);
    # scipy.stats.gamma as oracle; error shrinks as the step shrinks
    errs = []
    for h in (0.2, 0.1, 0.05):
        a = Lattice.from_law(stats.gamma(2.0, scale=1.5), step=h)
        b = Lattice.from_law(stats.gamma(3.5, scale=1.5), step=h)
        s = a + b
        want = stats.gamma(5.5, scale=1.5).cdf(s.values + h / 2)
        errs.append(np.max(np.abs(s.cdf(s.values) - want)))
        assert s.truncated_mass < 1e-11
    assert errs[0] < 1e-4
    assert errs[1] < errs[0] / 3 and errs[2] < errs[1] / 3


def test_callable_cdf():
    # exponential(1) given as a callable cdf; moments keep the mean 1 (Gerber 1982)
    x = Lattice.from_law(lambda t: 1.0 - np.exp(-np.asarray(t)), step=0.05, rule="moments")
    assert x.mean() == pytest.approx(1.0, abs=1e-9)
    assert x.truncated_mass < 1e-11
    y = Lattice.from_law(lambda t: 1.0 - math.exp(-t), step=0.1, size=50)  # not vectorised
    assert len(y) == 50
    # truncated mass reported, not renormalised: P(X > 4.95) = e^-4.95 for nearest
    assert y.truncated_mass == pytest.approx(math.exp(-4.95), rel=1e-9)


def test_law_below_zero_gets_an_origin():
    x = Lattice.from_law(stats.norm(3.0, 1.0), step=0.1)
    assert x.origin < 3.0 - 6.0
    assert x.mean() == pytest.approx(3.0, abs=1e-9)
    assert x.variance() == pytest.approx(1.0 + 0.1 ** 2 / 12, abs=1e-6)  # Sheppard's correction


def test_bad_arguments_name_the_argument():
    with pytest.raises(ValueError, match="step"):
        Lattice.from_law(stats.expon(), step=0.0)
    with pytest.raises(ValueError, match="rule"):
        Lattice.from_law(stats.expon(), step=0.1, rule="rounding")  # no old names
    with pytest.raises(ValueError, match="size"):
        Lattice.from_law(stats.expon(), step=0.1, size=-2)
    with pytest.raises(TypeError, match="law"):
        Lattice.from_law(3.0, step=0.1)
    with pytest.raises(TypeError, match="continuous"):
        Lattice.from_law(stats.poisson(2.0), step=1.0)
    with pytest.raises(TypeError, match="law must be a frozen scipy.stats law.*norm"):
        Lattice.from_law(stats.norm, step=0.1)  # the family, not a frozen law (issue 16)
    with pytest.raises(ValueError, match="law: a callable cdf must be non-decreasing"):
        Lattice.from_law(lambda t: np.clip(np.sin(np.asarray(t)), 0, 1), step=0.5, size=20)
    with pytest.raises(ValueError, match=r"law: a callable cdf must take values in \[0, 1\]"):
        Lattice.from_law(lambda t: 2.0 * np.asarray(t), step=0.5, size=20)


def test_coarse_step_warns_and_suggests_a_step():
    # issue 11: lognormal(1, scale 1000) on step 1e5 had a mean of ~5 against the law's
    # e^{1/2} 1000 = 1648.7 (lognormal mean, scipy.stats) with no warning
    law = stats.lognorm(1.0, scale=1000.0)
    with pytest.warns(CoarseStepWarning, match="too coarse") as rec:
        Lattice.from_law(law, step=1e5)
    assert "try step=" in str(rec[0].message)
    res = check_step(law, step=1e5, warn=False)
    assert not res.ok and res.relative_gap > 0.9
    # the suggested step passes the same check (scipy.stats closed forms as the reference)
    again = check_step(law, step=res.suggested_step, warn=False)
    assert again.ok and again.relative_gap <= 0.01
    with warnings.catch_warnings():
        warnings.simplefilter("error", CoarseStepWarning)
        Lattice.from_law(law, step=10.0)  # fine: no warning


def test_check_step_on_a_layer():
    # gamma(2) layer min((X - 1)+, 2): E = L(3) - L(1) with L the limited expected value
    # (gamma closed form via the regularised incomplete gamma, scipy.special)
    law = stats.gamma(2.0)
    res = check_step(law, step=0.5, rule="down", deductible=1.0, limit=2.0, warn=False)
    want = float(law.expect(lambda t: min(max(t - 1.0, 0.0), 2.0)))  # scipy quadrature
    assert res.law_value == pytest.approx(want, rel=1e-8)
    assert not res.ok
    assert check_step(law, step=res.suggested_step, rule="down", deductible=1.0, limit=2.0,
                      warn=False).ok


@pytest.mark.parametrize("law", [
    stats.expon(scale=2.0), stats.gamma(2.5, scale=1.5), stats.weibull_min(0.7, scale=5.0),
    stats.pareto(2.5, scale=3.0), stats.lomax(1.5, scale=10.0), stats.invgamma(3.0, scale=2.0),
    stats.halfnorm(scale=2.0), stats.uniform(1.0, 3.0), stats.lognorm(2.0, scale=1000.0)])
def test_tail_moment_closed_forms_against_mpmath_quadrature(law):
    # E[X 1{X > b}] = int_b^inf x f(x) dx by mpmath quadrature of scipy's density
    for b in (0.5, 5.0, 50.0):
        lo, hi = max(b, float(law.support()[0])), float(law.support()[1])
        cuts = [lo, hi] if math.isfinite(hi) else [lo, lo * 10, lo * 1e3, lo * 1e6, mpmath.inf]
        want = float(mpmath.quad(lambda t: t * law.pdf(float(t)), cuts)) if lo < hi else 0.0
        assert law_moments.tail_moment(law, b) == pytest.approx(want, rel=1e-7, abs=1e-14)


def test_generic_tail_moment_is_an_upper_bound():
    # a law without a closed form here (fisk): the generic bound is above mpmath's quadrature
    law = stats.fisk(4.0, scale=2.0)
    for b in (0.5, 5.0, 50.0):
        want = float(mpmath.quad(lambda t: t * law.pdf(float(t)), [b, 10 * b, mpmath.inf]))
        got = law_moments.tail_moment(law, b)
        assert want <= got <= 3 * want
