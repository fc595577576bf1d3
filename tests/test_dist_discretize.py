"""Tests of polyconv.dist.discretize against closed forms (gamma sums, Irwin-Hall)."""

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import AccuracyWarning, discretize


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


def test_irwin_hall_bracketed_by_lower_and_upper():
    # lower/upper discretisations are stochastically smaller/larger (Klugman, Panjer & Willmot,
    # Loss Models, ch. 9), and sums keep the order: F_upper <= F_IrwinHall <= F_lower
    n, h = 4, 1 / 40
    lo = discretize(stats.uniform(), step=h, method="lower").nfold(n)
    up = discretize(stats.uniform(), step=h, method="upper").nfold(n)
    f_lo = lo.cdf(lo.values)
    f_up = up.cdf(up.values)
    assert np.all(f_lo >= irwin_hall_cdf(lo.values, n) - 1e-13)
    assert np.all(f_up <= irwin_hall_cdf(up.values, n) + 1e-13)
    # the gap closes as O(h): here at most n h (common practice, no source)
    assert np.max(f_lo - irwin_hall_cdf(lo.values, n)) < n * h


def test_irwin_hall_rounding_converges_quadratically():
    # rounding: P(S_h <= x_k) approximates F(x_k + h/2); the error shrinks ~4x per halving of h
    # (O(h^2) for smooth laws: common practice, no source); measured here 4.9e-4, 1.2e-4, 3.0e-5
    errs = []
    for h in (1 / 20, 1 / 40, 1 / 80):
        s = discretize(stats.uniform(), step=h, method="rounding").nfold(4)
        errs.append(np.max(np.abs(s.cdf(s.values) - irwin_hall_cdf(s.values + h / 2, 4))))
    assert errs[0] < 1e-3
    assert errs[1] < errs[0] / 3 and errs[2] < errs[1] / 3


def test_gamma_sums_within_discretisation_error():
    # gamma(a1, s) + gamma(a2, s) = gamma(a1 + a2, s) (common practice, no source);
    # scipy.stats.gamma as oracle; error shrinks as the step shrinks (measured 5.8e-5, 1.4e-5,
    # 3.6e-6 for h = 0.2, 0.1, 0.05)
    errs = []
    for h in (0.2, 0.1, 0.05):
        a = discretize(stats.gamma(2.0, scale=1.5), step=h)
        b = discretize(stats.gamma(3.5, scale=1.5), step=h)
        s = a + b
        want = stats.gamma(5.5, scale=1.5).cdf(s.values + h / 2)
        errs.append(np.max(np.abs(s.cdf(s.values) - want)))
        assert s.truncated_mass < 1e-11
    assert errs[0] < 1e-4
    assert errs[1] < errs[0] / 3 and errs[2] < errs[1] / 3


def test_moment_matching_preserves_mean():
    # local moment matching keeps E[X] (Gerber 1982; Loss Models ch. 9)
    g = stats.gamma(2.5, scale=1.5)
    x = discretize(g, step=0.25, method="moment-matching")
    assert x.mean() == pytest.approx(g.mean(), abs=1e-8)
    r = discretize(g, step=0.25, method="rounding")
    assert abs(r.mean() - g.mean()) > 1e-6  # rounding does not (common practice, no source)


def test_callable_cdf_and_moment_matching():
    # exponential(1) given as a callable cdf; moment matching keeps the mean 1
    x = discretize(lambda t: 1.0 - np.exp(-np.asarray(t)), step=0.05, method="moment-matching")
    assert x.mean() == pytest.approx(1.0, abs=1e-9)
    assert x.truncated_mass < 1e-11
    y = discretize(lambda t: 1.0 - math.exp(-t), step=0.1, size=50)  # not vectorised
    assert len(y) == 50
    # truncated mass reported, not renormalised: P(X > 4.95) = e^-4.95 for rounding
    assert y.truncated_mass == pytest.approx(math.exp(-4.95), rel=1e-9)


def test_law_below_zero_gets_an_origin():
    x = discretize(stats.norm(3.0, 1.0), step=0.1)
    assert x.origin < 3.0 - 6.0
    assert x.mean() == pytest.approx(3.0, abs=1e-9)
    assert x.variance() == pytest.approx(1.0 + 0.1 ** 2 / 12, abs=1e-6)  # Sheppard's correction


def test_bad_arguments():
    with pytest.raises(ValueError, match="step"):
        discretize(stats.expon(), step=0.0)
    with pytest.raises(ValueError, match="method"):
        discretize(stats.expon(), step=0.1, method="nearest")
    with pytest.raises(ValueError, match="size"):
        discretize(stats.expon(), step=0.1, size=-2)
    with pytest.raises(TypeError, match="dist"):
        discretize(3.0, step=0.1)
    with pytest.raises(TypeError, match="continuous"):
        discretize(stats.poisson(2.0), step=1.0)
