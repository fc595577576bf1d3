"""Brackets of the continuous model (law_bracket), goal-oriented grids (Goal, compound(goal=),
aggregate_for_goal) and spliced heavy-tail answers, against closed forms."""

import math
import warnings

import numpy as np
import pytest
from scipy import special, stats

from polyconv.dist import AccuracyWarning, Goal, Lattice, aggregate_for_goal, compound, law_bracket
from polyconv.dist.tail_splice import spliced_aggregate
from polyconv.dist.transform import log_chernoff_tail, log_split_tail, reduced_severity


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def gamma_tvar(a, theta, p):
    """TVaR_p of gamma(a, theta): E[X 1{X > v}] / (1 - p) = a theta Q(a + 1, v / theta) / (1 - p)
    (integrate the density; common practice, no source)."""
    v = stats.gamma(a, scale=theta).ppf(p)
    return a * theta * special.gammaincc(a + 1, v / theta) / (1 - p)


def gamma_stop_loss(a, theta, d):
    """E[(X - d)+] = a theta Q(a + 1, d / theta) - d Q(a, d / theta) (same source)."""
    return a * theta * special.gammaincc(a + 1, d / theta) - d * special.gammaincc(a, d / theta)


@pytest.mark.parametrize("measure, arg, reference", [
    ("quantile", 0.99, float(stats.gamma(3).ppf(0.99))),
    ("tvar", 0.99, gamma_tvar(3, 1.0, 0.99)),
    ("cdf", 4.0, float(stats.gamma(3).cdf(4.0))),
    ("sf", 6.0, float(stats.gamma(3).sf(6.0))),
    ("stop_loss", 5.0, gamma_stop_loss(3, 1.0, 5.0)),
    ("mean", None, 3.0)])
def test_law_bracket_contains_gamma_sum(measure, arg, reference):
    # sum of 3 independent Exp(1) is gamma(3) (common practice, no source); scipy.stats.gamma
    lo, hi = law_bracket(lambda x: x.nfold(3), stats.expon(), step=0.01, measure=measure,
                         arg=arg)
    assert lo <= reference <= hi
    # not absurdly loose: down and up differ by at most 3 steps per claim (coupling)
    scale = 1.0 if measure in ("cdf", "sf") else 3 * 0.01 * 1.5
    if measure in ("cdf", "sf"):
        assert hi - lo < 0.05
    else:
        assert hi - lo <= scale + 1e-9


def test_law_bracket_compound_geometric_exponential():
    # compound geometric (P(N = n) = (1 - q) q^n) with Exp(theta) claims: an atom 1 - q at 0 and
    # P(S > x) = q exp(-(1 - q) x / theta) (Klugman, Panjer & Willmot, Loss Models, closed form
    # of the compound geometric-exponential); VaR_p = theta / (1 - q) ln(q / (1 - p)) and
    # TVaR_p = VaR_p + theta / (1 - q) (memoryless tail)
    q, theta, p = 0.6, 2.0, 0.99
    var = theta / (1 - q) * math.log(q / (1 - p))
    counts = stats.nbinom(1, 1 - q)  # scipy: failures before the first success, on 0, 1, ...

    def build(x):
        return compound(counts, x)

    lo, hi = law_bracket(build, stats.expon(scale=theta), step=0.01, measure="var", arg=p)
    assert lo <= var <= hi and hi - lo < 0.5
    lo, hi = law_bracket(build, stats.expon(scale=theta), step=0.01, measure="tvar", arg=p)
    assert lo <= var + theta / (1 - q) <= hi and hi - lo < 0.5
    lo, hi = law_bracket(build, stats.expon(scale=theta), step=0.01, measure="cdf", arg=0.0)
    assert lo <= 1 - q <= hi  # the atom at 0


def test_law_bracket_heavy_tail_closed_forms():
    # Lomax(c, scale l): VaR_p = l ((1 - p)^(-1/c) - 1), E[X - v | X > v] = (l + v) / (c - 1)
    # (Pareto II closed forms; Loss Models, appendix A)
    c, lam, p = 2.5, 10.0, 0.99
    var = lam * ((1 - p) ** (-1 / c) - 1)
    tvar = var + (lam + var) / (c - 1)
    law = stats.lomax(c, scale=lam)
    lo, hi = law_bracket(None, law, step=0.05, size=40000, measure="quantile", arg=p)
    assert lo <= var <= hi
    lo, hi = law_bracket(None, law, step=0.05, size=40000, measure="tvar", arg=p)
    assert lo <= tvar <= hi and hi - lo < 0.01 * tvar  # the truncated moment closes the tail


def test_law_bracket_rejects_std_and_bad_build():
    with pytest.raises(ValueError, match="measure.*not monotone"):
        law_bracket(None, stats.expon(), step=0.1, measure="std")
    with pytest.raises(TypeError, match="build"):
        law_bracket(3, stats.expon(), step=0.1, measure="mean")


def test_split_tail_bound_is_a_bound_and_beats_chernoff_on_heavy_tails():
    # P(S >= x) for compound Poisson(3) x lognormal(1.5) lattice; reference: the same lattice
    # model computed on a grid long enough to hold the mass (its sf is the oracle here, within
    # its own certified range); scipy.stats.poisson's pgf in the bound
    from polyconv.dist.counts import classify

    sev = Lattice.from_law(stats.lognorm(1.5, scale=10.0), step=1.0, size=1 << 16)
    law = classify(stats.poisson(3.0)).transform
    rs = reduced_severity(np.asarray(sev.pmf))
    s = compound(stats.poisson(3.0), sev, size=1 << 16)
    for x in (500, 2000, 8000):
        split = math.exp(log_split_tail(law, rs, x))
        exact_high = s.bounded("sf", x - 1).high
        exact_low = s.bounded("sf", x - 1).low
        assert split >= exact_low  # an upper bound of P(S >= x)
        assert split <= math.exp(log_chernoff_tail(law, rs, x)) + 1e-300
        assert split <= 20 * exact_high  # and not absurdly loose (measured ratio 2-6)


def test_goal_validation():
    with pytest.raises(ValueError, match="measures"):
        Goal([("median", 0.5)])
    with pytest.raises(ValueError, match="level"):
        Goal([("var", 1.5)])
    with pytest.raises(ValueError, match="rtol"):
        Goal([("var", 0.9)], rtol=-1)
    with pytest.raises(TypeError, match="goal"):
        aggregate_for_goal(stats.poisson(1.0), stats.expon(), goal=0.99)
    with pytest.raises(ValueError, match="size or goal"):
        compound(stats.poisson(1.0), Lattice([0.5, 0.5]), size=10, goal=Goal([("var", 0.9)]))


def test_compound_goal_meets_tolerance_against_a_larger_grid():
    # compound Poisson(5) x Exp(1) on step 0.05: the goal grid's certified TVaR range is within
    # rtol and agrees with the same lattice model on a grid four times longer
    sev = Lattice.from_law(stats.expon(), step=0.05, size=4000)
    goal = Goal([("var", 0.995), ("tvar", 0.995)], rtol=1e-5)
    s = compound(stats.poisson(5.0), sev, goal=goal)
    big = compound(stats.poisson(5.0), sev, size=4 * len(s))
    for m in ("var", "tvar"):
        b, ref = s.bounded(m, 0.995), big.bounded(m, 0.995)
        assert b.high - b.low <= 1e-5 * abs(b.value)
        assert b.low <= ref.high and ref.low <= b.high
    assert len(s) < 4000  # shorter than the old default (severity length at least)


def test_aggregate_for_goal_heavy_tail_lomax():
    # Poisson(2) x Lomax(tail index 2.5): TVaR answered (it was refused with the fixed 1e-12
    # tail) within the goal, and consistent with the same lattice model on a grid 4x longer
    goal = Goal([("var", 0.99), ("tvar", 0.99)], rtol=1e-3)
    law = stats.lomax(2.5, scale=10.0)
    s = aggregate_for_goal(stats.poisson(2.0), law, goal=goal, step=0.5)
    big_sev = Lattice.from_law(law, step=0.5, size=4 * len(s))
    big = compound(stats.poisson(2.0), big_sev, size=4 * len(s))
    for m in ("var", "tvar"):
        b, ref = s.bounded(m, 0.99), big.bounded(m, 0.99)
        assert not b.refused and b.high - b.low <= 1e-3 * b.value
        assert b.low <= ref.high and ref.low <= b.high


def test_spliced_answers_bracket_the_continuous_model():
    # compound geometric-exponential closed form (see above): the "down" model's low ends and
    # the "up" model's high ends bracket VaR and TVaR of the continuous model
    q, theta, p = 0.6, 2.0, 0.995
    var = theta / (1 - q) * math.log(q / (1 - p))
    tvar = var + theta / (1 - q)
    goal = Goal([("var", p), ("tvar", p)], rtol=1e-3)
    counts, law = stats.nbinom(1, 1 - q), stats.expon(scale=theta)
    down = spliced_aggregate(counts, law, goal=goal, step=0.01, rule="down")
    up = spliced_aggregate(counts, law, goal=goal, step=0.01, rule="up")
    assert down.answers[("var", p)].low <= var <= up.answers[("var", p)].high
    assert down.answers[("tvar", p)].low <= tvar <= up.answers[("tvar", p)].high
    for res in (down, up):
        for b in res.answers.values():
            assert not b.refused and b.high - b.low <= 1e-3 * b.value


def test_spliced_tvar_agrees_with_one_long_grid():
    # Poisson(3) x lognormal(1.5, scale 10), nearest rule on step 1: the spliced certified range
    # meets the goal and overlaps the range of the same lattice model on one 2^20-point grid
    counts, law = stats.poisson(3.0), stats.lognorm(1.5, scale=10.0)
    goal = Goal([("var", 0.995), ("tvar", 0.995)], rtol=1e-3)
    res = spliced_aggregate(counts, law, goal=goal, step=1.0)
    tv = res.answers[("tvar", 0.995)]
    assert not tv.refused and tv.high - tv.low <= 1e-3 * tv.value
    sev = Lattice.from_law(law, step=1.0, size=1 << 20)
    ref = compound(counts, sev, size=1 << 20).bounded("tvar", 0.995)
    assert tv.low <= ref.high and ref.low <= tv.high
    assert res.fine_points + sum(n for _, n in res.levels) < (1 << 20) // 4


def test_bracket_to_goal_meets_an_absolute_precision():
    # issue 11 item 4, "p99.9 to 0.1": the sum of three Exp(scale 2) is gamma(3, scale 2)
    # (handbook identity; scipy.stats.gamma as the reference); a delay of three stages
    from polyconv.dist import bracket_to_goal

    law = stats.expon(scale=2.0)

    def make(rule, step):
        x = Lattice.from_law(law, step=step, rule=rule)
        return x + x + x

    ref = stats.gamma(3, scale=2.0)
    b = bracket_to_goal(make, "quantile", 0.999, step=1.0, atol=0.1)
    assert b.met and b.high - b.low <= 0.1 and b.step < 1.0
    assert b.low <= ref.ppf(0.999) <= b.high
    c = bracket_to_goal(make, "cdf", 10.0, step=1.0, atol=1e-3)  # a shrinking measure
    assert c.met and c.low <= ref.cdf(10.0) <= c.high and c.high - c.low <= 1e-3
    with pytest.warns(AccuracyWarning, match="wider than the goal"):
        d = bracket_to_goal(make, "quantile", 0.999, step=1.0, atol=1e-9, halvings=1)
    assert not d.met and d.low <= ref.ppf(0.999) <= d.high
    with pytest.raises(ValueError, match="atol or rtol"):
        bracket_to_goal(make, "quantile", 0.999, step=1.0)
    with pytest.raises(TypeError, match="make must be a callable"):
        bracket_to_goal(None, "quantile", 0.999, step=1.0, atol=0.1)
