"""Polynomial algebra: power, product, inverse_series, poly_divmod.

Every check names its reference beside it: "python-flint reference" (flint.fmpz_poly ``**``,
``pow_trunc``, ``mul_low``, ``divmod``; flint.fmpz_series / fmpq_series ``1/s``;
flint.nmod_poly and flint.fmpz_mod_poly ``inverse_series_trunc``, ``divmod``), "numpy reference"
(numpy.polynomial.polynomial polypow / polymul / polydiv, for floats), "math.comb", an OEIS entry,
a worked counting example, or "identity" (the defining property, checked exactly).
"""

from __future__ import annotations

import math
import random
from functools import reduce

import flint
import numpy as np
import numpy.polynomial.polynomial as npoly
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from polyconv.algebra import (
    ZeroDivisorError,
    counting_products,
    inverse_series,
    poly_divmod,
    power,
    product,
    series,
)

RNG = np.random.default_rng(20240611)
P = 998244353                 # NTT prime 119 * 2^23 + 1
P_BIG = 2**127 - 1            # Mersenne prime above 2^64 (fmpz_mod_poly reference)


# ----------------------------------------------------------------------------- reference helpers


def ints(x) -> list[int]:
    return [int(v) for v in x]


def padded(coeffs, n: int) -> list[int]:
    out = ints(coeffs)[:n]
    return out + [0] * (n - len(out))


def fz(x) -> flint.fmpz_poly:
    return flint.fmpz_poly(ints(x))


def nm(x, m: int):
    """python-flint polynomial mod m: nmod_poly below 2^64, fmpz_mod_poly above."""
    if m < 2**64:
        return flint.nmod_poly([int(v) % m for v in x], m)
    return flint.fmpz_mod_poly_ctx(m)([int(v) % m for v in x])


def series_inverse(cls, coeffs, length: int) -> list:
    """python-flint reference: coefficients of 1/s for an fmpz_series or fmpq_series s."""
    cap = flint.ctx.cap
    flint.ctx.cap = max(cap, length)          # series precision is capped by ctx.cap
    try:
        return list((1 / cls(coeffs, prec=length)).coeffs())
    finally:
        flint.ctx.cap = cap


def rand_ints(n: int, bits: int = 16, first=None) -> np.ndarray:
    x = RNG.integers(-(2 ** (bits - 1)), 2 ** (bits - 1), n, dtype=np.int64)
    if first is not None:
        x[0] = first
    return x


def assert_exact(got: np.ndarray, expected: list[int]) -> None:
    assert got.dtype in (np.int64, object)
    assert ints(got) == expected


# ----------------------------------------------------------------------------- power


@pytest.mark.parametrize("n,k", [(1, 5), (2, 0), (3, 1), (7, 2), (10, 3), (31, 7), (50, 12)])
def test_power_exact_matches_flint(n, k):
    a = rand_ints(n, 12)
    got = power(a, k)
    assert len(got) == k * (n - 1) + 1
    assert_exact(got, padded((fz(a) ** k).coeffs(), k * (n - 1) + 1))  # python-flint reference


def test_power_goes_beyond_int64():
    a = rand_ints(20, 30)
    got = power(a, 9)
    assert got.dtype == object
    assert_exact(got, padded((fz(a) ** 9).coeffs(), 9 * 19 + 1))      # python-flint reference


def test_power_large_two_point_and_truncated():
    """Products of the chain large enough for the two-point Kronecker scheme on byte rows."""
    a = rand_ints(2000, 16)
    expected = (fz(a) ** 8).coeffs()                                      # python-flint reference
    assert_exact(power(a, 8), padded(expected, 8 * 1999 + 1))
    assert_exact(power(a, 8, length=9000), padded(expected, 9000))


@pytest.mark.parametrize("k,length", [(5, 1), (5, 40), (13, 100), (100, 64), (3, 500)])
def test_power_truncated_matches_pow_trunc(k, length):
    a = rand_ints(60, 10)
    got = power(a, k, length=length)
    assert len(got) == length                                          # zero padded if short
    assert_exact(got, padded(fz(a).pow_trunc(k, length).coeffs(), length))  # python-flint ref.


@pytest.mark.parametrize("m", [2, 7, P, 2**61 - 1, 2**63, 2**64 + 13, P_BIG])
def test_power_modular_matches_flint(m):
    a = rand_ints(40, 40 if m > 2**40 else 16)
    got = power(a, 11, modulus=m)
    assert ints(got) == padded((nm(a, m) ** 11).coeffs(), 11 * 39 + 1)  # python-flint reference
    assert got.dtype == (np.int64 if m <= 2**63 else object)
    got = power(a, 1000, modulus=m, length=300)
    assert ints(got) == padded(nm(a, m).pow_trunc(1000, 300).coeffs(), 300)  # python-flint ref.


def test_power_float_matches_numpy():
    a = RNG.standard_normal(30)
    got = power(a, 6)
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, npoly.polypow(a, 6), rtol=1e-10,
                               atol=1e-12 * np.abs(npoly.polypow(np.abs(a), 6)).max())  # numpy
    got = power(a.astype(complex) * 1j, 3, length=20)
    np.testing.assert_allclose(got, (-1j * npoly.polypow(a, 3))[:20], atol=1e-10)     # numpy


def test_power_zero_exponent_and_padding():
    assert power([5, 7], 0).tolist() == [1]
    assert power([5, 7], 0, length=3).tolist() == [1, 0, 0]
    assert power([2.0, 1.0], 0).dtype == np.float64
    assert power([3, 1], 2, length=6).tolist() == [9, 6, 1, 0, 0, 0]


def test_power_and_product_with_zero_ends():
    # low- and high-degree zeros are factored out and put back: shapes follow numpy.convolve
    a = [0, 0, 3, -1, 0, 0]
    got = power(a, 5)
    assert len(got) == 26
    assert_exact(got, padded((fz(a) ** 5).coeffs(), 26))                  # python-flint reference
    assert_exact(power(a, 5, length=12), padded((fz(a) ** 5).coeffs(), 12))
    assert power(a, 6, length=12).tolist() == [0] * 12                    # x^12 divides a^6
    assert power([0, 0], 3).tolist() == [0] * 4
    assert power(np.array([0.0, 2.0, 0.0]), 2).tolist() == [0.0, 0.0, 4.0, 0.0, 0.0]
    seqs = [[0, 1, 2], [5, 0], [0, 0, 7, 1, 0]]
    expected = reduce(lambda p, q: p * q, (fz(s) for s in seqs))          # python-flint reference
    assert_exact(product(seqs), padded(expected.coeffs(), 8))
    assert_exact(product(seqs, length=4), padded(expected.coeffs(), 4))
    assert product(seqs + [[0, 0]]).tolist() == [0] * 9
    assert product([[0, 0, 1], [0, 1]], length=2).tolist() == [0, 0]


def test_binomial_coefficients_from_power():
    # math.comb reference: (1 + x)^n has coefficients C(n, i); n = 100 exceeds int64
    for n in (10, 62, 100):
        got = power([1, 1], n)
        assert ints(got) == [math.comb(n, i) for i in range(n + 1)]


def test_three_dice():
    # worked example: sums of three fair dice, generating function (x + ... + x^6)^3;
    # 27 ways each to roll 10 and 11, 6^3 = 216 outcomes in all
    counts = power([0, 1, 1, 1, 1, 1, 1], 3)
    assert counts[10] == 27 and counts[11] == 27
    assert counts.sum() == 216 and counts[3] == 1 and counts[18] == 1


@pytest.mark.parametrize("k,exc,word", [(-1, ValueError, "k"), (2.0, TypeError, "k"),
                                        (True, TypeError, "k"), ("3", TypeError, "k")])
def test_power_bad_exponent(k, exc, word):
    with pytest.raises(exc, match=word):
        power([1, 2], k)


def test_power_bad_arguments():
    with pytest.raises(ValueError, match="length"):
        power([1, 2], 2, length=0)
    with pytest.raises(TypeError, match="length"):
        power([1, 2], 2, length=2.5)
    with pytest.raises(TypeError, match="modulus"):
        power([1.0, 2.0], 2, modulus=7)
    with pytest.raises(ValueError, match="modulus"):
        power([1, 2], 2, modulus=1)
    with pytest.raises(ValueError, match="1-D"):
        power([[1, 2], [3, 4]], 2)
    with pytest.raises(ValueError, match="a is empty: expected at least one coefficient"):
        power([], 2)
    with pytest.raises(TypeError, match="a must hold numbers"):
        power(np.array(["x", "y"]), 2)


# ----------------------------------------------------------------------------- product


def test_product_exact_matches_flint():
    seqs = [rand_ints(int(n), 16) for n in RNG.integers(1, 40, 17)]
    got = product(seqs)
    expected = reduce(lambda p, q: p * q, (fz(s) for s in seqs))            # python-flint ref.
    total = sum(len(s) - 1 for s in seqs) + 1
    assert len(got) == total and got.dtype == object
    assert_exact(got, padded(expected.coeffs(), total))


def test_product_wide_factors_matches_flint():
    """Factors beyond int64 (Python ints of 70-200 bits) and a truncated product."""
    rng = random.Random(3)
    seqs = [[rng.randint(-2**b, 2**b) for _ in range(n)]
            for n, b in [(300, 70), (5, 200), (290, 1), (1, 90), (400, 64)]]
    expected = reduce(lambda p, q: p * q, (fz(s) for s in seqs))           # python-flint ref.
    total = sum(len(s) - 1 for s in seqs) + 1
    assert_exact(product(seqs), padded(expected.coeffs(), total))
    assert_exact(product(seqs, length=700), padded(expected.coeffs(), 700))


def test_product_truncated_and_modular():
    seqs = [rand_ints(int(n), 16) for n in RNG.integers(1, 60, 12)]
    expected = reduce(lambda p, q: p.mul_low(q, 50), (fz(s) for s in seqs))  # python-flint mul_low
    assert_exact(product(seqs, length=50), padded(expected.coeffs(), 50))
    expected = reduce(lambda p, q: p * q, (nm(s, P) for s in seqs))          # python-flint nmod
    got = product(seqs, modulus=P)
    assert got.dtype == np.int64
    assert ints(got) == padded(expected.coeffs(), sum(len(s) - 1 for s in seqs) + 1)
    expected = reduce(lambda p, q: p * q, (nm(s, P_BIG) for s in seqs))      # fmpz_mod_poly
    assert ints(product(seqs, modulus=P_BIG, length=100)) == padded(expected.coeffs(), 100)


def test_product_floats_and_mixed():
    seqs = [RNG.standard_normal(5), [1, 2, 3], np.array([0.5, -1.0], dtype=np.float32)]
    got = product(seqs)
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, reduce(npoly.polymul, [np.asarray(s, float) for s in seqs]),
                               rtol=1e-12, atol=1e-12)                       # numpy reference


def test_product_edge_cases():
    assert product([]).tolist() == [1]
    assert product([], length=3).tolist() == [1, 0, 0]
    assert product([[4, 5]]).tolist() == [4, 5]
    assert product(iter([[1, 1]] * 5)).tolist() == [1, 5, 10, 10, 5, 1]     # math.comb(5, i)
    assert product([[1, 1], [1, 1]], length=5).tolist() == [1, 2, 1, 0, 0]
    assert product(np.array([[1, 1], [1, -1]])).tolist() == [1, 0, -1]      # rows of a 2-D array


def test_product_pairs_shortest_first():
    seqs = [np.ones(n, dtype=np.int64) for n in (100, 2, 3, 50, 2)]
    with counting_products() as log:
        product(seqs)
    assert [sorted(r[:2]) for r in log[:2]] == [[2, 2], [3, 3]]  # heap order: 2*2 -> 3, 3*3 -> 5
    assert len(log) == len(seqs) - 1


def test_product_bad_arguments():
    with pytest.raises(TypeError, match="seqs"):
        product(5)
    with pytest.raises(TypeError, match="seqs"):
        product("abc")
    with pytest.raises(ValueError, match=r"seqs\[0\].*product\(\[a\]\)"):
        product([1, 2, 3])
    with pytest.raises(ValueError, match=r"seqs\[1\]"):
        product([[1, 2], []])
    with pytest.raises(TypeError, match="modulus"):
        product([[1, 2], [0.5]], modulus=5)
    with pytest.raises(ValueError, match="length"):
        product([[1, 2]], length=-2)


def test_partition_numbers():
    # OEIS A000041: p(n) from 1 / prod_{k>=1} (1 - x^k); p(100) = 190569292
    n = 101
    euler = product([[1] + [0] * (k - 1) + [-1] for k in range(1, n)], length=n)
    p = inverse_series(euler, n)
    assert ints(p[:11]) == [1, 1, 2, 3, 5, 7, 11, 15, 22, 30, 42]
    assert int(p[100]) == 190569292


def test_coin_change():
    # worked example: ways to make 100 (cents) from coins {1, 5, 10, 25, 50} is 292:
    # coefficient of x^100 in prod_c 1 / (1 - x^c)
    coins = (1, 5, 10, 25, 50)
    denominator = product([[1] + [0] * (c - 1) + [-1] for c in coins])
    assert int(inverse_series(denominator, 101)[100]) == 292
    # the same through a product of the separate series 1/(1 - x^c), truncated
    series = [[1 if i % c == 0 else 0 for i in range(101)] for c in coins]
    assert int(product(series, length=101)[100]) == 292


# ----------------------------------------------------------------------------- inverse series


@pytest.mark.parametrize("n,length,first", [(1, 1, 1), (1, 9, -1), (5, 1, 1), (40, 33, 1),
                                            (300, 257, -1), (20, 150, 1)])
def test_inverse_series_exact_matches_flint(n, length, first):
    a = rand_ints(n, 8, first=first)
    got = inverse_series(a, length)
    expected = series_inverse(flint.fmpz_series, ints(a), length)  # python-flint fmpz_series
    assert_exact(got, padded(expected, length))


@pytest.mark.parametrize("m", [P, 2**61 - 1, P_BIG])
def test_inverse_series_modular_matches_flint(m):
    a = rand_ints(700, 40)
    a[0] = 3
    got = inverse_series(a, 1000, modulus=m)
    expected = nm(a, m).inverse_series_trunc(1000)               # python-flint reference
    assert ints(got) == padded(expected.coeffs(), 1000)


def test_inverse_series_composite_modulus():
    # identity: a * (1/a) = 1 mod (x^L, m), for a unit a[0] mod a composite m
    m, length = 2**64, 300
    a = rand_ints(200, 60, first=12345)
    b = inverse_series(a, length, modulus=m)
    check = (fz(a) * fz(b)).coeffs()                              # python-flint product
    assert [int(c) % m for c in padded(check, length)] == [1] + [0] * (length - 1)


def test_inverse_series_float_matches_rationals():
    a = np.array([2.0, 1.0, -3.0, 0.5, 4.0])
    got = inverse_series(a, 60)
    exact = series_inverse(flint.fmpq_series, [flint.fmpq(int(v * 2), 2) for v in a], 60)
    ref = np.array([float(c.p) / float(c.q) for c in exact])     # python-flint fmpq_series
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-300)
    z = inverse_series(np.array([1j, 1.0]), 5)
    np.testing.assert_allclose(z, [-1j, 1, 1j, -1, -1j])                  # 1/(i + x), geometric


def test_inverse_series_geometric_big_ints():
    # identity: 1 / (1 - 3x) = sum 3^i x^i, beyond int64 from i = 40
    got = inverse_series([1, -3], 100)
    assert got.dtype == object and ints(got) == [3**i for i in range(100)]
    assert inverse_series([1, -3], 30).dtype == np.int64


def test_inverse_series_not_invertible():
    with pytest.raises(ValueError, match=r"a\[0\] = 2 is not \+1 or -1"):
        inverse_series([2, 1], 5)
    with pytest.raises(ValueError, match="not invertible modulo 12"):
        inverse_series([4, 1], 5, modulus=12)
    with pytest.raises(ValueError, match="a\\[0\\] is zero"):
        inverse_series([0.0, 1.0], 5)
    with pytest.raises(TypeError, match="length"):
        inverse_series([1, 1], None)
    with pytest.raises(ValueError, match="length"):
        inverse_series([1, 1], 0)


def test_inverse_series_cost_is_two_products_per_doubling():
    # cost claim: a schoolbook base case of series._BASE_TERMS terms, then one Newton step per
    # doubling, each one middle product and one truncated product
    length = 1000
    with counting_products() as log:
        inverse_series(RNG.standard_normal(length), length)
    assert len(log) == 2 * (math.ceil(math.log2(length)) - int(math.log2(series._BASE_TERMS)))
    assert {r[2] for r in log} == {"valid", "full"}
    # transform work, in units of one length x length full product: sum of (needed points)
    work = sum(max(r[0], r[1]) if r[2] == "valid" else min(r[0] + r[1] - 1, 2 * r[3])
               for r in log) / (2 * length)
    assert work <= 2.5


# ----------------------------------------------------------------------------- division


def flint_divmod(a, b) -> tuple[list[int], list[int]]:
    q, r = divmod(fz(a), fz(b))                                   # python-flint reference
    return ints(q.coeffs()), ints(r.coeffs())


@pytest.mark.parametrize("na,nb", [(10, 3), (40, 40), (40, 8), (200, 50), (300, 2), (150, 149),
                                   (5, 9)])
def test_divmod_exact_matches_flint(na, nb):
    a = rand_ints(na, 16)
    b = rand_ints(nb, 16)
    b[-1] = -1 if na % 2 else 1
    q, r = poly_divmod(a, b)
    eq, er = flint_divmod(a, b)                                   # python-flint reference
    assert len(q) == max(na - nb + 1, 1) and len(r) == max(nb - 1, 1)
    assert ints(q) == padded(eq, len(q)) and ints(r) == padded(er, len(r))


def test_divmod_exact_recovers_construction():
    # identity: a = q b + r with b monic; the quotient is small but 1/rev(b) grows like 2.6^i
    b = np.array([1, 3, 1], dtype=np.int64)                       # x^2 + 3x + 1
    q0 = rand_ints(400, 16)
    r0 = rand_ints(2, 16)
    a = np.array(padded((fz(q0) * fz(b)).coeffs(), 402), dtype=object) + np.r_[r0, [0] * 400]
    q, r = poly_divmod(a, b)
    assert ints(q) == ints(q0) and ints(r) == ints(r0)
    assert q.dtype == np.int64


def test_divmod_exact_huge_quotient():
    # a quotient far beyond the first guess of bits: 2^B doubles until the check passes
    a = [0] * 199 + [1]                                           # x^199
    b = [-1000, 1]                                                # x - 1000
    q, r = poly_divmod(a, b)
    eq, er = flint_divmod(a, b)                                   # python-flint reference
    assert ints(q) == eq and ints(r) == padded(er, 1) and int(r[0]) == 1000**199


@pytest.mark.parametrize("m", [P, 2**61 - 1, P_BIG])
@pytest.mark.parametrize("na,nb", [(30, 5), (900, 300), (600, 2), (300, 300)])
def test_divmod_modular_matches_flint(m, na, nb):
    a = rand_ints(na, 40)
    b = rand_ints(nb, 40)
    b[-1] = 12345                                                 # a unit mod these primes
    q, r = poly_divmod(a, b, modulus=m)
    eq, er = divmod(nm(a, m), nm(b, m))                           # python-flint reference
    assert ints(q) == padded(eq.coeffs(), na - nb + 1)
    assert ints(r) == padded(er.coeffs(), max(nb - 1, 1))


@pytest.mark.parametrize("na,nb", [(20, 4), (300, 100), (100, 100), (3, 5)])
def test_divmod_float_matches_numpy(na, nb):
    a = RNG.standard_normal(na)
    b = RNG.standard_normal(nb) * 0.2
    b[-1] = 1.5                   # dominant leading coefficient: a well-conditioned division
    q, r = poly_divmod(a, b)
    eq, er = npoly.polydiv(a, b)                                  # numpy reference
    np.testing.assert_allclose(q, padded_float(eq, len(q)), atol=1e-9)
    np.testing.assert_allclose(r, padded_float(er, len(r)), atol=1e-9)


def padded_float(x, n):
    out = np.zeros(n)
    out[: min(n, len(x))] = x[:n]
    return out


def test_divmod_shapes_and_stripping():
    q, r = poly_divmod([1, 2, 3], [2, 1, 0, 0])                   # b = x + 2 once stripped
    assert ints(q) == [-4, 3] and ints(r) == [9]                  # 3x^2+2x+1 = (3x-4)(x+2) + 9
    q, r = poly_divmod([4.0, 6.0], [2.0])                         # constant divisor
    assert q.tolist() == [2.0, 3.0] and r.tolist() == [0.0]
    q, r = poly_divmod([4, 6], [-1])
    assert ints(q) == [-4, -6] and ints(r) == [0]
    q, r = poly_divmod([1, 2], [0, 0, 1])                         # deg a < deg b
    assert ints(q) == [0] and ints(r) == [1, 2]
    q, r = poly_divmod([5, 1, 1], [-1], modulus=7)
    assert ints(q) == [2, 6, 6] and ints(r) == [0]
    q, r = poly_divmod([1.0, 2.0, 3.0], [0.0, 2.0])
    np.testing.assert_allclose(q, [1.0, 1.5])
    np.testing.assert_allclose(r, [1.0])


def test_divmod_errors():
    with pytest.raises(ZeroDivisorError, match="zero polynomial"):
        poly_divmod([1, 2], [0, 0])
    with pytest.raises(ZeroDivisionError):
        poly_divmod([1.0, 2.0], [0.0])
    with pytest.raises(ValueError, match="modulo 7"):
        poly_divmod([1, 2], [7, 14], modulus=7)
    with pytest.raises(ValueError, match=r"leading coefficient of b = 2 is not \+1 or -1"):
        poly_divmod([1, 2, 3], [1, 2])
    with pytest.raises(ValueError, match="not invertible modulo 12"):
        poly_divmod([1, 2, 3], [1, 4], modulus=12)
    with pytest.raises(ValueError, match="b is empty: expected at least one coefficient"):
        poly_divmod([1, 2, 3], [])
    with pytest.raises(ValueError, match="1-D"):
        poly_divmod([1, 2, 3], [[1, 2]])
    with pytest.raises(TypeError, match="modulus"):
        poly_divmod([1, 2, 3], [1.0, 2.0], modulus=5)


def test_divmod_cost_claim():
    # cost claim: about 4 products of the quotient's length (inverse ~2, quotient 1, remainder 1)
    n = 2048
    a = RNG.standard_normal(2 * n)
    b = RNG.standard_normal(n)
    b[-1] = 3.0
    with counting_products() as log:
        poly_divmod(a, b)
    newton_steps = math.ceil(math.log2(n + 1)) - int(math.log2(series._BASE_TERMS))
    assert len(log) == 2 * newton_steps + 2


# ----------------------------------------------------------------------------- properties

small_ints = st.integers(min_value=-(2**20), max_value=2**20)


@settings(max_examples=40, deadline=None)
@given(st.lists(small_ints, min_size=1, max_size=60), st.sampled_from([1, -1]),
       st.integers(1, 120))
def test_property_inverse_times_a_is_one(coeffs, first, length):
    # identity: a * inverse_series(a) = 1 mod x^L, exactly
    a = [first] + coeffs
    b = inverse_series(a, length)
    assert len(b) == length
    assert padded(fz(a).mul_low(fz(b), length).coeffs(), length) == [1] + [0] * (length - 1)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(0, P - 1), min_size=1, max_size=80), st.integers(1, P - 1),
       st.integers(1, 200))
def test_property_inverse_mod_prime(coeffs, first, length):
    a = [first] + coeffs
    b = inverse_series(a, length, modulus=P)
    assert ints(b) == padded(nm(a, P).inverse_series_trunc(length).coeffs(), length)  # flint


@settings(max_examples=40, deadline=None)
@given(st.lists(small_ints, min_size=1, max_size=120), st.lists(small_ints, max_size=60),
       st.sampled_from([1, -1]))
def test_property_divmod_reconstructs(a, b_low, lead):
    # identity: q b + r = a exactly, deg r < deg b
    b = b_low + [lead]
    q, r = poly_divmod(a, b)
    rebuilt = fz(q) * fz(b) + fz(r)
    assert padded(rebuilt.coeffs(), len(a)) == padded(a, len(a))
    assert len(r) == max(len(b) - 1, 1)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.integers(-50, 50), min_size=1, max_size=12), st.integers(0, 6),
       st.integers(0, 6), st.one_of(st.none(), st.integers(1, 40)))
def test_property_power_adds_exponents(a, j, k, length):
    # identity: a^(j+k) = a^j a^k, exactly (truncated alike when length is given)
    left = power(a, j + k, length=length)
    right = product([power(a, j), power(a, k)], length=length)
    assert ints(left) == ints(right)
