"""Tests of polyconv.dist delay networks against brute-force enumeration."""

import itertools

import numpy as np
import pytest

from polyconv.dist import Lattice, all_of, first_of, mixture, series

A = Lattice([0.2, 0.5, 0.3], step=1.0, origin=2.0)   # delays 2, 3, 4 (invented example)
B = Lattice([0.6, 0.1, 0.1, 0.2], step=1.0, origin=1.0)  # delays 1, 2, 3, 4
C = Lattice([0.5, 0.5], step=1.0, origin=3.0)


def brute(op, *lats):
    """Law of op(X_1, ..., X_k) for independent lattices, by enumerating all outcomes."""
    out = {}
    for combo in itertools.product(*[list(zip(lat.values, lat.pmf, strict=True)) for lat in lats]):
        v = op([c[0] for c in combo])
        out[v] = out.get(v, 0.0) + float(np.prod([c[1] for c in combo]))
    return out


def as_dict(lat):
    return {float(v): float(p) for v, p in zip(lat.values, lat.pmf, strict=True) if p > 0}


def check(lat, want):
    got = as_dict(lat)
    for v, p in want.items():
        assert got.get(v, 0.0) == pytest.approx(p, abs=1e-15)
    assert sum(got.values()) == pytest.approx(1.0, abs=1e-15)


def test_series_is_sum():
    check(series(A, B, C), brute(sum, A, B, C))


def test_all_of_is_max():
    # fork-join waits for all: F_max = prod F_i (independence assumed)
    check(all_of(A, B, C), brute(max, A, B, C))


def test_first_of_is_min():
    # race / hedged request: 1 - F_min = prod (1 - F_i) (independence assumed)
    check(first_of(A, B, C), brute(min, A, B, C))


def test_mixture():
    m = mixture([0.25, 0.75], [A, B])
    want = {}
    for w, lat in ((0.25, A), (0.75, B)):
        for v, p in as_dict(lat).items():
            want[v] = want.get(v, 0.0) + w * p
    check(m, want)


def test_deadline_miss_and_percentile():
    # P(miss deadline 6) for two stages in sequence, by enumeration: P(A + B > 6)
    total = series(A, B)
    want = sum(p for v, p in brute(sum, A, B).items() if v > 6)
    assert total.sf(6) == pytest.approx(want, abs=1e-15)
    # percentiles do not add: p90 of the sum vs sum of p90s
    assert total.quantile(0.9) < A.quantile(0.9) + B.quantile(0.9)


def test_truncated_inputs():
    # a delay with 10% mass beyond its lattice (a timeout we did not model)
    t = Lattice([0.5, 0.4], origin=1.0)
    m = first_of(t, B)
    # min is known on the whole of t's lattice: P(min > 2) = P(t > 2) P(B > 2) = .1 * .3
    assert m.sf(2) == pytest.approx(0.1 * 0.3, abs=1e-15)
    j = all_of(t, B)
    # the maximum's law is known except for t's missing 10%, which lies at or above t's grid
    # end: P(max <= x) = F_t(x) F_B(x) with F_t(x) = .9 from x = 2 on (product of cdfs)
    assert j.truncated_mass == pytest.approx(1 - 0.9 * 1.0, abs=1e-15)
    assert j.origin + j.step * j.errors.truncated_from == pytest.approx(3.0)
    assert j.cdf(2) == pytest.approx(0.9 * 0.7, abs=1e-15)


def test_errors():
    with pytest.raises(ValueError, match="step"):
        all_of(A, Lattice([1.0], step=0.5))
    with pytest.raises(ValueError, match="whole number"):
        first_of(A, Lattice([1.0], origin=0.5))
    with pytest.raises(TypeError, match="Lattice"):
        series(A, [0.5, 0.5])
    with pytest.raises(ValueError, match="sum to 1"):
        mixture([0.5, 0.6], [A, B])
    with pytest.raises(ValueError, match="one entry per delay"):
        mixture([1.0], [A, B])
    with pytest.raises(ValueError, match="at least one"):
        all_of()
