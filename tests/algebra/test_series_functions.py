"""exp/log/sqrt/rational powers of power series (polyconv.algebra.series_functions).

References: python-flint's fmpq_series (exact rational exp/log/sqrt, reduced mod p here),
fmpz_mod_poly.sqrt_trunc and nmod_poly products, sympy series (small cases, skipped without
sympy), closed forms (binomial series via fractions/math.comb) and OEIS sequences computed here by
their own independent recurrences.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

import polyconv
from polyconv.algebra import counting_products
from polyconv.algebra.series_functions import exp_series, log_series, power_series, sqrt_series

flint = pytest.importorskip("flint")


@pytest.fixture(autouse=True)
def _flint_series_cap():
    """fmpq_series keeps ctx.cap (default 10) terms; the checks need more."""
    old, flint.ctx.cap = flint.ctx.cap, 400
    yield
    flint.ctx.cap = old

P = 998244353
RNG = np.random.default_rng(17)


def rational_mod(values, p: int = P) -> list[int]:
    """fmpq coefficients reduced mod p (numerator times inverse denominator)."""
    out = []
    for q in values:
        q = Fraction(int(q.p), int(q.q)) if hasattr(q, "p") else Fraction(q)
        out.append(q.numerator * pow(q.denominator, -1, p) % p)
    return out


def nmod_mul(x, y, n: int, p: int = P) -> list[int]:
    """The first n coefficients of x*y by python-flint's nmod_poly."""
    c = [int(v) for v in (flint.nmod_poly(list(map(int, x)), p)
                          * flint.nmod_poly(list(map(int, y)), p)).coeffs()]
    return (c + [0] * n)[:n]


def test_public_names_are_exported():
    # the lazy table of polyconv/__init__.py (no outside source: the package's own contract)
    assert polyconv.exp_series is exp_series and polyconv.sqrt_series is sqrt_series
    assert polyconv.log_series is log_series and polyconv.power_series is power_series


# ----------------------------------------------------------------------------- against flint


@pytest.mark.parametrize("n", [1, 2, 7, 33, 80])
def test_exp_log_sqrt_mod_p_match_flint_rational_series(n):
    # python-flint fmpq_series.exp/log/sqrt (exact rationals), reduced mod p
    a = RNG.integers(-5, 6, n).tolist()
    a0, a1 = [0] + a[1:], [1] + a[1:]
    assert exp_series(a0, n, modulus=P).tolist() == rational_mod(
        flint.fmpq_series(a0, prec=n).exp().coeffs() + [0] * n)[:n]
    assert log_series(a1, n, modulus=P).tolist() == rational_mod(
        flint.fmpq_series(a1, prec=n).log().coeffs() + [0] * n)[:n]
    assert sqrt_series(a1, n, modulus=P).tolist() in (
        rational_mod(flint.fmpq_series(a1, prec=n).sqrt().coeffs() + [0] * n)[:n],
        [(-v) % P for v in rational_mod(flint.fmpq_series(a1, prec=n).sqrt().coeffs()
                                        + [0] * n)[:n]])


def test_float_exp_log_sqrt_match_flint_rational_series():
    # python-flint fmpq_series (exact), rounded to float64
    n = 60
    a = (RNG.integers(-3, 4, n) / 4).tolist()
    a0, a1 = [0.0] + a[1:], [1.0] + a[1:]
    exact = [Fraction(v).limit_denominator(4) for v in a0]
    ref = flint.fmpq_series([flint.fmpq(q.numerator, q.denominator) for q in exact], prec=n)
    for ours, series in ((exp_series(a0, n), ref.exp()), (log_series(a1, n), (ref + 1).log()),
                         (sqrt_series(a1, n), (ref + 1).sqrt())):
        want = np.array([float(int(q.p)) / float(int(q.q)) for q in series.coeffs()]
                        + [0.0] * n)[:n]
        assert np.allclose(ours, want, rtol=1e-10, atol=1e-10 * np.abs(want).max())


def test_sqrt_mod_p_matches_flint_sqrt_trunc_large():
    # python-flint fmpz_mod_poly.sqrt_trunc (FLINT's series square root, constant term 1)
    n = 5000
    a = RNG.integers(0, P, n)
    a[0] = 1
    ctx = flint.fmpz_mod_poly_ctx(P)
    want = [int(c) for c in ctx(a.tolist()).sqrt_trunc(n).coeffs()]
    ours = sqrt_series(a, n, modulus=P).tolist()
    assert ours == want or ours == [(-v) % P for v in want]


def test_large_mod_p_identities_checked_by_flint_products():
    # exp(log f) = f and sqrt(f)^2 = f, products by python-flint's nmod_poly
    n = 3000
    f = RNG.integers(0, P, n)
    f[0] = 1
    log_f = log_series(f, n, modulus=P)
    assert exp_series(log_f, n, modulus=P).tolist() == f.tolist()
    s = sqrt_series(f, n, modulus=P)
    assert nmod_mul(s, s, n) == f.tolist()
    # derivative identity exp(a)' = a' exp(a) (Knuth, TAOCP vol. 2, 4.7)
    a = RNG.integers(0, P, n)
    a[0] = 0
    e = exp_series(a, n, modulus=P)
    de = [(k * int(e[k])) % P for k in range(1, n)]
    da = [(k * int(a[k])) % P for k in range(1, n)]
    assert nmod_mul(da, e, n - 1) == de


# ----------------------------------------------------------------------------- classical identities


def test_exp_of_log_one_plus_x():
    # exp(log(1 + x)) = 1 + x (handbook identity), floats and mod p
    n = 200
    lg = log_series([1.0, 1.0], n)
    assert np.allclose(lg[1:], [(-1) ** (k + 1) / k for k in range(1, n)], rtol=1e-13)
    back = exp_series(lg, n)
    assert abs(back[0] - 1) < 1e-14 and abs(back[1] - 1) < 1e-13
    assert np.abs(back[2:]).max() < 1e-13
    assert exp_series(log_series([1, 1], n, modulus=P), n, modulus=P).tolist() == [1, 1] + [0] * (
        n - 2)


def bell_numbers(count: int) -> list[int]:
    """Bell numbers by the Bell (Aitken) triangle, OEIS A000110."""
    row, out = [1], [1]
    for _ in range(count - 1):
        new = [row[-1]]
        for v in row:
            new.append(new[-1] + v)
        row = new
        out.append(row[0])
    return out


def test_bell_numbers_from_exp_of_exp_minus_one():
    # exp(e^x - 1) = sum B_k x^k / k! (OEIS A000110); first values from memory
    assert bell_numbers(11) == [1, 1, 2, 5, 15, 52, 203, 877, 4140, 21147, 115975]
    n = 300
    fact = [1]
    for k in range(1, n):
        fact.append(fact[-1] * k % P)
    a = [0] + [pow(fact[k], -1, P) for k in range(1, n)]
    e = exp_series(a, n, modulus=P)
    assert [int(e[k]) * fact[k] % P for k in range(n)] == [b % P for b in bell_numbers(n)]
    floats = exp_series([0.0] + [1 / math.factorial(k) for k in range(1, 20)], 20)
    assert np.allclose(floats * [math.factorial(k) for k in range(20)], bell_numbers(20),
                       rtol=1e-12)


def partitions(count: int) -> list[int]:
    """Partition numbers by Euler's pentagonal number recurrence (OEIS A000041)."""
    p = [1] + [0] * (count - 1)
    for n in range(1, count):
        total, k = 0, 1
        while True:
            g1, g2 = k * (3 * k - 1) // 2, k * (3 * k + 1) // 2
            if g1 > n:
                break
            sign = 1 if k % 2 else -1
            total += sign * (p[n - g1] + (p[n - g2] if g2 <= n else 0))
            k += 1
        p[n] = total
    return p


def test_partition_function_from_exp_of_divisor_sums():
    # prod 1/(1-x^k) = exp(sum_k sigma(k) x^k / k) (OEIS A000041); p(100) = 190569292 from memory
    n = 2000
    sigma = np.zeros(n, dtype=np.int64)
    for d in range(1, n):
        sigma[d::d] += d
    a = [0] + [int(sigma[k]) * pow(k, -1, P) % P for k in range(1, n)]
    ref = partitions(n)
    assert ref[100] == 190569292
    assert exp_series(a, n, modulus=P).tolist() == [v % P for v in ref]
    # and log of the partition series gives sigma(k)/k back (floats, relative accuracy)
    lg = log_series(np.array(ref[:60], dtype=float), 60)
    assert np.allclose(lg[1:] * np.arange(1, 60), sigma[1:60], rtol=1e-9)


def test_sympy_series_small_cases():
    # sympy's series expansion (symbolic, exact) of exp(sin x), log(1 + x + x^2), sqrt(1 + x^3)
    sympy = pytest.importorskip("sympy")
    x = sympy.symbols("x")
    n = 8
    sin = [0.0 if k % 2 == 0 else (-1) ** (k // 2) / math.factorial(k) for k in range(n)]
    for ours, expr in ((exp_series(sin, n), sympy.exp(sympy.sin(x))),
                       (log_series([1.0, 1.0, 1.0], n), sympy.log(1 + x + x**2)),
                       (sqrt_series([1.0, 0, 0, 1.0], n), sympy.sqrt(1 + x**3))):
        poly = sympy.series(expr, x, 0, n).removeO()
        want = [float(poly.coeff(x, k)) for k in range(n)]
        assert np.allclose(ours, want, rtol=1e-13, atol=1e-15)


# ----------------------------------------------------------------------------- exact integers


def test_integer_sqrt_and_powers_closed_forms():
    # sqrt(1 - 4x) = 1 - 2 sum C_(k-1) x^k (Catalan numbers C_k = comb(2k, k)/(k+1));
    # (1 - 4x)^(-1/2) = sum comb(2k, k) x^k (central binomial coefficients; binomial series)
    n = 400
    catalan = [math.comb(2 * k, k) // (k + 1) for k in range(n)]
    got = sqrt_series([1, -4], n)
    assert got.dtype == object and got.tolist() == [1] + [-2 * catalan[k - 1] for k in range(1, n)]
    assert power_series([1, -4], Fraction(-1, 2), n).tolist() == [math.comb(2 * k, k)
                                                                   for k in range(n)]
    # (1 - 9x)^(1/3) by the binomial series in fractions: binom(1/3, k) (-9)^k
    want, c = [], Fraction(1)
    for k in range(30):
        want.append(c * (-9) ** k)
        c = c * (Fraction(1, 3) - k) / (k + 1)
    assert all(w.denominator == 1 for w in want)
    assert power_series([1, -9], Fraction(1, 3), 30).tolist() == [int(w) for w in want]
    # sqrt of a square with a leading shift and a square constant: (3x + 2x^2 - x^3)^2
    sq = np.convolve([0, 3, 2, -1], [0, 3, 2, -1])
    assert sqrt_series(sq, 6).tolist() == [0, 3, 2, -1, 0, 0]


def test_integer_results_that_are_not_integral_are_refused():
    with pytest.raises(ValueError, match="does not have integer coefficients"):
        exp_series([0, 1], 5)            # e^x = sum x^k / k!
    with pytest.raises(ValueError, match="does not have integer coefficients"):
        log_series([1, 1], 5)            # log(1 + x) = x - x^2/2 + ...
    with pytest.raises(ValueError, match="does not have integer coefficients"):
        sqrt_series([1, 1], 5)           # sqrt(1 + x) = 1 + x/2 - ...
    with pytest.raises(ValueError, match="perfect square"):
        sqrt_series([2, 1], 5)
    assert exp_series([0, 0], 4).tolist() == [1, 0, 0, 0]
    assert log_series([1], 3).tolist() == [0, 0, 0]


# ----------------------------------------------------------------------------- floats and powers


def test_float_powers_against_binomial_series():
    # (1 + x)^r = sum binom(r, k) x^k (binomial series), r = 0.3 and Fraction(-2, 3); complex
    n = 40
    for r in (0.3, Fraction(-2, 3)):
        want, c = [], 1.0
        for k in range(n):
            want.append(c)
            c = c * (float(r) - k) / (k + 1)
        assert np.allclose(power_series([1.0, 1.0], r, n), want, rtol=1e-12, atol=1e-15)
    z = power_series([-1.0 + 0j, 1.0], 0.5, 5)
    assert np.allclose(z[0], 1j) and np.allclose(z[1], -0.5j)   # principal sqrt(-1 + x)
    assert np.allclose(power_series([2.0, 1.0], 3, 4), [8, 12, 6, 1])


def test_rational_power_mod_p_cubed_gives_back():
    # (a^(1/3))^3 = a and a^(-2/3) a^(2/3) = 1 mod p, products by python-flint's nmod_poly
    n = 700
    a = RNG.integers(0, P, n)
    a[0] = 8
    c = power_series(a, Fraction(1, 3), n, modulus=P)
    assert int(c[0]) ** 3 % P == 8
    assert nmod_mul(nmod_mul(c, c, n), c, n) == a.tolist()
    inv = power_series(a, Fraction(-2, 3), n, modulus=P)
    assert nmod_mul(inv, power_series(a, Fraction(2, 3), n, modulus=P), n) == [1] + [0] * (n - 1)


# ----------------------------------------------------------------------------- errors and costs


def test_bad_constant_terms_and_lengths_are_named():
    with pytest.raises(ValueError, match=r"a\[0\] must be 0 modulo 7"):
        exp_series([1, 1], 3, modulus=7)
    with pytest.raises(ValueError, match=r"a\[0\] must be 1 modulo 7"):
        log_series([2, 1], 3, modulus=7)
    with pytest.raises(ValueError, match="smallest prime factor"):
        exp_series([0, 1], 8, modulus=7)             # divides by 7
    assert exp_series([0, 1], 7, modulus=7).tolist() == [1, 1, 4, 6, 5, 1, 6]  # 1/k! mod 7
    with pytest.raises(ValueError, match="prime factor 3"):
        log_series([1, 1], 4, modulus=15)
    with pytest.raises(ValueError, match="odd"):
        sqrt_series([0, 1, 1], 4)
    with pytest.raises(ValueError, match="no square root modulo"):
        sqrt_series([3, 1], 4, modulus=P)            # 3 is a non-residue mod p (primitive root)
    with pytest.raises(ValueError, match="negative"):
        log_series([-1.0, 1.0], 4)
    with pytest.raises(TypeError, match="exponent"):
        power_series([1, 1], 0.5, 4, modulus=P)
    with pytest.raises(TypeError, match="modulus"):
        exp_series([0.0, 1.0], 4, modulus=P)
    with pytest.raises(ValueError, match="length must be >= 1"):
        sqrt_series([1, 1], 0)


def work_units(log: list, n: int) -> float:
    """Transform points of the logged products over those of one n x n product (as
    bench/algebra_bench.py counts them)."""
    points = 0
    for n1, n2, mode, length in log:
        full = n1 + n2 - 1
        points += max(n1, n2) if mode == "valid" else (full if length is None
                                                       else min(full, 2 * length))
    return points / (2 * n)


@pytest.mark.parametrize(("fn", "first", "claim"), [(exp_series, 0, 4.0), (log_series, 1, 2.5),
                                                    (sqrt_series, 1, 3.0)])
def test_cost_in_products_matches_the_docstring(fn, first, claim):
    # the docstrings' costs in U(n) (counted by polyconv.algebra.counting_products), within 15%
    n = 2**12
    a = RNG.integers(0, P, n)
    a[0] = first
    with counting_products() as log:
        fn(a, n, modulus=P)
    assert work_units(log, n) <= 1.15 * claim


# ----------------------------------------------------------------------------- composition


@pytest.mark.parametrize("n", [1, 2, 9, 50, 130])
def test_compose_matches_flint_composition(n):
    # python-flint nmod_poly / fmpz_poly composition f(g), truncated to n terms
    from polyconv.algebra.series_compose import compose_series
    assert polyconv.compose_series is compose_series
    for lf in (1, n // 2 + 1, n, 2 * n):
        f = RNG.integers(0, P, lf)
        g = RNG.integers(0, P, n)
        g[0] = 0
        ref = [int(c) for c in flint.nmod_poly(f.tolist(), P)(flint.nmod_poly(g.tolist(), P))
               .coeffs()] + [0] * n
        assert compose_series(f, g, n, modulus=P).tolist() == ref[:n]
        fi, gi = RNG.integers(-3, 4, lf), RNG.integers(-3, 4, n)
        gi[0] = 0
        ref = [int(c) for c in flint.fmpz_poly(fi.tolist())(flint.fmpz_poly(gi.tolist()))
               .coeffs()] + [0] * n
        assert compose_series(fi, gi, n).tolist() == ref[:n]


def test_compose_identities_floats_and_errors():
    # exp(log(1 + x) composed) : f = exp series, g = log(1 + x) gives 1 + x (handbook identity);
    # composition with g = x is the identity
    from polyconv.algebra.series_compose import compose_series
    n = 60
    exp_coeffs = [1 / math.factorial(k) for k in range(n)]
    g = log_series([1.0, 1.0], n)
    got = compose_series(exp_coeffs, g, n)
    assert np.allclose(got, [1.0, 1.0] + [0.0] * (n - 2), atol=1e-12)
    f = RNG.normal(size=n)
    assert np.allclose(compose_series(f, [0.0, 1.0], n), f, rtol=0, atol=0)
    with pytest.raises(ValueError, match=r"g\[0\] must be 0 modulo 7"):
        compose_series([1, 1], [1, 1], 3, modulus=7)
