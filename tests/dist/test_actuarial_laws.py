"""Richer laws: zero-modified / zero-truncated counts, mixed Poisson, empirical counts, splices,
mixtures, truncation, censoring, inflation."""

import math

import numpy as np
import pytest
from scipy import integrate, stats

from polyconv.dist import Lattice, compound
from polyconv.dist import count_laws as cl
from polyconv.dist import law_ops as lo


def _direct_compound(pn, f, size):
    """sum_n P(N = n) f^{*n} by repeated numpy.convolve (the definition of a compound law)."""
    out = np.zeros(size)
    conv = np.array([1.0])
    for p in pn:
        out[: min(size, conv.size)] += p * conv[:size]
        conv = np.convolve(conv, f)[:size]
    return out


@pytest.mark.parametrize("base", [stats.poisson(2.0), stats.nbinom(3.0, 0.4),
                                  stats.binom(6, 0.3)])
def test_zero_modified_pmf_matches_its_definition(base):
    # source: the (a, b, 1) class, Klugman-Panjer-Willmot Loss Models sec. 6.6:
    # p_k^M = (1 - p0^M) / (1 - p0) p_k for k >= 1, and p_k / p_{k-1} = a + b/k for k >= 2
    zm = cl.zero_modified(base, 0.35)
    k = np.arange(0, 12)
    expect = np.where(k == 0, 0.35, 0.65 / (1 - base.pmf(0)) * base.pmf(k))
    np.testing.assert_allclose(zm.pmf(k), expect, rtol=1e-13, atol=1e-300)
    a, b = zm.polyconv_counts.ab
    kk = np.arange(2, 6)
    np.testing.assert_allclose(zm.pmf(kk) / zm.pmf(kk - 1), a + b / kk, rtol=1e-12)
    assert zm.mean() == pytest.approx(float(np.sum(np.arange(400) * zm.pmf(np.arange(400)))),
                                      rel=1e-12)
    zt = cl.zero_truncated(base)
    assert zt.pmf(0) == 0 and zt.pmf(1) == pytest.approx(base.pmf(1) / (1 - base.pmf(0)))


@pytest.mark.parametrize("law", [cl.zero_truncated(stats.poisson(2.0)),
                                 cl.zero_modified(stats.nbinom(2.0, 0.4), 0.3)])
def test_ab1_recursion_and_transform_against_direct_sum(law):
    f = np.array([0.1, 0.4, 0.3, 0.2])
    size = 60
    ref = _direct_compound(law.pmf(np.arange(200)), f, size)  # oracle: numpy.convolve sums
    rec = compound(law, Lattice(f), method="recursion", size=size)
    fft = compound(law, Lattice(f), method="fft", size=size)
    np.testing.assert_allclose(rec.pmf, ref, atol=1e-15)
    np.testing.assert_allclose(fft.pmf, ref, atol=1e-14)
    assert np.max(np.abs(rec.pmf - ref)) <= rec.errors.point + 1e-17


def test_gamma_mixed_poisson_is_scipy_nbinom():
    # source: Poisson-gamma mixture = negative binomial (Greenwood & Yule 1920, from memory);
    # oracle: scipy.integrate.quad of the mixture integral, and scipy.stats.nbinom
    lam, cv = 3.0, 0.6
    law = cl.mixed_poisson(lam, "gamma", cv)
    r = 1 / cv ** 2
    k = np.arange(15)
    np.testing.assert_allclose(law.pmf(k), stats.nbinom.pmf(k, r, r / (r + lam)), rtol=1e-14)
    mixing = stats.gamma(r, scale=1 / r)
    for kk in (0, 3, 9):
        val, _ = integrate.quad(lambda t, kk=kk: stats.poisson.pmf(kk, lam * t) * mixing.pdf(t),
                                0, np.inf, epsabs=1e-14)
        assert law.pmf(kk) == pytest.approx(val, rel=1e-8)


@pytest.mark.parametrize("mixing, density", [
    ("lognormal", lambda cv: stats.lognorm(math.sqrt(math.log1p(cv * cv)),
                                           scale=math.exp(-math.log1p(cv * cv) / 2))),
    ("inverse-gaussian", lambda cv: stats.invgauss(cv * cv, scale=1 / cv ** 2))])
def test_quadrature_mixed_poisson_against_the_mixture_integral(mixing, density):
    # oracle: scipy.integrate.quad of sum_k Poisson(k; lam t) g(t) dt; moments: E[N] = lam,
    # Var N = lam + lam^2 cv^2 (law of total variance)
    lam, cv = 4.0, 0.5
    law = cl.mixed_poisson(lam, mixing, cv)
    g = density(cv)
    for kk in (0, 2, 5, 12):
        val, _ = integrate.quad(lambda t, kk=kk: stats.poisson.pmf(kk, lam * t) * g.pdf(t),
                                0, np.inf, epsabs=1e-15, limit=200)
        assert law.pmf(kk) == pytest.approx(val, rel=1e-6)
    assert law.mean() == pytest.approx(lam, rel=1e-12)
    assert law.var() == pytest.approx(lam + lam * lam * cv * cv, rel=1e-6)
    s = compound(law, Lattice([0.0, 0.5, 0.5]))
    assert s.mean() == pytest.approx(lam * 1.5, rel=1e-10)  # Wald's identity


def test_empirical_counts_table():
    law = cl.empirical_counts([3, 5, 3, 4, 0])  # five observed years
    assert law.pmf(3) == pytest.approx(0.4) and law.pmf(0) == pytest.approx(0.2)
    s = compound(law, Lattice([0.0, 1.0]))  # each claim 1: S = N
    np.testing.assert_allclose(s.pmf[:6], [0.2, 0, 0, 0.4, 0.2, 0.2], atol=1e-15)


def test_custom_law_without_sf_no_longer_fails():
    # a Poisson written as a custom law (only _pmf): scipy's sf = 1 - cdf stalls near 2e-14;
    # the compound equals the one of scipy.stats.poisson (oracle: scipy's own law)
    from scipy.stats import rv_discrete

    class CustomPoisson(rv_discrete):
        def _pmf(self, k):
            return stats.poisson.pmf(k, 55.5)

    custom = CustomPoisson(a=0, name="custom_poisson")()
    sev = Lattice([0.0, 0.6, 0.4])
    a = compound(custom, sev, method="fft", size=400)
    b = compound(stats.poisson(55.5), sev, method="fft", size=400)
    np.testing.assert_allclose(a.pmf, b.pmf, atol=1e-13)


def test_heavy_custom_count_law_message_names_the_cause():
    from scipy.stats import rv_discrete

    class Heavy(rv_discrete):
        def _pmf(self, k):
            return 1.0 / ((k + 1.0) * (k + 2.0))  # P(N > n) = 1/(n + 2)

    with pytest.raises(ValueError, match=r"still has P\(N > .*heavy-tailed"):
        compound(Heavy(a=0, name="heavy")(), Lattice([0.0, 1.0]), method="fft", size=10)


def test_splice_mixture_truncation_censoring_inflation():
    below, above = stats.expon(scale=10.0), stats.pareto(3.0, scale=50.0)
    sp = lo.splice(below, above, 50.0, weight_below=0.9)
    assert sp.cdf(50.0) == pytest.approx(0.9)  # definition: weight below the threshold
    # mean: 0.9 E[X | X <= 50] (expon) + 0.1 E[pareto] (pareto above its scale is unchanged)
    e_below = (10 - 60 * math.exp(-5)) / (1 - math.exp(-5))  # closed form, by hand
    assert sp.mean() == pytest.approx(0.9 * e_below + 0.1 * 75.0, rel=1e-7)
    mix = lo.mixture([0.3, 0.7], [stats.expon(scale=1.0), stats.gamma(2.0, scale=3.0)])
    assert mix.mean() == pytest.approx(0.3 * 1 + 0.7 * 6, rel=1e-12)
    assert mix.cdf(2.0) == pytest.approx(0.3 * stats.expon.cdf(2.0)
                                         + 0.7 * stats.gamma.cdf(2.0, 2.0, scale=3.0))
    # exponential is memoryless: the excess over 5 is again expon(10) (closed form)
    ex = lo.left_truncated(stats.expon(scale=10.0), 5.0, shift=True)
    assert ex.mean() == pytest.approx(10.0, rel=1e-9)
    assert ex.cdf(7.0) == pytest.approx(stats.expon.cdf(7.0, scale=10.0))
    cen = lo.censored(stats.expon(scale=10.0), 20.0)
    assert cen.mean() == pytest.approx(10 * (1 - math.exp(-2)), rel=1e-9)  # E[min(X, u)]
    lat = Lattice.from_law(cen, step=1.0, size=25)
    assert lat.pmf[20] == pytest.approx(math.exp(-2) + stats.expon.cdf(20, scale=10)
                                        - stats.expon.cdf(19.5, scale=10), rel=1e-9)
    inf = lo.inflated(stats.lognorm(1.0, scale=10.0), 1.05)
    assert inf.mean() == pytest.approx(10.5 * math.exp(0.5), rel=1e-12)
    inf2 = lo.inflated(sp, 1.1)
    assert inf2.mean() == pytest.approx(1.1 * sp.mean(), rel=1e-9)
    assert inf2.cdf(55.0) == pytest.approx(0.9)
