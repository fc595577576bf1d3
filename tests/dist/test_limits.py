"""Lattices at the edges: infinite points, extreme steps, huge sizes, wrong kinds of laws.

Each check names its source beside it.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import AccuracyWarning, ErrorLedger, Lattice, compound
from polyconv.numerics.budget import MemoryBudgetError, using_budget


def test_cdf_at_infinity_with_an_origin():
    lat = Lattice([0.25, 0.5, 0.25], origin=2)
    # F(inf) = 1, F(-inf) = 0, S(inf) = 0 for any law (definition of a cdf; common practice)
    assert lat.cdf(math.inf) == 1.0
    assert lat.cdf(-math.inf) == 0.0
    assert lat.sf(math.inf) == 0.0
    # points 2, 3, 4 with masses 1/4, 1/2, 1/4: F(1) = 0, F(2) = 1/4, F(3) = 3/4 (exact fractions)
    assert list(lat.cdf([1.0, 2.0, 3.0, math.inf])) == [0.0, 0.25, 0.75, 1.0]


def test_moments_at_the_largest_step():
    h = 1e308
    lat = Lattice([0.5, 0.5], step=h)
    # two points 0 and h with mass 1/2: mean h/2, std h/2 (exact), variance h^2/4 beyond float
    assert lat.mean() == h / 2
    assert lat.std() == h / 2
    b = lat.bounded("std")
    assert not b.refused and b.low <= h / 2 <= b.high
    assert (b.high - b.low) / (h / 2) < 1e-12
    with pytest.warns(AccuracyWarning, match="overflows"):
        assert lat.variance() == math.inf
    m = lat.bounded("mean")
    assert not m.refused and m.low <= h / 2 <= m.high


def test_std_bound_in_step_units_matches_small_steps():
    # masses 1/4, 1/2, 1/4 on 0, h, 2h: variance h^2/2 (exact fractions)
    for h in (0.1, 1.0, 1e200):
        b = Lattice([0.25, 0.5, 0.25], step=h).bounded("std")
        assert b.low <= math.sqrt(0.5) * h <= b.high
        assert b.value == pytest.approx(math.sqrt(0.5) * h, rel=1e-15)


def test_huge_sizes_are_refused_by_the_memory_budget():
    lat = Lattice([0.5, 0.5])
    with using_budget("512M"):
        # 2^40 copies: a result of 2^40 + 1 points, about 80 TB of transforms (common practice)
        with pytest.raises(MemoryBudgetError, match=r"nfold\(n=1099511627776\)"):
            lat.nfold(2 ** 40)
        with pytest.raises(MemoryBudgetError, match="size=1099511627776"):
            compound(stats.poisson(3.0), lat, size=2 ** 40)
        with pytest.raises(ValueError, match="size"):
            Lattice.from_law(stats.expon(), step=1.0, size=2 ** 40)
        with pytest.raises(MemoryBudgetError, match="size=16000000"):
            Lattice.from_law(stats.expon(), step=1.0, size=16_000_000)


def test_continuous_counts_are_refused_naming_counts():
    with pytest.raises(TypeError, match="counts must be a discrete law.*continuous law "
                                        r"scipy\.stats\.norm"):
        compound(stats.norm(3.0), Lattice([0.5, 0.5]))


def test_moment_overflow_warns():
    lat = Lattice([0.5, 0.5], step=1e200)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        with pytest.warns(AccuracyWarning, match=r"moment\(2\) overflows"):
            assert lat.moment(2) == math.inf
    # (1e200)^1 / 2 = 5e199 (exact in binary up to rounding of the product)
    assert lat.moment(1) == pytest.approx(5e199, rel=1e-15)
    assert np.isfinite(lat.std())


def test_stop_loss_at_the_point_where_truncated_mass_starts():
    # campaign seed 1005109 (bench/risk_campaign.py): truncated mass that may lie from the last
    # point on, asked at d = that point.  Exact model here: the mass t sits at the last point
    # x_12 = 0.1 + 12 * 0.1, so E[(X - d)+] = 0 exactly and E[X 1{truncated}] = t x_12
    # (exact fractions, dyadic masses).
    t = 2.0 ** -10
    pmf = np.full(13, (1 - t) / 13)
    pmf[-1] += 1 - t - float(np.sum(pmf))
    x_last = 0.1 + 12 * 0.1
    errors = ErrorLedger(0.0, 0.0, t, 12, t * x_last * (1 + 1e-15))
    lat = Lattice(pmf, step=0.1, origin=0.1, errors=errors)
    d = 13 * 0.1  # the campaign's retention: index 13 times the step, 1.3000000000000003
    b = lat.bounded("stop_loss", d)
    assert b.low == 0.0
    # high end: E[(X - d)+ 1{T}] <= M - min(d, x_from) t_low, a few roundoffs here (was M ~ 1.3e-3)
    assert 0.0 <= b.high < 1e-14


def test_tail_second_moments_match_quadrature():
    import mpmath as mp

    from polyconv.dist.law_moments import tail_moment2

    mp.mp.dps = 30
    # E[X^2 1{X > b}] by mpmath quadrature of x^2 f(x) (densities written out from scipy's
    # parametrisation: gamma(a, scale), lognorm(s, scale))
    a, sc, b = mp.mpf(2.5), mp.mpf(3), 7

    def gamma_pdf(x):
        return x ** (a - 1) * mp.e ** (-x / sc) / (mp.gamma(a) * sc ** a)

    ref = mp.quad(lambda x: x * x * gamma_pdf(x), [b, 50, 200, mp.inf])
    got = tail_moment2(stats.gamma(2.5, scale=3.0), 7.0)
    assert ref <= got <= ref * (1 + 1e-11)
    s, scale = mp.mpf(1.2), mp.mpf(3)

    def lognorm_pdf(x):
        return mp.npdf(mp.log(x / scale) / s) / (s * x)

    ref = mp.quad(lambda x: x * x * lognorm_pdf(x), [5, 50, 500, 5e3, mp.inf])
    got = tail_moment2(stats.lognorm(1.2, scale=3.0), 5.0)
    assert ref <= got <= ref * (1 + 1e-11)


def test_std_of_truncated_compound_and_sum_is_bounded():
    law = stats.lognorm(0.8, scale=20.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        short = Lattice.from_law(law, step=1.0, size=400)
        long = Lattice.from_law(law, step=1.0, size=20000)
        # reference: the same lattice model on a grid long enough that its truncated mass is
        # below 1e-12: its own certified range is narrow (checked) and holds the same exact
        # value, which the short grid's range must then contain
        for make in (lambda s: compound(stats.poisson(4.0), s, size=4 * len(s)),
                     lambda s: s + s):
            b_short = make(short).bounded("std", rtol=1.0)
            b_long = make(long).bounded("std")
            assert short.truncated_mass > 1e-6
            assert not b_long.refused and (b_long.high - b_long.low) < 1e-3 * b_long.value
            assert math.isfinite(b_short.high)
            assert b_short.low <= b_long.value <= b_short.high


def test_step_far_too_small_for_the_law_is_refused_up_front():
    # hardening campaign: gamma(2) on step 1e-300 laid out 2^24 points holding no mass (and
    # ran > 60 s with rule "moments"); the most points from_law lays out end far below the
    # law's median (scipy.stats.gamma(2).median() = 1.678..., scipy), so it is refused by name
    from scipy import stats

    from polyconv.dist import Lattice

    assert stats.gamma(2).median() > 1.6
    for rule in ("nearest", "moments"):
        with pytest.raises(ValueError, match=r"step=1e-300 is too small for this law"):
            Lattice.from_law(stats.gamma(2), step=1e-300, rule=rule)


@pytest.mark.parametrize("step", [5e-324, 1e-310, 2.0 ** -1023])
def test_subnormal_step_is_refused_by_name(step):
    # robustness campaign: a subnormal step reached "float division by zero" in the coarse-step
    # check; 2^-1022 is the smallest normal binary64 number (IEEE 754-2008), and the relative
    # rounding model behind the bounds holds only above it (Higham, Accuracy and Stability of
    # Numerical Algorithms, 2nd ed., sec. 2.2)
    from scipy import stats

    from polyconv.dist import Lattice

    with pytest.raises(ValueError, match="step must be at least"):
        Lattice([0.5, 0.5], step=step)
    with pytest.raises(ValueError, match="step must be at least"):
        Lattice.from_law(stats.gamma(2), step=step, size=64)
    assert Lattice([0.5, 0.5], step=2.0 ** -1022).mean() == 2.0 ** -1023  # the first normal


def test_negative_binomial_log_pgf_near_one_has_no_domain_error():
    # robustness campaign: nbinom with variance 1e308 (p = 3e-308, q rounds to 1) raised
    # "math domain error" at f0 = 1 in the largest-claim table.  log P(f0) = n (log p -
    # log(1 - q f0)) is the nbinom pgf (Johnson, Kemp & Kotz, Univariate Discrete
    # Distributions, ch. 5, from memory), checked with mpmath; log P(1) = 0 exactly
    import mpmath
    from scipy import stats

    from polyconv.dist.counts import classify

    tiny = classify(stats.nbinom(3 * 3 / (1e308 - 3), 3 / 1e308))
    assert tiny.log_pgf_at(1.0) == 0.0
    law = classify(stats.nbinom(2.5, 0.3))
    for f0 in (0.0, 0.2, 0.9, 0.999999):
        ref = 2.5 * (mpmath.log(mpmath.mpf(0.3)) - mpmath.log(1 - mpmath.mpf(0.7) * f0))
        assert law.log_pgf_at(f0) == pytest.approx(float(ref), rel=1e-13, abs=1e-15)
