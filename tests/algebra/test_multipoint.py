"""Multipoint evaluation and interpolation (polyconv.algebra.multipoint).

References: Horner's rule in exact arithmetic (Python ints mod p, Python ints, fractions),
python-flint's nmod_poly evaluation and fmpz_mod_poly.multipoint_evaluate, mpmath at 60 digits
for float values (the bound must contain the exact error).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from polyconv.algebra.multipoint import evaluate_points, interpolate

P = 998244353
RNG = np.random.default_rng(23)


def horner_mod(f, x, p):
    acc = 0
    for c in reversed(f):
        acc = (acc * x + int(c)) % p
    return acc


@pytest.mark.parametrize("n", [1, 5, 64, 65, 130, 400])
def test_modular_evaluation_matches_exact_horner(n):
    # Horner's rule on Python ints mod p (exact); several f lengths around the tree's sizes
    for lf in (1, n, 3 * n + 1):
        f = RNG.integers(0, P, lf)
        x = RNG.integers(0, P, n)
        assert evaluate_points(f, x, modulus=P).tolist() == [horner_mod(f.tolist(), int(v), P)
                                                              for v in x.tolist()]


def test_modular_evaluation_matches_flint_multipoint():
    # python-flint fmpz_mod_poly.multipoint_evaluate (FLINT's subproduct tree)
    flint = pytest.importorskip("flint")
    n = 3000
    f, x = RNG.integers(0, P, n), RNG.integers(0, P, n)
    want = [int(v) for v in flint.fmpz_mod_poly_ctx(P)(f.tolist()).multipoint_evaluate(
        [int(v) for v in x])]
    assert evaluate_points(f, x, modulus=P).tolist() == want


def test_small_and_composite_moduli_and_integers():
    # exact Horner with Python ints (no modulus) and mod a composite and a > 2^63 modulus
    f, x = RNG.integers(-9, 10, 150), RNG.integers(-60, 60, 140)
    assert evaluate_points(f, x).tolist() == [sum(int(c) * int(v) ** k for k, c in enumerate(f))
                                              for v in x.tolist()]
    for m in (7 * 11 * 13, 2**64 + 13):
        got = evaluate_points(f, x, modulus=m).tolist()
        assert got == [horner_mod(f.tolist(), int(v) % m, m) for v in x.tolist()]


@pytest.mark.parametrize("n", [1, 2, 63, 64, 200, 700])
def test_interpolation_mod_p_reproduces_values(n):
    # evaluation by exact Horner mod p of the interpolant gives the values back; the degree < n
    # interpolant is unique, so a random polynomial of degree < n comes back itself
    xs = RNG.choice(2**20, n, replace=False)
    coeffs = RNG.integers(0, P, n)
    ys = [horner_mod(coeffs.tolist(), int(v), P) for v in xs.tolist()]
    assert interpolate(xs, ys, modulus=P).tolist() == coeffs.tolist()


def test_interpolation_floats_small_exact_cases():
    # the parabola through (0, 1), (1, 6), (2, 17) is 1 + 2x + 3x^2 (hand computation)
    assert np.allclose(interpolate([0.0, 1.0, 2.0], [1.0, 6.0, 17.0]), [1, 2, 3])
    # roots of unity in bit-reversed order (every subtree is x^k - c, well conditioned): the
    # interpolant of c's values is c (uniqueness of the degree < n interpolant)
    n = 256
    rev = [int(format(i, "08b")[::-1], 2) for i in range(n)]
    w = np.exp(2j * np.pi * np.array(rev) / n)
    c = RNG.normal(size=n) + 1j * RNG.normal(size=n)
    ys = [sum(complex(ck) * complex(v) ** k for k, ck in enumerate(c)) for v in w]
    assert np.allclose(interpolate(w, ys), c, atol=1e-11)


def exact_values(f, x):
    """f(x) at 60 digits (mpmath) for float coefficients and points."""
    mpmath = pytest.importorskip("mpmath")
    mpmath.mp.dps = 60
    out = []
    for v in x:
        acc = mpmath.mpc(0)
        z = mpmath.mpc(complex(v))
        for c in reversed(f):
            acc = acc * z + mpmath.mpf(float(c))
        out.append(acc)
    return out


def test_float_bounds_contain_the_exact_error():
    # the a-posteriori bound must contain |computed - exact| (exact: mpmath at 60 digits)
    mpmath = pytest.importorskip("mpmath")
    for n, points in ((200, np.exp(2j * np.pi * RNG.random(200))),
                      (200, RNG.uniform(-1, 1, 200)), (40, RNG.uniform(-3, 3, 40))):
        f = RNG.normal(size=n)
        exact = exact_values(f, points)
        for method in ("tree", "auto", "horner"):
            values, bounds = evaluate_points(f, points, error_bound=True, method=method)
            errs = [float(mpmath.fabs(mpmath.mpc(complex(v)) - e))
                    for v, e in zip(values, exact, strict=True)]
            assert np.all(np.asarray(errs) <= bounds)
            if method == "horner":
                assert np.all(bounds < 1e-9 * (1 + np.abs(values)) * n)


def test_float_auto_falls_back_when_the_tree_is_unstable():
    # real points in [-1, 1] at n = 1500: the tree's bound is huge (Köhler & Ziegler 2008);
    # "auto" must then give Horner's accuracy
    n = 1500
    f, x = RNG.normal(size=n), RNG.uniform(-1, 1, n)
    _, tree_bounds = evaluate_points(f, x, error_bound=True, method="tree")
    values, bounds = evaluate_points(f, x, error_bound=True)
    assert not np.all(tree_bounds < 1e-6)
    assert np.all(bounds < 1e-9)
    exact = exact_values(f, x[:20])
    assert np.allclose(values[:20], [complex(e).real for e in exact], atol=1e-10)


def test_errors_name_the_arguments():
    with pytest.raises(ValueError, match="distinct"):
        interpolate([1, 2, 1], [0, 0, 0], modulus=P)
    with pytest.raises(ValueError, match="same length"):
        interpolate([1, 2], [0], modulus=P)
    with pytest.raises(ValueError, match="error_bound=True is for float"):
        evaluate_points([1, 2], [3], modulus=P, error_bound=True)
    with pytest.raises(ValueError, match="method"):
        evaluate_points([1.0], [2.0], method="fast")
    with pytest.raises(TypeError, match="modulus"):
        evaluate_points([1.0], [2.0], modulus=P)
    # fractions: the rational interpolant of integer data, through floats
    got = interpolate([0, 1, 2], [0, 1, 0])
    assert np.allclose(got, [float(Fraction(0)), 2.0, -1.0])
