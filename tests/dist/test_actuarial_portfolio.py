"""Portfolios (regrid, total, diversification) and Euler TVaR contributions."""

import itertools
import math
import warnings
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from polyconv.dist import Lattice, compound
from polyconv.dist.allocation import split_contributions, tvar_contributions
from polyconv.dist.portfolio import portfolio, regrid
from polyconv.dist.reinsurance import XoLLayer, xol_programme


def test_regrid_keeps_mass_and_mean_and_bounds_the_variance():
    # source: definition of linear (mean-preserving) rounding; Var grows by at most H^2/4
    # (the split of one point onto two points H apart has variance at most H^2/4)
    lat = compound(stats.poisson(3.0), Lattice.from_law(stats.gamma(2.0, scale=3.0), step=0.7))
    new = regrid(lat, 2.5)
    assert new.step == 2.5
    assert abs(new.pmf.sum() - lat.pmf.sum()) < 1e-14
    assert abs(new.mean() - lat.mean()) < 1e-11
    assert 0 <= new.variance() - lat.variance() <= 2.5 ** 2 / 4 + 1e-9
    assert new.errors.l1 <= lat.errors.l1 + 1e-14


def test_regrid_by_hand():
    # mass 1/2 at 1 and 1/2 at 4 onto step 3: 1 -> 2/3 at 0, 1/3 at 3; 4 -> 2/3 at 3, 1/3 at 6
    # (by hand from the definition)
    new = regrid(Lattice([0.5, 0, 0, 0.5], origin=1.0), 3.0)
    np.testing.assert_allclose(new.pmf, [1 / 3, 1 / 6 + 1 / 3, 1 / 6], atol=1e-15)
    assert new.origin == 0.0


def test_lattice_regrid_method_is_the_kernel_and_keeps_the_ledger():
    # source: by hand from the definition (as test_regrid_by_hand), through the method; the
    # ledger: a Markov kernel does not grow the L1 error, the truncated mass stays beyond the grid
    lat = Lattice([0.5, 0, 0, 0.5], origin=1.0)
    new = lat.regrid(3.0)
    np.testing.assert_allclose(new.pmf, [1 / 3, 1 / 6 + 1 / 3, 1 / 6], atol=1e-15)
    assert new.mean() == pytest.approx(lat.mean(), abs=1e-14)
    assert lat.regrid(1.0) is lat  # already on that grid
    heavy = compound(stats.poisson(2.0), Lattice.from_law(stats.pareto(2.5, scale=3.0),
                                                          step=0.5, size=200), size=300)
    moved = heavy.regrid(1.25)
    # equal up to the rounding of two float sums of the same mass (n u, Higham section 4.2)
    assert moved.truncated_mass == pytest.approx(heavy.truncated_mass, abs=300 * 2.0 ** -53)
    assert heavy.truncated_mass > 0
    assert heavy.errors.l1 <= moved.errors.l1 <= heavy.errors.l1 + 1e-15
    assert moved.pmf.sum() == pytest.approx(heavy.pmf.sum(), abs=1e-14)
    # the truncated part moves up by less than H: E[(X + H)^2] = m2 + 2 H m1 + H^2 t (algebra)
    e, f = heavy.errors, moved.errors
    t = min(1.0, e.truncated + e.l1)
    assert math.isfinite(e.truncated_moment2)
    assert f.truncated_moment2 == pytest.approx(e.truncated_moment2 + 2 * 1.25 *
                                                e.truncated_moment + 1.25 ** 2 * t, rel=1e-12)
    with warnings.catch_warnings():  # the range is wide here (a heavy tail), but finite
        warnings.simplefilter("ignore")
        assert math.isfinite(moved.bounded("std").high)
    with pytest.raises(ValueError, match="step"):
        lat.regrid(0.0)


def test_portfolio_total_is_the_convolution_and_diversifies():
    a = Lattice([0.5, 0.3, 0.2], step=2.0)
    b = Lattice([0.1, 0.2, 0.3, 0.4], step=1.0)
    res = portfolio([a, b])  # common step 2: b is regridded
    ref = np.convolve(res.lines[0].pmf, res.lines[1].pmf)  # reference: numpy.convolve
    np.testing.assert_allclose(res.total.pmf, ref, atol=1e-15)
    assert res.diversification("tvar", 0.9) >= -1e-12  # TVaR is subadditive (Acerbi-Tasche)


def _exact_contributions(pmfs, p):
    """Euler contributions by enumerating the joint outcomes of independent lines with exact
    fractions (source: the definition in polyconv.dist.allocation, Acerbi & Tasche 2002)."""
    outcomes = {}
    for combo in itertools.product(*[list(enumerate(pm)) for pm in pmfs]):
        prob = Fraction(1)
        for _, q in combo:
            prob *= q
        xs = tuple(k for k, _ in combo)
        outcomes[xs] = outcomes.get(xs, 0) + prob
    by_s = {}
    for xs, q in outcomes.items():
        by_s.setdefault(sum(xs), []).append((xs, q))
    cum = Fraction(0)
    for s in sorted(by_s):
        cum += sum(q for _, q in by_s[s])
        if cum >= p:
            v, fv = s, cum
            break
    parts = []
    for i in range(len(pmfs)):
        above = sum(xs[i] * q for s in by_s if s > v for xs, q in by_s[s])
        atom_mass = sum(q for _, q in by_s[v])
        atom = sum(xs[i] * q for xs, q in by_s[v]) / atom_mass
        parts.append((above + atom * (fv - p)) / (1 - p))
    return v, parts


def test_tvar_contributions_against_exact_enumeration():
    pmfs = [[Fraction(1, 2), Fraction(1, 4), Fraction(1, 4)],
            [Fraction(1, 5), Fraction(2, 5), Fraction(1, 5), Fraction(1, 5)],
            [Fraction(3, 4), Fraction(0), Fraction(1, 4)]]
    p = Fraction(7, 10)
    v, exact = _exact_contributions(pmfs, p)
    res = tvar_contributions([Lattice([float(q) for q in pm]) for pm in pmfs], float(p))
    assert res.var == v
    np.testing.assert_allclose(res.parts, [float(c) for c in exact], atol=1e-13)
    assert abs(sum(res.parts) - res.tvar) < 1e-13  # Euler allocation identity: full allocation


def test_tvar_contributions_sum_to_total_on_compounds():
    lines = [compound(stats.poisson(m), Lattice.from_law(stats.gamma(1.5, scale=s), step=1.0))
             for m, s in ((2.0, 10.0), (5.0, 3.0), (0.5, 40.0))]
    res = tvar_contributions(lines, 0.99)
    assert abs(sum(res.parts) - res.tvar) < 1e-9 * res.tvar  # Euler identity
    total = lines[0] + lines[1] + lines[2]
    assert abs(res.tvar - total.tail_value_at_risk(0.99)) < 1e-9 * res.tvar
    # each contribution is at most its stand-alone TVaR (TVaR of a sum, comonotone bound)
    assert all(c <= a + 1e-9 for c, a in zip(res.parts, res.stand_alone, strict=True))


def test_split_contributions_against_exact_enumeration():
    # the ceded and net parts of the gross TVaR for the small programme of the reinsurance
    # tests, enumerated exactly (source: definitions; exact fractions)
    sev = [Fraction(1, 8), Fraction(1, 4), Fraction(1, 8), Fraction(1, 4), Fraction(1, 8),
           Fraction(1, 8)]
    counts = [Fraction(3, 8), Fraction(1, 4), Fraction(1, 4), Fraction(1, 8)]
    d, w, cap = 1, 2, 4
    out = {}
    for n, pn in enumerate(counts):
        for xs in itertools.product(range(6), repeat=n):
            q = pn
            for x in xs:
                q *= sev[x]
            c = min(sum(min(max(x - d, 0), w) for x in xs), cap)
            out.setdefault(sum(xs), []).append((c, q))
    p = Fraction(9, 10)
    cum = Fraction(0)
    for s in sorted(out):
        cum += sum(q for _, q in out[s])
        if cum >= p:
            v, fv = s, cum
            break
    above = sum(c * q for s in out if s > v for c, q in out[s])
    atom = sum(c * q for c, q in out[v]) / sum(q for _, q in out[v])
    exact_c = (above + atom * (fv - p)) / (1 - p)
    law = stats.rv_discrete(values=(range(4), [float(c) for c in counts]))()
    res = xol_programme(law, Lattice([float(s) for s in sev]),
                        XoLLayer(d, w, reinstatements=1, rates=(0.0,)), size=16)
    con = split_contributions(res, 0.9)
    assert con.parts[0] == pytest.approx(float(exact_c), abs=1e-12)
    assert abs(sum(con.parts) - con.tvar) < 1e-12
