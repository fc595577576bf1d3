"""Tests of polyconv.dist.compound: oracle identities, FFT vs recursion, tilting."""

import math

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice, compound
from polyconv.dist.counts import classify
from polyconv.dist.transform import transform_compound


def lognormal_severity(n=400, sigma=1.0, scale=8.0):
    """A severity on 0..n-1 invented for the tests: lognormal densities at cell midpoints,
    normalised in the test (the library never renormalises)."""
    p = stats.lognorm(sigma, scale=scale).pdf(np.arange(n) + 0.5)
    p[0] = 0.0
    return Lattice(p / p.sum())


def test_negative_binomial_is_compound_poisson_logarithmic():
    # nbinom(r, p) = compound Poisson(lam = -r ln p) with logser(1 - p) severity
    # (Quenouille 1949; common practice, no source for the scipy form: DESIGN.md section 6);
    # scipy.stats.nbinom and scipy.stats.logser as oracle
    r, p = 3.5, 0.3
    lam = -r * math.log(p)
    k = np.arange(1, 200)
    sev = np.zeros(200)
    sev[1:] = stats.logser(1 - p).pmf(k)
    sev_lat = Lattice(sev)
    want = stats.nbinom(r, p).pmf(np.arange(256))
    for method in ("fft", "recursion"):
        got = compound(stats.poisson(lam), sev_lat, method=method, size=256)
        assert np.max(np.abs(got.pmf - want)) < 1e-13, method


def test_poisson_counts_of_unit_severity_is_poisson():
    # N ~ Poisson(lam), every X = 1: S = N (definition)
    s = compound(stats.poisson(4.0), Lattice([0.0, 1.0]), method="fft", size=64)
    assert np.max(np.abs(s.pmf - stats.poisson(4.0).pmf(np.arange(64)))) < 1e-15


def test_binomial_counts_of_bernoulli_severity_is_binomial():
    # Binomial(m, q) thinned by Bernoulli(s) is Binomial(m, q s) (common practice, no source)
    m, q, s = 30, 0.6, 0.5
    for method in ("fft", "recursion"):
        got = compound(stats.binom(m, q), Lattice([1 - s, s]), method=method, size=m + 1)
        want = stats.binom(m, q * s).pmf(np.arange(m + 1))
        assert np.max(np.abs(got.pmf - want)) < 1e-13, method


def test_fft_and_recursion_agree_on_2_12_grid():
    # the brief's acceptance check: <= 1e-12 absolute on a 2^12 grid
    sev = lognormal_severity()
    for counts in (stats.poisson(40.0), stats.nbinom(5.0, 0.2), stats.binom(60, 0.4)):
        a = compound(counts, sev, method="fft", size=1 << 12)
        b = compound(counts, sev, method="recursion", size=1 << 12)
        assert np.max(np.abs(a.pmf - b.pmf)) <= 1e-12, counts.dist.name
        assert a.truncated_mass < 1e-9


def test_large_poisson_mean_does_not_underflow():
    # e^-lam underflows for lam > ~745 (DESIGN.md section 6): both routes still agree, mass 1
    sev = Lattice([0.0, 0.5, 0.3, 0.2])
    a = compound(stats.poisson(2000.0), sev, method="fft", size=8192)
    b = compound(stats.poisson(2000.0), sev, method="recursion", size=8192)
    assert np.max(np.abs(a.pmf - b.pmf)) < 1e-13
    assert float(np.sum(b.pmf)) == pytest.approx(1.0, abs=1e-12)
    # E[S] = E[N] E[X] = 2000 * 1.7 (Wald's identity, common practice)
    assert b.mean() == pytest.approx(3400.0, rel=1e-12)


def test_default_grid_reaches_tail_tolerance():
    sev = lognormal_severity(n=200, sigma=0.5, scale=5.0)
    s = compound(stats.poisson(10.0), sev)
    assert s.truncated_mass < 1e-11
    assert len(s) >= len(sev)
    # Var S = E[N] E[X^2] for a compound Poisson (common practice, no source)
    assert s.variance() == pytest.approx(10.0 * sev.moment(2), rel=1e-9)


def test_generic_counts_law_by_brute_force():
    # any counts law through its PGF: scipy geom (support 1, 2, ...) against sum_n p_n f^{*n}
    counts = stats.geom(0.5)
    sev = Lattice([0.2, 0.5, 0.3])
    size = 40
    got = compound(counts, sev, method="fft", size=size)
    want = np.zeros(size)
    power = np.array([1.0])
    for n in range(1, 60):
        power = np.convolve(power, sev.pmf)
        want[: min(size, power.size)] += counts.pmf(n) * power[:size]
    assert np.max(np.abs(got.pmf - want)) < 1e-15
    with pytest.raises(ValueError, match="recursion"):
        compound(counts, sev, method="recursion", size=size)


def test_tilting_cuts_aliasing_on_short_grid():
    # grid far too short: most mass lies beyond it.  Without padding and tilting the wrap-around
    # (aliasing) swamps the result; tilting (Grubel & Hermesmeier 1999) removes it.
    sev = lognormal_severity(n=64, sigma=0.5, scale=6.0)
    law = classify(stats.poisson(60.0))
    size = 256
    exact = compound(stats.poisson(60.0), sev, method="recursion", size=size).pmf
    f = np.asarray(sev.pmf)
    plain = transform_compound(law.transform, f, size, n_fft=size, theta=0.0)
    tilted = transform_compound(law.transform, f, size, n_fft=size)
    padded = transform_compound(law.transform, f, size)
    err_plain = np.max(np.abs(plain.pmf - exact))
    err_tilted = np.max(np.abs(tilted.pmf - exact))
    err_padded = np.max(np.abs(padded.pmf - exact))
    assert err_plain > 1e-3
    assert err_tilted < 1e-6 * err_plain
    assert err_padded < 1e-12
    assert err_padded <= padded.trust_floor  # the floor bounds the real error
    assert err_tilted <= tilted.trust_floor


def test_floor_bounds_real_error_fft():
    sev = lognormal_severity()
    a = compound(stats.poisson(40.0), sev, method="fft", size=1 << 12)
    b = compound(stats.poisson(40.0), sev, method="recursion", size=1 << 12)
    err = np.max(np.abs(a.pmf - b.pmf))
    assert err <= a.trust_floor + b.trust_floor
    assert a.trust_floor < 1e-11


def test_bad_input():
    with pytest.raises(TypeError, match="counts"):
        compound(3.0, Lattice([1.0]))
    with pytest.raises(TypeError, match="counts"):
        compound(stats.norm(), Lattice([1.0]))
    with pytest.raises(TypeError, match="severity"):
        compound(stats.poisson(1.0), [0.5, 0.5])
    with pytest.raises(ValueError, match="method"):
        compound(stats.poisson(1.0), Lattice([1.0]), method="magic")
    with pytest.raises(ValueError, match="size"):
        compound(stats.poisson(1.0), Lattice([1.0]), size=0)
    with pytest.raises(ValueError, match="origin"):
        compound(stats.poisson(1.0), Lattice([1.0], origin=-1.0))


def test_severity_origin_shift():
    # severity on {2, 3}: same as a lattice from 0 with two leading zeros
    a = compound(stats.poisson(1.5), Lattice([0.5, 0.5], origin=2.0), size=30)
    b = compound(stats.poisson(1.5), Lattice([0.0, 0.0, 0.5, 0.5]), size=30)
    assert np.max(np.abs(a.pmf - b.pmf)) < 1e-16
