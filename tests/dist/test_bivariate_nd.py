"""Bivariate lattices on the N-D convolution: sums, marginals, compounds, conditional
expectations."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as ss
from scipy import stats

from polyconv.dist.bivariate import BivariateLattice, compound2

RNG = np.random.default_rng(1717)


def _pmf(shape, mass=1.0):
    p = RNG.random(shape)
    return p * (mass / p.sum())


def _panjer_poisson(lam: float, f: np.ndarray, size: int) -> np.ndarray:
    """Compound Poisson pmf by Panjer's recursion (Panjer, ASTIN Bulletin 12 (1981)):
    ``g_0 = exp(-lam (1 - f_0))``, ``g_k = lam / k sum_{j=1..k} j f_j g_(k-j)``; written here
    as the reference, independent of polyconv."""
    g = np.zeros(size)
    g[0] = math.exp(-lam * (1.0 - f[0]))
    for k in range(1, size):
        j = np.arange(1, min(k, f.size - 1) + 1)
        g[k] = lam / k * float(np.sum(j * f[j] * g[k - j]))
    return g


@pytest.mark.parametrize(("sa", "sb"), [((5, 4), (3, 6)), ((60, 40), (30, 50)),
                                        ((300, 8), (12, 8))])
def test_sum_of_independent_lattices_is_the_2d_convolution(sa, sb):
    a, b = _pmf(sa), _pmf(sb)
    s = BivariateLattice(a, 0.5) + BivariateLattice(b, 0.5)
    ref = ss.convolve2d(a, b)  # scipy.signal.convolve2d: direct 2-D convolution
    assert s.shape == ref.shape and s.step == 0.5
    err = np.max(np.abs(s.pmf - ref))
    assert err <= 1e-15 * 50
    assert err <= s.errors.point + 1e-300  # the ledger's point bound covers the rounding


def test_marginals_of_a_product_of_independent_laws():
    px = stats.binom(12, 0.3).pmf(np.arange(13))  # scipy.stats laws as the 1-D references
    py = stats.poisson(2.0).pmf(np.arange(40))
    py[-1] += 1.0 - py.sum()  # a proper law on the grid (the tail lumped at the end)
    joint = BivariateLattice(np.outer(px, py))
    mx, my = joint.marginals()
    np.testing.assert_allclose(mx.pmf, px, atol=1e-16)
    np.testing.assert_allclose(my.pmf, py, atol=1e-16)
    # the marginal of a sum of independent pairs is the 1-D convolution of the marginals
    # (push-forward of a convolution; numpy.convolve as the reference)
    other = BivariateLattice(np.outer(py[:7] / py[:7].sum(), px))
    total = joint + other
    np.testing.assert_allclose(total.marginal(0).pmf,
                               np.convolve(px, py[:7] / py[:7].sum()), atol=1e-15)
    np.testing.assert_allclose(total.marginal(1).pmf, np.convolve(py, px), atol=1e-15)


def test_compound_with_bivariate_severity_has_the_marginal_compounds():
    # a dependent severity: Y = X + Z with Z independent of X (so the two lines share a claim)
    fx = np.array([0.0, 0.3, 0.4, 0.2, 0.1])
    fz = np.array([0.5, 0.25, 0.25])
    sev = np.zeros((5, 7))
    for i in range(5):
        sev[i, i:i + 3] = fx[i] * fz
    lam = 2.0
    joint = compound2(stats.poisson(lam), BivariateLattice(sev), (80, 100))
    # identity: the marginals of a compound of pairs are the compounds of the marginal
    # severities (definition of a compound law); reference: Panjer's recursion above
    for axis, f in ((0, sev.sum(axis=1)), (1, sev.sum(axis=0))):
        ref = _panjer_poisson(lam, f, joint.shape[axis])
        mine = joint.marginal(axis)
        np.testing.assert_allclose(mine.pmf, ref, atol=1e-13)
        assert np.max(np.abs(mine.pmf - ref)) <= mine.errors.point
    # the joint law has E[S_Y] = lam E[Y] and Cov(S_X, S_Y) = lam E[X Y] (compound Poisson
    # moments, e.g. Klugman, Panjer & Willmot, *Loss Models*, from memory)
    i, j = np.meshgrid(np.arange(80), np.arange(100), indexing="ij")
    p = joint.pmf
    exy = float(np.sum(np.outer(np.arange(5), np.arange(7)) * sev))
    cov = np.sum(i * j * p) - np.sum(i * p) * np.sum(j * p)
    assert cov == pytest.approx(lam * exy, rel=1e-9)


def test_conditional_expectation_closed_forms():
    px = stats.binom(6, 0.4).pmf(np.arange(7))
    py = stats.binom(9, 0.7).pmf(np.arange(10))
    joint = BivariateLattice(np.outer(px, py), 2.0)
    # independence: E[Y | X = x] = E[Y] = 2 * 9 * 0.7, E[Y^2 | X = x] = E[Y^2] (binomial
    # moments, scipy.stats)
    np.testing.assert_allclose(joint.conditional_mean(0), 2.0 * 6.3, rtol=1e-13)
    np.testing.assert_allclose(joint.conditional_expectation(0, lambda y: y**2),
                               4.0 * stats.binom(9, 0.7).moment(2), rtol=1e-13)
    np.testing.assert_allclose(joint.conditional_expectation(1), 2.0 * 2.4, rtol=1e-13)
    # dependence Y = X + Z: E[Y | X = x] = x + E[Z] (closed form)
    fz = np.array([0.2, 0.5, 0.3])
    dep = np.zeros((7, 9))
    for i in range(7):
        dep[i, i:i + 3] = px[i] * fz
    cond = BivariateLattice(dep).conditional_mean(0)
    np.testing.assert_allclose(cond, np.arange(7) + 1.1, rtol=1e-13)
    with pytest.raises(ValueError, match="axis"):
        joint.conditional_expectation(2)
    with pytest.raises(ValueError, match="g must map"):
        joint.conditional_expectation(0, lambda y: y[:3])


def test_conditional_mean_is_nan_where_there_is_no_mass():
    p = np.array([[0.5, 0.0], [0.0, 0.0], [0.25, 0.25]])
    out = BivariateLattice(p).conditional_mean(0)
    assert out[0] == 0.0 and math.isnan(out[1]) and out[2] == 0.5  # by hand
