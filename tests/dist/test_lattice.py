"""Tests of polyconv.dist.Lattice: validation, sums, shifts, layers, risk measures."""

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from polyconv.dist import AccuracyWarning, Lattice, TruncationWarning

# A small loss distribution worked by hand: values 0, 10, 20, 50, 100 (step 10).
HAND = [0.5, 0.2, 0.15, 0.0, 0.0, 0.1, 0.0, 0.0, 0.0, 0.0, 0.05]


def hand():
    return Lattice(HAND, step=10.0)


# ---------------------------------------------------------------- validation


def test_rejects_negative_pmf_naming_argument():
    with pytest.raises(ValueError, match="pmf"):
        Lattice([-0.1, 1.1])


def test_rejects_mass_above_one_and_does_not_renormalise():
    with pytest.raises(ValueError, match="sums to"):
        Lattice([0.5, 0.6])
    x = Lattice([0.25, 0.5])  # kept as given: the rest is truncated mass
    assert x.truncated_mass == pytest.approx(0.25, abs=1e-15)
    assert np.array_equal(x.pmf, [0.25, 0.5])


def test_rejects_bad_step_origin_and_types():
    with pytest.raises(ValueError, match="step"):
        Lattice([1.0], step=0.0)
    with pytest.raises(TypeError, match="step"):
        Lattice([1.0], step="1")
    with pytest.raises(ValueError, match="origin"):
        Lattice([1.0], origin=math.nan)
    with pytest.raises(ValueError, match="finite"):
        Lattice([math.nan, 1.0])
    with pytest.raises(ValueError, match="1-D"):
        Lattice([[0.5, 0.5]])
    with pytest.raises(TypeError):
        Lattice([1.0]) + "3"


def test_float_noise_negative_is_clamped_and_tracked():
    x = Lattice([0.5, -1e-17, 0.5])
    assert x.pmf[1] == 0.0
    assert x.trust_floor >= 1e-17


def test_immutable():
    x = Lattice([1.0])
    with pytest.raises(AttributeError):
        x.step = 2.0
    with pytest.raises(ValueError):
        x.pmf[0] = 0.5


def test_different_steps_are_an_error():
    with pytest.raises(ValueError, match="different steps"):
        Lattice([1.0], step=1.0) + Lattice([1.0], step=0.5)


# ---------------------------------------------------------------- sums and shifts


def test_two_dice():
    # two fair dice: P(sum = s) = (6 - |s - 7|) / 36 (common practice, no source)
    die = Lattice([1 / 6] * 6, origin=1)
    two = die + die
    assert two.origin == 2
    expect = np.array([6 - abs(s - 7) for s in range(2, 13)]) / 36
    assert np.max(np.abs(two.pmf - expect)) < 1e-15
    assert two.mean() == pytest.approx(7.0, abs=1e-13)
    assert two.variance() == pytest.approx(35 / 6, abs=1e-12)  # 2 * 35/12 (fair die variance)


def test_shift():
    x = Lattice([0.5, 0.5], step=2.0) + 3
    assert x.origin == 3.0 and np.array_equal(x.values, [3.0, 5.0])
    y = 1.5 + x
    assert y.mean() == pytest.approx(5.5, abs=1e-14)  # (3 + 5) / 2 + 1.5


def test_poisson_sums_are_poisson():
    # Poisson(2) + Poisson(3) = Poisson(5) (common practice, no source); scipy.stats as oracle
    k = np.arange(80)
    x = Lattice(stats.poisson(2.0).pmf(k))
    y = Lattice(stats.poisson(3.0).pmf(k))
    s = x + y
    assert np.max(np.abs(s.pmf[:80] - stats.poisson(5.0).pmf(k))) < 1e-15


def test_bernoulli_sums_are_binomial():
    # sum of n Bernoulli(q) = Binomial(n, q) (common practice, no source); scipy.stats.binom oracle
    q, n = 0.3, 40
    s = Lattice([1 - q, q]).nfold(n)
    assert len(s) == n + 1
    assert np.max(np.abs(s.pmf - stats.binom(n, q).pmf(np.arange(n + 1)))) < 1e-15
    assert s.trust_floor < 1e-13


def test_geometric_sums_are_negative_binomial():
    # sum of r geometric (failures before a success, scipy nbinom(1, p)) = nbinom(r, p)
    # (common practice, no source); scipy.stats.nbinom as oracle
    p, r = 0.4, 7
    k = np.arange(200)
    g = Lattice(stats.nbinom(1, p).pmf(k))
    s = g.nfold(r)
    assert np.max(np.abs(s.pmf[:200] - stats.nbinom(r, p).pmf(k))) < 1e-14


def test_nfold_matches_repeated_sums():
    x = Lattice([0.1, 0.0, 0.3, 0.6], step=0.5, origin=1.0)
    rep = x + x + x + x + x
    nf = x.nfold(5)
    assert nf.origin == pytest.approx(5.0) and rep.origin == pytest.approx(5.0)
    assert np.max(np.abs(nf.pmf - rep.pmf)) < 1e-15
    assert x.nfold(0).pmf.tolist() == [1.0] and x.nfold(1) is x


# ---------------------------------------------------------------- risk measures by hand


def test_cdf_sf_by_hand():
    x = hand()
    # F(0)=.5, F(10)=.7, F(20)=.85, F(50)=.95, F(100)=1
    assert x.cdf(0) == pytest.approx(0.5)
    assert x.cdf(15) == pytest.approx(0.7)
    assert x.cdf(49.999) == pytest.approx(0.85)
    assert x.sf(20) == pytest.approx(0.15)  # P(X > 20) = .1 + .05
    assert x.cdf(-1) == 0.0 and x.sf(100) == 0.0
    # 0.3 on a step-0.1 grid is the point 3 whatever the float rounding of 3 * 0.1
    y = Lattice([0.25] * 4, step=0.1)
    assert y.cdf(0.3) == pytest.approx(1.0)


def test_var_tvar_stop_loss_by_hand():
    x = hand()
    # mean = 10*.2 + 20*.15 + 50*.1 + 100*.05 = 2 + 3 + 5 + 5 = 15
    assert x.mean() == pytest.approx(15.0, abs=1e-12)
    # VaR_p = min{x : F(x) >= p}: F(20) = .85 < .9 <= F(50) = .95  ->  50
    assert x.value_at_risk(0.9) == 50.0
    assert x.value_at_risk(0.85) == 20.0  # F(20) = .85 reaches .85 exactly
    assert x.value_at_risk(0.95) == 50.0
    # TVaR_p = VaR_p + E[(X - VaR_p)+] / (1 - p) (Acerbi & Tasche 2002):
    # p = .9: 50 + (.05 * 50) / .1 = 75; as a check, the worst 10%: (.05*100 + .05*50)/.1 = 75
    assert x.tail_value_at_risk(0.9) == pytest.approx(75.0, abs=1e-10)
    # p = .95: 50 + (.05 * 50) / .05 = 100 (the worst 5% is the atom at 100)
    assert x.tail_value_at_risk(0.95) == pytest.approx(100.0, abs=1e-9)
    # p = .5: VaR = 0, TVaR = 0 + E[X] / .5 = 30
    assert x.tail_value_at_risk(0.5) == pytest.approx(30.0, abs=1e-12)
    # stop-loss E[(X - 15)+] = .15*5 + .1*35 + .05*85 = .75 + 3.5 + 4.25 = 8.5
    assert x.stop_loss(15) == pytest.approx(8.5, abs=1e-12)
    # piecewise linear between lattice points: at 10 it is .15*10+.1*40+.05*90 = 10, at 20
    # .1*30 + .05*80 = 7, so at 15 the midpoint 8.5 (consistent with the line above)
    assert x.stop_loss(10) == pytest.approx(10.0, abs=1e-12)
    assert x.stop_loss(20) == pytest.approx(7.0, abs=1e-12)
    # below the support: E[X] - d
    assert x.stop_loss(-5) == pytest.approx(20.0, abs=1e-12)
    assert x.stop_loss(100) == 0.0
    assert np.allclose(x.quantile([0.5, 0.51, 1.0]), [0.0, 10.0, 100.0])


def test_risk_levels_validated():
    with pytest.raises(ValueError, match="p must lie"):
        hand().value_at_risk(1.0)
    with pytest.raises(ValueError, match="p must lie"):
        hand().tail_value_at_risk(0.0)


def test_layer_by_hand():
    x = hand()
    # min(max(X - 10, 0), 30): 0 -> 0, 10 -> 0, 20 -> 10, 50 -> 30, 100 -> 30
    lay = x.layer(10, 30)
    assert lay.origin == 0.0 and lay.step == 10.0
    assert np.allclose(lay.pmf, [0.7, 0.15, 0.0, 0.15])
    # E[layer] = 10*.15 + 30*.15 = 6 = stop_loss(10) - stop_loss(40)
    assert lay.mean() == pytest.approx(x.stop_loss(10) - x.stop_loss(40), abs=1e-12)
    unl = x.layer(20)
    assert np.allclose(unl.pmf, [0.85, 0, 0, 0.1, 0, 0, 0, 0, 0.05])
    with pytest.raises(ValueError, match="deductible"):
        x.layer(5, 30)
    with pytest.raises(ValueError, match="limit"):
        x.layer(10, 25)


# ---------------------------------------------------------------- trust floor and truncation


def test_noise_levels_warned_and_refused():
    x = Lattice([0.5, 0.3, 0.2 - 1e-12], trust_floor=1e-8)
    # the lattice's own quantile is returned (never below it: common practice, no source,
    # DESIGN.md section 6b), with a warning because the cdf's error range (3e-8) straddles
    # the level 1 - 1e-10: the exact quantile may even lie beyond the grid
    with pytest.warns(AccuracyWarning):
        q = x.quantile(1 - 1e-10)
    assert q == 2.0 and x.cdf(q) >= 1 - 1e-10  # own cdf reaches the level (mass 1 - 1e-12)
    with pytest.warns(AccuracyWarning):
        assert math.isnan(x.tail_value_at_risk(1 - 1e-10))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert x.quantile(0.6) == 1.0  # well above the floor: no warning


def test_quantile_beyond_truncated_lattice():
    x = Lattice([0.5, 0.3])  # 0.2 beyond the lattice
    with pytest.warns(TruncationWarning):
        assert math.isnan(x.quantile(0.9))
    assert x.quantile(0.7) == 1.0
    assert x.sf(1) == pytest.approx(0.2)  # truncated mass lies above the lattice
    with pytest.warns(TruncationWarning):
        x.mean()


# ---------------------------------------------------------------- hypothesis properties

pmfs = st.lists(st.floats(0.0, 1.0), min_size=1, max_size=40).filter(lambda v: sum(v) > 0.1)


def _lat(v, origin):
    a = np.array(v) / np.sum(v)
    return Lattice(a / max(1.0, float(np.sum(a))), step=0.5, origin=origin)


@settings(max_examples=60, deadline=None)
@given(pmfs, pmfs, st.integers(-5, 5), st.integers(-5, 5))
def test_mass_mean_variance_add(v, w, o1, o2):
    # for independent X, Y: mass 1, E[X+Y] = E[X]+E[Y], Var[X+Y] = Var[X]+Var[Y]
    # (common practice, no source)
    x, y = _lat(v, 0.5 * o1), _lat(w, 0.5 * o2)
    s = x + y
    assert float(np.sum(s.pmf)) == pytest.approx(1.0, abs=1e-12)
    assert s.mean() == pytest.approx(x.mean() + y.mean(), abs=1e-10)
    assert s.variance() == pytest.approx(x.variance() + y.variance(), abs=1e-10)
    assert s.trust_floor < 1e-12
