"""Reinsurance on the bivariate lattice against exact-fraction enumeration and closed forms."""

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice, compound
from polyconv.dist.bivariate import BivariateLattice, compound2
from polyconv.dist.reinsurance import (
    XoLLayer,
    quota_share,
    surplus_share,
    xol_programme,
)

# a small programme, every outcome enumerated with exact fractions (source: the definitions of
# the layer, aggregate terms and pro-rata reinstatement premium in polyconv.dist.reinsurance,
# applied by hand outcome by outcome; no floating point in the reference)
SEV = [Fraction(1, 8), Fraction(1, 4), Fraction(1, 8), Fraction(1, 4), Fraction(1, 8),
       Fraction(1, 8)]  # amounts 0..5
COUNTS = [Fraction(3, 8), Fraction(1, 4), Fraction(1, 4), Fraction(1, 8)]  # N = 0..3
D, W, K, RATE, AAD = 1, 2, 1, Fraction(1, 2), 1


def _enumerate():
    """Exact laws of gross, ceded, net and E[RP]/P for layer 2 xs 1, one reinstatement at 50%
    and an annual aggregate deductible of 1."""
    gross, ceded, net = {}, {}, {}
    erp = Fraction(0)
    cap = (K + 1) * W
    for n, pn in enumerate(COUNTS):
        for xs in itertools.product(range(len(SEV)), repeat=n):
            p = pn
            for x in xs:
                p *= SEV[x]
            g = sum(xs)
            lay = sum(min(max(x - D, 0), W) for x in xs)
            c = min(max(lay - AAD, 0), cap)
            rp = RATE * Fraction(min(max(c, 0), W), W)  # one reinstatement, pro rata
            for dct, key in ((gross, g), (ceded, c), (net, g - c)):
                dct[key] = dct.get(key, 0) + p
            erp += p * rp
    return gross, ceded, net, erp


def _counts_law():
    return stats.rv_discrete(values=(range(4), [float(c) for c in COUNTS]))()


def test_programme_matches_exact_enumeration():
    gross, ceded, net, erp_per_premium = _enumerate()
    sev = Lattice([float(s) for s in SEV])
    layer = XoLLayer(D, W, reinstatements=K, rates=(float(RATE),), aggregate_deductible=AAD,
                     premium=1.0)
    res = xol_programme(_counts_law(), sev, layer, size=16)
    for lat, exact in ((res.gross, gross), (res.ceded, ceded), (res.net, net)):
        ref = np.zeros(max(len(lat), max(exact) + 1))
        for k, v in exact.items():
            ref[k] = float(v)
        np.testing.assert_allclose(lat.pmf, ref[:len(lat)], atol=1e-13, rtol=0)
    # gross = ceded + net in expectation (exact fractions)
    eg = sum(k * v for k, v in gross.items())
    assert abs(res.gross._mean() - float(eg)) < 1e-12
    assert abs(res.ceded._mean() + res.net._mean() - float(eg)) < 1e-12
    # reinstatement premium by hand: P = 1, E[RP] = 1/2 E[min(C, W)] / W
    assert abs(res.expected_reinstatement_premium - float(erp_per_premium)) < 1e-13


def test_pure_premium_with_reinstatements_solves_its_equation():
    sev = Lattice([float(s) for s in SEV])
    layer = XoLLayer(D, W, reinstatements=K, rates=(float(RATE),), aggregate_deductible=AAD)
    res = xol_programme(_counts_law(), sev, layer, size=16)
    # P + E[RP] = E[C] (definition of the pure premium, module docstring)
    assert abs(res.premium + res.expected_reinstatement_premium - res.expected_ceded) < 1e-13
    assert res.premium < res.expected_ceded


def test_aggregate_deductible_without_cap_against_enumeration():
    sev = Lattice([float(s) for s in SEV])
    res = xol_programme(_counts_law(), sev, XoLLayer(D, W, aggregate_deductible=2), size=16)
    net = {}
    for n, pn in enumerate(COUNTS):  # by hand: net = G - (L - 2)+
        for xs in itertools.product(range(len(SEV)), repeat=n):
            p = pn
            for x in xs:
                p *= SEV[x]
            lay = sum(min(max(x - D, 0), W) for x in xs)
            key = sum(xs) - max(lay - 2, 0)
            net[key] = net.get(key, 0) + p
    ref = np.zeros(len(res.net))
    for k, v in net.items():
        ref[k] = float(v)
    np.testing.assert_allclose(res.net.pmf, ref, atol=1e-13, rtol=0)


def test_bivariate_compound_marginals_equal_univariate_compounds():
    # identity: the marginals of (sum X_i, sum Y_i) are the compounds of the marginal
    # severities (definition of a compound law); reference: polyconv.dist.compound's Panjer
    # recursion (an independent algorithm)
    rng = np.random.default_rng(5)
    f = rng.random((7, 5))
    f /= f.sum()
    biv = BivariateLattice(f)
    joint = compound2(stats.poisson(2.5), biv, (90, 70))
    for axis in (0, 1):
        ref = compound(stats.poisson(2.5), Lattice(f.sum(axis=1 - axis)),
                       method="recursion", size=joint.shape[axis])
        mine = joint.marginal(axis)
        np.testing.assert_allclose(mine.pmf, ref.pmf, atol=1e-14)
        assert np.max(np.abs(mine.pmf - ref.pmf)) <= mine.errors.point
    # a window (second axis cut at 20): the first marginal misses P(Y >= 20), and its ledger
    # says so
    short = compound2(stats.poisson(2.5), biv, (90, 20)).marginal(0)
    ref = compound(stats.poisson(2.5), Lattice(f.sum(axis=1)), method="recursion", size=90)
    gap = float(np.sum(np.abs(short.pmf - ref.pmf)))
    assert 1e-9 < gap <= short.errors.l1


def test_bivariate_sum_is_two_dimensional_convolution():
    # reference: numpy.convolve along both axes by the outer-product identity for a
    # product-form pmf (a (x) b) * (c (x) d) = (a * c) (x) (b * d)
    a, b, c, d = (np.array(v) for v in ([.2, .8], [.5, .5], [.1, .3, .6], [.9, .1]))
    s = BivariateLattice(np.outer(a, b)) + BivariateLattice(np.outer(c, d))
    np.testing.assert_allclose(s.pmf, np.outer(np.convolve(a, c), np.convolve(b, d)),
                               atol=1e-15)
    # conditional mean E[Y | X] of a product form is E[Y] (independence)
    np.testing.assert_allclose(s.conditional_mean(0), np.convolve(b, d) @ np.arange(3))


def test_quota_share_and_surplus():
    lat = compound(stats.poisson(2.0), Lattice([0.0, 0.5, 0.5]))
    kept, ceded = quota_share(lat, 0.3)
    assert abs(kept.mean() + ceded.mean() - lat.mean()) < 1e-12
    assert abs(ceded.mean() - 0.3 * 3.0) < 1e-10  # E[S] = 2 * 1.5 (Wald)
    # surplus: 4 lines of 100 on a risk of 300 cede 200/300 (definition, common practice)
    assert surplus_share(300.0, 100.0, 4) == pytest.approx(2 / 3)
    assert surplus_share(1000.0, 100.0, 4) == pytest.approx(0.4)
    assert surplus_share(80.0, 100.0, 4) == 0.0


def test_layer_terms_are_validated():
    with pytest.raises(ValueError, match="reinstatements"):
        XoLLayer(1.0, 2.0, reinstatements=-1)
    with pytest.raises(ValueError, match="multiple of the lattice step"):
        xol_programme(stats.poisson(1.0), Lattice([0.5, 0.5], step=2.0), XoLLayer(1.0, 2.0))
    assert math.isinf(XoLLayer(1.0, 2.0).aggregate_cap())


def test_net_error_stays_within_its_ledger():
    # the computed net against the exact enumeration is within the certified L1 bound
    sev = Lattice([float(s) for s in SEV])
    res = xol_programme(_counts_law(), sev, XoLLayer(D, W, reinstatements=2, rates=(1.0,)),
                        size=16)
    _, _, net, _ = _enumerate_generic(W * 3)
    ref = np.array([float(net.get(k, 0)) for k in range(len(res.net))])
    assert np.sum(np.abs(res.net.pmf - ref)) <= res.net.errors.l1 + 1e-16
    assert res.net.errors.l1 < 1e-9


def _enumerate_generic(cap):
    gross, ceded, net = {}, {}, {}
    for n, pn in enumerate(COUNTS):
        for xs in itertools.product(range(len(SEV)), repeat=n):
            p = pn
            for x in xs:
                p *= SEV[x]
            c = min(sum(min(max(x - D, 0), W) for x in xs), cap)
            for dct, key in ((gross, sum(xs)), (ceded, c), (net, sum(xs) - c)):
                dct[key] = dct.get(key, 0) + p
    return gross, ceded, net, None
