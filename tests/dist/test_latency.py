"""Latency and reliability toolkit (issue 13): checks against closed forms, numpy, scipy and
brute-force enumeration.  Lattices here are invented examples."""

from __future__ import annotations

import itertools
import math
import warnings

import mpmath
import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice, all_of, first_of, series
from polyconv.dist.network import Block, Network
from polyconv.dist.order_stats import kth_of
from polyconv.dist.reliability import hazard, reliability
from polyconv.dist.retry import hedge, retry
from polyconv.dist.samples import dkw_epsilon, empirical, from_histogram, samples_beyond
from polyconv.dist.sensitivity import required_speedup, stage_effects

A = Lattice([0.2, 0.5, 0.3], step=1.0, origin=2.0)
B = Lattice([0.6, 0.1, 0.1, 0.2], step=1.0, origin=1.0)
C = Lattice([0.1, 0.9], step=1.0, origin=0.0)


def enumerate_law(lats, fn) -> dict[float, float]:
    """Exact law of fn(values) by enumerating every combination of independent lattices."""
    out: dict[float, float] = {}
    for combo in itertools.product(*[list(zip(d.values, d.pmf, strict=True)) for d in lats]):
        v = fn([c[0] for c in combo])
        out[v] = out.get(v, 0.0) + math.prod(c[1] for c in combo)
    return out


def on(lat: Lattice, law: dict[float, float]) -> np.ndarray:
    return np.array([law.get(float(v), 0.0) for v in lat.values])


# ---------------------------------------------------------------------------- from_samples


def test_from_samples_equals_numpy_histogram():
    rng = np.random.default_rng(3)
    x = rng.gamma(2.0, 7.0, 20_000)
    lat = Lattice.from_samples(x, step=0.5)
    edges = (np.arange(len(lat) + 1) - 0.5) * 0.5  # nearest rule = cells [x_k - h/2, x_k + h/2)
    counts, _ = np.histogram(x, bins=edges)  # reference: numpy.histogram
    assert np.array_equal(np.rint(lat.pmf * x.size), counts)


def test_dkw_band_is_massarts_formula_and_bounds_the_tail():
    # Massart (1990): P(sup|F_n - F| > eps) <= 2 exp(-2 n eps^2) = alpha
    n, alpha = 10**6, 0.05
    eps = dkw_epsilon(n, alpha)
    assert eps == pytest.approx(math.sqrt(math.log(2 / alpha) / (2 * n)), rel=1e-15)
    assert 2 * math.exp(-2 * n * eps**2) == pytest.approx(alpha, rel=1e-12)
    x = np.random.default_rng(5).exponential(100.0, n)
    s = empirical(x, step=1.0, alpha=alpha)
    assert s.lattice.errors.cumulative == pytest.approx(eps, rel=1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tail = s.lattice.bounded("sf", float(x.max()) + 50)  # past every sample
    assert tail.value == 0 and tail.high == pytest.approx(eps, rel=1e-6)  # a bound, not 0
    assert samples_beyond(n, 0.999) == 1000 and samples_beyond(100, 0.999) == 0


def test_coarse_step_against_the_samples_spread_warns():
    from polyconv.dist.step_check import CoarseStepWarning
    x = np.random.default_rng(6).normal(0.050, 0.006, 1000)  # ~50 us, in ms
    with pytest.warns(CoarseStepWarning, match="much coarser than the samples' spread"):
        Lattice.from_samples(x, step=1.0)
    # the threshold is one standard deviation (Sheppard's h^2/12 vs the variance: by hand)
    with warnings.catch_warnings():
        warnings.simplefilter("error", CoarseStepWarning)
        Lattice.from_samples(x, step=0.005)  # step below the spread: silent
        Lattice.from_samples([1.0, 2.0, 2.0, 3.0], step=1.0)  # exact values on the lattice


def test_band_adds_through_a_series():
    rng = np.random.default_rng(7)
    s1 = empirical(rng.exponential(10.0, 40_000), step=1.0)
    s2 = empirical(rng.exponential(10.0, 90_000), step=1.0)
    tot = series(s1.lattice, s2.lattice)
    # Kolmogorov distance of a convolution <= sum of the inputs' (no cross term)
    assert tot.errors.cumulative == pytest.approx(s1.eps + s2.eps, rel=1e-6)


def test_histogram_input_up_rule_and_counts():
    edges, counts = [0.0, 10.0, 20.0, 50.0], [5, 3, 2]
    s = from_histogram(edges, counts, step=5.0)
    # "up": each bin's count at its upper edge (hand-computed: 10 -> 5/10, 20 -> 3/10, ...)
    assert s.n == 10 and s.lattice.pmf[2] == 0.5 and s.lattice.pmf[4] == 0.3
    assert s.lattice.pmf[10] == 0.2
    v = empirical([1.0, 2.0], counts=[3, 1], step=1.0)
    assert v.lattice.pmf.tolist() == [0.0, 0.75, 0.25]


def test_fitted_tail_is_the_pareto_fit():
    x = stats.genpareto(0.2, scale=10.0).rvs(20_000, random_state=11)
    s = empirical(x, step=0.5, tail={"threshold": 30.0, "law": "genpareto"})
    y = x[x > 30.0] - 30.0
    c, _, scale = stats.genpareto.fit(y, floc=0.0)  # reference: scipy's MLE
    assert s.tail.params["c"] == pytest.approx(c) and s.tail.exceedances == y.size
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        p = s.lattice.sf(80.0)
    emp = np.mean(x > 30.0) * stats.genpareto(c, scale=scale).sf(80.0 + 0.25 - 30.0)
    assert p == pytest.approx(emp, rel=1e-6)


def test_bad_samples_name_the_problem():
    with pytest.raises(ValueError, match="samples"):
        empirical([1.0, float("nan")], step=1.0)
    with pytest.raises(ValueError, match="origin"):
        empirical([-3.0, 1.0], step=1.0)


# ----------------------------------------------------------------------------------- kth_of


def test_two_of_three_identical_is_binomial_closed_form():
    f = np.cumsum(A.pmf)
    k = kth_of(2, A, A, A)
    # P(at least 2 of 3 done) = 3F^2 - 2F^3 (binomial closed form)
    assert np.allclose(np.cumsum(k.pmf), 3 * f**2 - 2 * f**3, rtol=0, atol=1e-15)
    assert np.array_equal(kth_of(2, A, copies=3).pmf, k.pmf)


@pytest.mark.parametrize("k", [1, 2, 3])
def test_kth_of_against_enumeration(k):
    law = enumerate_law([A, B, C], lambda v: sorted(v)[k - 1])
    out = kth_of(k, A, B, C)
    assert np.allclose(out.pmf, on(out, law), rtol=0, atol=1e-15)


def test_kth_of_groups_both_count_directions():
    ds = [Lattice(np.random.default_rng(i).dirichlet(np.ones(4))) for i in range(4)]
    for k in (2, 4):  # k <= n/2 counts finished stages, k > n/2 unfinished ones
        group = [ds[0], ds[0], ds[1], ds[2], ds[3]]
        law = enumerate_law(group, lambda v, k=k: sorted(v)[k - 1])
        out = kth_of(k, *group)
        assert np.allclose(out.pmf, on(out, law), rtol=0, atol=1e-14)


def test_kth_of_of_sampled_stages_keeps_all_mass():
    # sampled stages of different reach: beyond the shortest one's largest sample its cdf is 1
    # (the DKW band covers the rest), so the quorum is not cut there; reference: enumeration
    rng = np.random.default_rng(11)
    ss = [Lattice.from_samples(rng.integers(0, top, 400), step=1.0) for top in (5, 9, 14)]
    out = kth_of(2, *ss)
    law = enumerate_law(ss, lambda v: sorted(v)[1])
    assert math.fsum(out.pmf) == pytest.approx(1.0, abs=1e-14)
    assert np.allclose(out.pmf, on(out, law), rtol=0, atol=1e-15)
    assert out.errors.cumulative >= 3 * dkw_epsilon(400, 0.05)  # the bands add
    assert math.isinf(out.errors.truncated_moment)  # mass past the data: moment unknown


def test_kth_of_extremes_are_max_and_min():
    assert np.allclose(kth_of(3, A, B, C).pmf, all_of(A, B, C).pmf, atol=1e-15)
    mn = first_of(A, B, C)
    assert np.allclose(kth_of(1, A, B, C).pmf[: len(mn)], mn.pmf, atol=1e-15)


def test_fan_out_tail_against_mpmath():
    x = Lattice.from_law(stats.expon(scale=10.0), step=1.0, size=400)
    out = kth_of(990, x, copies=1000)
    f = mpmath.mpf(float(np.cumsum(x.pmf)[40]))
    # P(Bin(1000, F) >= 990) by mpmath's exact binomial sum (independent reference)
    ref = mpmath.fsum(mpmath.binomial(1000, j) * f**j * (1 - f)**(1000 - j)
                      for j in range(990, 1001))
    assert float(np.cumsum(out.pmf)[40]) == pytest.approx(float(ref), rel=1e-9)


# -------------------------------------------------------------------------------- retry


def test_retry_against_geometric_series():
    a = Lattice([0.1, 0.3, 0.2, 0.15, 0.1, 0.1, 0.05])
    r = retry(a, timeout=3.0, retries=2, backoff=[1.0, 2.0])
    q = 0.25  # P(A > 3)
    assert r.p_fail.value == pytest.approx(q**3, rel=1e-14)  # every attempt times out
    assert r.expected_attempts == pytest.approx((1 - q**3) / (1 - q), rel=1e-14)
    starts = [0.0, 4.0, 9.0]  # j tau + cumulative backoff
    body = sum(k * p for k, p in enumerate(a.pmf[:4]))
    mean = sum(q**j * (starts[j] * (1 - q) + body) for j in range(3)) / (1 - q**3)
    assert r.success.mean() == pytest.approx(mean, rel=1e-13)
    # give-up at 9 + 3 = 12 shares its point with a last attempt that succeeds exactly at tau
    assert r.give_up == 12.0
    assert r.response.pmf[12] == pytest.approx(q**3 + q**2 * 0.15, rel=1e-14)


def test_hedge_is_min_of_shifted_copy():
    a = Lattice([0.1, 0.3, 0.2, 0.15, 0.1, 0.1, 0.05])
    hg = hedge(a, after=2.0)
    law = enumerate_law([a, a], lambda v: min(v[0], v[1] + 2.0))
    assert np.allclose(hg.response.pmf, on(hg.response, law), atol=1e-15)
    assert hg.extra_requests.value == pytest.approx(0.4, rel=1e-14)  # P(A > 2), by hand
    busy = sum(p * max(v - 2.0, 0) for v, p in law.items())  # E[(R - d)+]
    assert hg.extra_busy_time.value == pytest.approx(busy, rel=1e-13)


# ------------------------------------------------------------------------ shared stages


def test_shared_quorum_equals_kth_of_and_enumeration():
    stages = {"a": A, "b": B, "c": C, "ab": Block("all_of", ("a", "b")),
              "ac": Block("all_of", ("a", "c")), "bc": Block("all_of", ("b", "c"))}
    net = Network(stages, Block("first_of", ("ab", "ac", "bc")))
    assert net.plan.route == {"a": "events", "b": "events", "c": "events"}
    out = net.evaluate()
    law = enumerate_law([A, B, C], lambda v: min(max(v[0], v[1]), max(v[0], v[2]),
                                                 max(v[1], v[2])))
    assert np.allclose(out.pmf, on(out, law), atol=1e-15)
    naive = first_of(all_of(A, B), all_of(A, C), all_of(B, C))  # independent copies: wrong
    assert not np.allclose(naive.pmf[: len(out)], out.pmf, atol=1e-3)


def test_shared_stage_under_a_sum_by_values():
    net = Network({"a": A, "b": B, "m": Block("all_of", ("a", "b"))},
                  Block("in_sequence", ("a", "m")))
    assert net.plan.route == {"a": "values"}
    out = net.evaluate()
    law = enumerate_law([A, B], lambda v: v[0] + max(v[0], v[1]))
    assert np.allclose(out.pmf, on(out, law), atol=1e-15)


@pytest.mark.parametrize("parts, fn", [
    (("a", "m", "c", "a"), lambda v: 2 * v[0] + max(v[0], v[1]) + v[2]),  # grouped, vectorised
    (("q", "c", "a"), lambda v: v[0] + min(max(v[0], v[1]), v[2]) + v[2]),  # two shared: by point
    (("r", "a"), lambda v: v[0] + v[0] + v[2]),  # a sum below the sum: by point
    (("a", "b", "a"), lambda v: 2 * v[0] + v[1]),  # grouped: a + a is 2 a
])
def test_shared_stage_under_a_sum_routes_against_enumeration(parts, fn):
    stages = {"a": A, "b": B, "c": C, "m": Block("all_of", ("a", "b")),
              "q": Block("first_of", ("m", "c")), "r": Block("in_sequence", ("a", "c"))}
    out = Network(stages, Block("in_sequence", parts)).evaluate()
    law = enumerate_law([A, B, C], fn)  # reference: exact enumeration of the three stages
    assert math.fsum(out.pmf) == pytest.approx(1.0, abs=1e-14)
    assert np.allclose(out.pmf, on(out, law), rtol=0, atol=1e-15)


def test_shared_stage_under_a_sum_on_a_long_grid_against_monte_carlo():
    # 3000-point shared stage: mixed in one vectorised pass (per point it took seconds)
    a = Lattice.from_law(stats.gamma(3.0, scale=100.0), step=1.0, size=3000)
    b = Lattice.from_law(stats.lognorm(0.5, scale=300.0), step=1.0, size=6000)
    net = Network({"a": a, "b": b, "m": Block("all_of", ("a", "b"))},
                  Block("in_sequence", ("a", "m")))
    out = net.evaluate()
    rng = np.random.default_rng(8)
    xa = rng.choice(a.values, 10**6, p=a.pmf / a.pmf.sum())
    xb = rng.choice(b.values, 10**6, p=b.pmf / b.pmf.sum())
    mc = xa + np.maximum(xa, xb)
    for t in (600.0, 900.0, 1500.0):
        # Monte Carlo of the same lattices, 10^6 draws: 5 standard errors (common practice)
        p = float(np.mean(mc <= t))
        tol = 5 * math.sqrt(p * (1 - p) / mc.size) + out.errors.truncated
        assert float(np.sum(out.pmf[out.values <= t])) == pytest.approx(p, abs=tol)


def test_shared_stage_too_large_is_refused_by_name():
    big = Lattice(np.full(5000, 1 / 5000))
    # a sum below the sum: one evaluation per value, 5000 > MAX_CONDITIONED
    net = Network({"db": big, "x": B, "m": Block("in_sequence", ("db", "x"))},
                  Block("in_sequence", ("db", "m")))
    with pytest.raises(ValueError, match="'db'.*5000 evaluations"):
        net.evaluate()
    huge = Lattice(np.full(30_000, 1 / 30_000))
    # the vectorised route: 30000 values x 30000 points > MAX_SUM_WORK
    net = Network({"db": huge, "x": B, "m": Block("all_of", ("db", "x"))},
                  Block("in_sequence", ("db", "m")))
    with pytest.raises(ValueError, match="'db'.*point updates"):
        net.evaluate()


# ------------------------------------------------------------------------- sensitivity


def test_sensitivity_equals_rerun_with_scaled_stage():
    a = Lattice.from_law(stats.gamma(3.0, scale=10.0), step=1.0, size=300)
    b = Lattice.from_law(stats.lognorm(0.5, scale=50.0), step=1.0, size=600)
    net = Network({"a": a, "b": b}, Block("in_sequence", ("a", "b")))
    eff = {(e.stage, e.level): e for e in stage_effects(net, [0.99], speedup=0.2)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rerun = series(a, b.scaled(0.8)).quantile(0.99)  # reference: the network re-run
        removed = a.quantile(0.99)
    assert eff[("b", 0.99)].faster == rerun and eff[("b", 0.99)].removed == removed
    t = required_speedup(net, "b", level=0.99, target=150.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert series(a, b.scaled(t.factor)).quantile(0.99) < 150.0
        assert series(a, b.scaled(t.factor + 2e-3)).quantile(0.99) >= 150.0


def test_scaled_keeps_mean_with_moments_rule():
    x = Lattice([0.1, 0.2, 0.3, 0.4], step=2.0)
    y = x.scaled(0.7, rule="moments")
    assert y.mean() == pytest.approx(0.7 * x.mean(), rel=1e-14)  # E[cX] = c E[X]
    assert x.scaled(2.0).pmf.tolist() == [0.1, 0, 0.2, 0, 0.3, 0, 0.4]


# ------------------------------------------------------------------------- reliability


def test_reliability_of_exponential_lifetime():
    life = Lattice.from_law(stats.expon(scale=100.0), step=0.5, size=8000)
    rel = reliability(life, [50.0, 200.0])
    for t, r in zip(rel.times, rel.reliability, strict=True):
        # nearest rule: P(T > t) on the grid = S(t + h/2) (exponential closed form)
        assert r.value == pytest.approx(math.exp(-(t + 0.25) / 100.0), rel=1e-9)
    assert rel.mttf.value == pytest.approx(100.0, rel=1e-5)
    hz = hazard(life, per_unit_time=False)
    # memoryless: hazard per cell = 1 - exp(-h / mean) away from 0
    assert hz[10] == pytest.approx(1 - math.exp(-0.5 / 100.0), rel=1e-9)
    cold = series(life, life)  # cold standby = sum of lifetimes (gamma(2) mean 200)
    assert cold.mean() == pytest.approx(200.0, rel=1e-4)
