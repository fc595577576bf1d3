"""Exact integer and modular convolution through the public API, against python-flint.

Reference: python-flint's ``fmpz_poly`` (exact integer polynomial product) and ``nmod_poly``
(product modulo a word-size modulus); ``math.comb`` for binomial coefficients.  Every check compares
every coefficient for equality.
"""

from __future__ import annotations

import math

import flint
import gmpy2
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import polyconv
from polyconv.engines.fft import convolve_fft

P62 = 2**62 - 57  # the largest prime below 2^62 (from memory; checked below with sympy-free test)
BIG_MODULUS = 10**99 + 289  # a 100-digit modulus (any integer works; primality is not needed)


def _flint_product(a, b) -> list[int]:
    """Reference: python-flint fmpz_poly product, padded to the full length n1 + n2 - 1."""
    c = (flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])).coeffs()
    out = [int(v) for v in c]
    return out + [0] * (len(a) + len(b) - 1 - len(out))


def _as_ints(c) -> list[int]:
    return [int(v) for v in c]


def _is_probable_prime(n: int) -> bool:
    return bool(gmpy2.is_prime(n, 50))


def test_p62_is_prime():
    # reference: gmpy2.is_prime (Miller-Rabin, 50 rounds)
    assert _is_probable_prime(P62)


ADVERSARIAL_LENGTHS = [1, 2, 3, 7, 31, 63, 64, 65, 127, 128, 129, 1021, 1024, 1025, 4096]


@pytest.mark.parametrize("n", ADVERSARIAL_LENGTHS)
@pytest.mark.parametrize("bits", [1, 16, 31, 62])
def test_extremes_match_flint(n, bits):
    # reference: python-flint fmpz_poly; every coefficient at +max / -max / alternating
    top = 2**bits - 1
    cases = {
        "all +max": np.full(n, top, dtype=np.int64),
        "all -max": np.full(n, -top, dtype=np.int64),
        "alternating": np.where(np.arange(n) % 2 == 0, top, -top).astype(np.int64),
    }
    for name, a in cases.items():
        b = cases["alternating"] if name == "all +max" else cases["all +max"]
        got = polyconv.convolve(a, b)
        assert _as_ints(got) == _flint_product(a, b), name
        assert got.dtype == (np.int64 if n * top * top < 2**63 else object)


def test_one_huge_one_tiny_operand():
    # reference: python-flint fmpz_poly
    rng = np.random.default_rng(1)
    huge = np.array([int(v) << 900 for v in rng.integers(-2**40, 2**40, 300)], dtype=object)
    tiny = rng.integers(-3, 4, 2000)
    assert _as_ints(polyconv.convolve(huge, tiny)) == _flint_product(huge, tiny)


@pytest.mark.parametrize("dtype", [np.bool_, np.int8, np.uint8, np.int16, np.uint16, np.int32,
                                   np.uint32, np.int64])
def test_numpy_integer_dtypes(dtype):
    # reference: python-flint fmpz_poly (numpy's own integer convolve would wrap around)
    rng = np.random.default_rng(2)
    info = np.iinfo(dtype) if dtype is not np.bool_ else None
    lo, hi = (0, 2) if info is None else (int(info.min), int(info.max) + 1)
    a = rng.integers(lo, hi, 700).astype(dtype)
    b = rng.integers(lo, hi, 500).astype(dtype)
    assert _as_ints(polyconv.convolve(a, b)) == _flint_product(a, b)


def test_uint64_near_two_to_the_64():
    # reference: python-flint fmpz_poly
    a = np.array([2**64 - 1, 2**64 - 2, 2**63, 1], dtype=np.uint64)
    b = np.array([2**64 - 1, 7], dtype=np.uint64)
    got = polyconv.convolve(a, b)
    assert got.dtype == object
    assert _as_ints(got) == _flint_product(a, b)


def test_python_ints_and_mpz_objects():
    # reference: python-flint fmpz_poly
    a = [3**200, -(2**300), 5, 0, -1]
    b = np.array([gmpy2.mpz(7) ** 90, gmpy2.mpz(-1), gmpy2.mpz(2) ** 64], dtype=object)
    assert _as_ints(polyconv.convolve(a, b)) == _flint_product(a, b)


@pytest.mark.parametrize("n", [10, 100, 1000, 5000])
def test_binomial_coefficients(n):
    # reference: math.comb; (1+x)^n built by repeated squaring through convolve
    result = np.array([1], dtype=np.int64)
    base = np.array([1, 1], dtype=np.int64)
    k = n
    while k:
        if k & 1:
            result = polyconv.convolve(result, base)
        k >>= 1
        if k:
            base = polyconv.convolve(base, base)
    assert _as_ints(result) == [math.comb(n, i) for i in range(n + 1)]


@pytest.mark.parametrize("modulus", [2, 3, 998244353, P62, 2**64 - 1, BIG_MODULUS])
@pytest.mark.parametrize("n", [1, 2, 100, 3000])
def test_modulus_matches_flint(modulus, n):
    # reference: python-flint fmpz_poly product reduced mod m (nmod_poly below 2^64 as well)
    rng = np.random.default_rng(modulus % 1000 + n)
    a = rng.integers(-2**62, 2**62, n)
    b = rng.integers(-2**62, 2**62, max(1, n // 2 + 1))
    got = polyconv.convolve(a, b, modulus=modulus)
    want = [v % modulus for v in _flint_product(a, b)]
    assert _as_ints(got) == want
    assert all(0 <= v < modulus for v in _as_ints(got))
    assert got.dtype == (np.int64 if modulus <= 2**63 else object)
    if modulus < 2**63:
        ref = flint.nmod_poly([int(v) % modulus for v in a], modulus) * flint.nmod_poly(
            [int(v) % modulus for v in b], modulus)
        coeffs = [int(v) for v in ref.coeffs()]
        assert want[: len(coeffs)] == coeffs


def test_ntt_engine_for_an_ntt_prime():
    # reference: python-flint nmod_poly
    p = 998244353
    rng = np.random.default_rng(5)
    a, b = rng.integers(0, p, 5000), rng.integers(0, p, 4000)
    got = polyconv.convolve(a, b, modulus=p, method="ntt")
    ref = flint.nmod_poly([int(v) for v in a], p) * flint.nmod_poly([int(v) for v in b], p)
    assert _as_ints(got) == [int(v) for v in ref.coeffs()]


@pytest.mark.parametrize("method", ["direct-exact", "kronecker", "limbs", "fft-exact"])
def test_every_exact_engine_when_forced(method):
    # reference: python-flint fmpz_poly
    rng = np.random.default_rng(6)
    a, b = rng.integers(-2**12, 2**12, 900), rng.integers(-2**12, 2**12, 700)
    if method == "limbs":
        a, b = a * 2**20, b * 2**18
    the_plan = polyconv.plan(a, b, method=method)
    assert the_plan.exact and the_plan.engine == method
    assert the_plan.certificate in ("bound", "check", "construction")
    assert _as_ints(polyconv.convolve(a, b, method=method)) == _flint_product(a, b)


def test_float_fft_rounded_is_wrong_where_auto_is_exact():
    # reference: python-flint fmpz_poly.  30-bit coefficients at n = 2^15: a plain float FFT
    # product rounded to integers loses low digits (the true coefficients need ~75 bits).
    rng = np.random.default_rng(7)
    n = 2**15
    a, b = rng.integers(0, 2**30, n), rng.integers(0, 2**30, n)
    want = _flint_product(a, b)
    naive = np.rint(convolve_fft(a.astype(float), b.astype(float), 2 * n, 2 * n - 1))
    assert [int(v) for v in naive] != want
    got = polyconv.convolve(a, b)
    assert polyconv.plan(a, b).exact
    assert _as_ints(got) == want


def test_check_certificate_path_is_exact():
    # reference: python-flint fmpz_poly.  16-bit magnitudes at n = 2^16: the a-priori bound is
    # above 1/2, the random-evaluation check certifies the rounded product.
    rng = np.random.default_rng(8)
    n = 2**16
    a, b = rng.integers(-2**15, 2**15, n), rng.integers(-2**15, 2**15, n)
    the_plan = polyconv.plan(a, b, method="fft-exact")
    assert the_plan.certificate == "check" and the_plan.fallback in ("kronecker", "direct-exact")
    assert _as_ints(polyconv.convolve(a, b, method="fft-exact")) == _flint_product(a, b)


def test_batches_of_integers_and_modes():
    # reference: python-flint fmpz_poly row by row; modes sliced as numpy.convolve defines them
    rng = np.random.default_rng(9)
    a = rng.integers(-1000, 1000, (3, 50))
    b = rng.integers(-1000, 1000, (1, 20))
    got = polyconv.convolve(a, b)
    for i in range(3):
        assert _as_ints(got[i]) == _flint_product(a[i], b[0])
    same = polyconv.convolve(a[0], b[0], mode="same")
    assert _as_ints(same) == _flint_product(a[0], b[0])[9: 9 + 50]
    valid = polyconv.convolve(a[0], b[0], mode="valid")
    assert _as_ints(valid) == _flint_product(a[0], b[0])[19: 50]


def test_truncated_length_integers():
    # reference: python-flint fmpz_poly, sliced
    rng = np.random.default_rng(10)
    a, b = rng.integers(-2**40, 2**40, 400), rng.integers(-2**40, 2**40, 300)
    assert _as_ints(polyconv.convolve(a, b, length=123)) == _flint_product(a, b)[:123]


def test_plan_reports_certificates():
    small = polyconv.plan([1, 2, 3], [4, 5])
    assert small.exact and small.error_bound == 0.0
    assert small.certificate in ("construction", "bound")
    text = str(polyconv.plan(np.arange(5000), np.arange(5000)))
    assert "exact:       yes" in text
    floats = polyconv.plan(np.ones(5000), np.ones(5000))
    assert floats.certificate == "none" and 0 < floats.error_bound < 1e-6


def test_error_bound_covers_observed_float_error():
    # reference: python-flint for the exact product; the bound must not be exceeded
    rng = np.random.default_rng(11)
    a = rng.integers(-2**20, 2**20, 4096).astype(float)
    b = rng.integers(-2**20, 2**20, 4096).astype(float)
    exact = np.array(_flint_product(a.astype(np.int64), b.astype(np.int64)), dtype=object)
    approx = polyconv.convolve(a, b, method="fft")
    observed = max(abs(float(x) - int(y)) for x, y in zip(approx, exact, strict=True))
    assert observed <= polyconv.error_bound(a, b, polyconv.plan(a, b, method="fft"))


@pytest.mark.parametrize("bad, words", [(1, "modulus must be >= 2"),
                                        (0, ">= 2"), (-7, ">= 2"), (2.0, "modulus must be"),
                                        ("7", "modulus must be"), (True, "modulus must be")])
def test_bad_modulus(bad, words):
    with pytest.raises((ValueError, TypeError), match=words):
        polyconv.convolve([1, 2], [3], modulus=bad)


def test_float_method_refused_for_integers():
    with pytest.raises(ValueError, match="exact"):
        polyconv.convolve([1, 2], [3], method="fft")
    # ntt with any modulus: NTTs modulo enough primes, Garner CRT, then reduction
    # (1 + 2x) * 3 = 3 + 6x, by hand
    assert polyconv.convolve([1, 2], [3], method="ntt", modulus=10).tolist() == [3, 6]
    with pytest.raises(ValueError, match="NTT primes"):  # 2^400-bit coefficients: > 7 primes
        polyconv.convolve([2**200, 1], [2**200], method="ntt")


ints = st.integers(min_value=-(2**70), max_value=2**70)


@settings(max_examples=40, deadline=None)
@given(st.lists(ints, min_size=1, max_size=60), st.lists(ints, min_size=1, max_size=60))
def test_hypothesis_big_ints_exact_and_commutative(a, b):
    # reference: python-flint fmpz_poly; commutativity (common practice, no source)
    got = _as_ints(polyconv.convolve(np.array(a, dtype=object), np.array(b, dtype=object)))
    assert got == _flint_product(a, b)
    assert got == _as_ints(polyconv.convolve(np.array(b, dtype=object),
                                             np.array(a, dtype=object)))


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(-(2**31), 2**31), min_size=1, max_size=400),
       st.lists(st.integers(-(2**31), 2**31), min_size=1, max_size=400),
       st.sampled_from([2, 3, 97, 998244353, P62]))
def test_hypothesis_modular_agrees_with_exact(a, b, m):
    # reference: the exact product reduced mod m (python-flint fmpz_poly)
    got = _as_ints(polyconv.convolve(np.array(a), np.array(b), modulus=m))
    assert got == [v % m for v in _flint_product(a, b)]


@pytest.mark.parametrize("modulus", [2**63, 2**63 + 1, 2**64, 2**100 + 277])
def test_moduli_at_and_above_two_to_the_63(modulus):
    # reference: Python integer arithmetic on the flint product (an int64 product reduced by a
    # modulus beyond int64 once overflowed here)
    a, b = np.array([3, 5, 2**62]), np.array([7, -1])
    got = polyconv.convolve(a, b, modulus=modulus)
    assert _as_ints(got) == [v % modulus for v in _flint_product(a, b)]


@pytest.mark.parametrize("method", ["limbs", "kronecker"])
@pytest.mark.parametrize("modulus", [2, 2**20, 2**36, 2**62])
def test_power_of_two_moduli(method, modulus):
    # reference: python-flint fmpz_poly product, then % modulus (limbs recombine in wrapping
    # int64, Kronecker keeps the low bits of each slot)
    rng = np.random.default_rng(modulus % 97)
    a, b = rng.integers(-2**62, 2**62, 2500), rng.integers(-2**62, 2**62, 1800)
    got = polyconv.convolve(a, b, modulus=modulus, method=method)
    assert got.dtype == np.int64
    assert _as_ints(got) == [v % modulus for v in _flint_product(a, b)]
    got = polyconv.convolve(a, b, modulus=modulus, method=method, mode="valid")
    assert _as_ints(got) == [v % modulus for v in _flint_product(a, b)[1799:2500]]


@pytest.mark.parametrize("method", ["auto", "fft-exact", "limbs", "kronecker", "direct-exact"])
@pytest.mark.parametrize("modulus", [None, 998244353])
def test_valid_mode_middle_product(method, modulus):
    # reference: python-flint fmpz_poly product, sliced as numpy.convolve's "valid" mode
    rng = np.random.default_rng(12)
    a, b = rng.integers(-2**10, 2**10, 3000), rng.integers(-2**10, 2**10, 1000)
    if method == "limbs" and modulus is None:
        a, b = a * 2**22, b * 2**20
    try:
        the_plan = polyconv.plan(a, b, mode="valid", method=method, modulus=modulus)
    except ValueError:
        pytest.skip(f"{method} not applicable here")
    got = polyconv.convolve(a, b, mode="valid", method=method, modulus=modulus)
    full = _flint_product(a, b)
    want = full[999:3000]
    if modulus is not None:
        want = [v % modulus for v in want]
    assert _as_ints(got) == want
    if method in ("fft-exact", "limbs"):
        assert the_plan.transform_length == 4096  # circular: max(n1, n2) suffices


@pytest.mark.parametrize("method", ["auto", "limbs", "kronecker", "direct-exact"])
def test_int64_extremes_every_engine(method):
    # reference: python-flint fmpz_poly.  Found by bench/exactness_campaign.py: limb splitting
    # overflowed int64 for coefficients within 2^(b-1) of 2^63.
    top = 2**63 - 1
    a = np.array([top if i % 2 == 0 else -top for i in range(37)], dtype=np.int64)
    b = np.array([top, -top, 5, np.iinfo(np.int64).min, top], dtype=np.int64)
    got = polyconv.convolve(a, b, method=method)
    assert _as_ints(got) == _flint_product(a, b)


def test_centred_norms_save_a_limb_and_stay_exact():
    # reference: python-flint nmod_poly.  Uniform residues mod 998244353 at n = 2^15 have
    # centred norms ~ (m/2) sqrt(n/3): the top limb's norm bound (bounds.limb_norms) lets two
    # 15-bit limbs be certified; residues packed near m/2 need three.
    m, n = 998244353, 2**15
    rng = np.random.default_rng(31)
    uniform = rng.integers(0, m, n)
    near_half = np.full(n, m // 2) - rng.integers(0, 3, n)
    for a, limbs in ((uniform, 2), (near_half, 3)):
        the_plan = polyconv.plan(a, a[::-1], modulus=m, method="limbs")
        assert dict(the_plan.settings)["limbs_a"] == limbs
        got = polyconv.convolve(a, a[::-1], modulus=m, method="limbs")
        want = flint.nmod_poly(a.tolist(), m) * flint.nmod_poly(a[::-1].tolist(), m)
        assert _as_ints(got) == [int(c) for c in want.coeffs()]


def test_schoolbook_is_not_planned_for_sixteen_1000_bit_terms():
    # Measured on the shipped machine (2026-12-03): 16 x 16 products of 1000-bit values take
    # ~250 us as Python-int schoolbook sums and ~100 us by Kronecker substitution; GMP's limb
    # products grow quadratically with the width (schoolbook multiplication, Knuth TAOCP vol. 2,
    # 4.3.1), which the cost model charges.  Values against python-flint's fmpz_poly product.
    rng = np.random.default_rng(16)
    a = [(int(v) << 960) + 1 for v in rng.integers(-2**39, 2**39, size=16)]
    b = [(int(v) << 960) - 3 for v in rng.integers(-2**39, 2**39, size=16)]
    x, y = np.array(a, dtype=object), np.array(b, dtype=object)
    assert polyconv.plan(x, y).engine != "direct-exact"
    want = [int(c) for c in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    assert polyconv.convolve(x, y).tolist() == want
