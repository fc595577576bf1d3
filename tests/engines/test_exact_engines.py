"""Exact integer engines called directly: Kronecker, NTT + CRT, float FFT rounding and limbs.

Every check names its source: "python-flint reference" (flint.fmpz_poly / flint.nmod_poly
products), "math.comb", or "common practice, no source".
"""

from __future__ import annotations

import math
import random

import flint
import gmpy2
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from polyconv import convolve as polyconv_convolve
from polyconv.engines import _intpack, exact_fft, kronecker, ntt
from polyconv.numerics import bounds, checks
from polyconv.numerics.limits import max_abs

RNG = np.random.default_rng(12345)


def flint_product(a, b) -> list[int]:
    """python-flint reference: exact product, zero padded to n1 + n2 - 1."""
    c = flint.fmpz_poly([int(x) for x in a]) * flint.fmpz_poly([int(x) for x in b])
    out = [int(x) for x in c.coeffs()]
    return out + [0] * (len(a) + len(b) - 1 - len(out))


def flint_product_mod(a, b, m: int) -> list[int]:
    """python-flint reference: nmod_poly below 2^64, fmpz_poly then % m above."""
    if m < 2**64:
        c = (flint.nmod_poly([int(x) % m for x in a], m)
             * flint.nmod_poly([int(x) % m for x in b], m))
        out = [int(x) for x in c.coeffs()]
        return out + [0] * (len(a) + len(b) - 1 - len(out))
    return [x % m for x in flint_product(a, b)]


def as_list(c) -> list[int]:
    return [int(x) for x in c]


LENGTHS = [1, 2, 3, 7, 31, 32, 33, 127, 128, 129, 257]


def adversarial(n: int, bits: int, kind: str, signed: bool = True) -> np.ndarray:
    top = 2**bits - 1
    if kind == "+max":
        values = [top] * n
    elif kind == "-max":
        values = [-top if signed else top] * n
    elif kind == "alternating":
        values = [top if i % 2 == 0 else -top for i in range(n)]
    else:
        values = [random.Random(n + bits).randrange(-top, top + 1) for _ in range(n)]
    if bits <= 62:
        return np.array(values, dtype=np.int64)
    return np.array(values, dtype=object)


# ----------------------------------------------------------------------------- Kronecker


@pytest.mark.parametrize("n1", LENGTHS)
@pytest.mark.parametrize("bits", [1, 16, 62, 200])
def test_kronecker_adversarial(n1, bits):
    for kind in ("+max", "-max", "alternating", "random"):
        a = adversarial(n1, bits, kind)
        b = adversarial(max(1, n1 // 2 + 1), bits, "alternating" if kind != "+max" else "-max")
        expected = flint_product(a, b)  # python-flint reference
        assert as_list(kronecker.convolve_kronecker(a, b, two_point=False)) == expected
        assert as_list(kronecker.convolve_kronecker(a, b, two_point=True)) == expected


def test_kronecker_fixed_width_extremes():
    a = np.array([-2**63, 2**63 - 1, -1, 0, 1, -2**63], dtype=np.int64)
    u = np.array([2**64 - 1, 2**64 - 2, 2**63, 0, 1], dtype=np.uint64)
    for x, y in ((a, a), (u, u), (a, u), (u, a)):
        expected = flint_product(x, y)  # python-flint reference
        assert as_list(kronecker.convolve_kronecker(x, y)) == expected
        assert as_list(kronecker.convolve_kronecker(x, y, two_point=True)) == expected


def test_kronecker_huge_times_tiny():
    huge = np.array([random.Random(1).getrandbits(5000) - 2**4999 for _ in range(40)], dtype=object)
    tiny = np.array([1, -1, 0, 1], dtype=np.int64)
    expected = flint_product(huge, tiny)  # python-flint reference
    assert as_list(kronecker.convolve_kronecker(huge, tiny)) == expected
    assert as_list(kronecker.convolve_kronecker(tiny, huge, two_point=True)) == expected


def test_kronecker_int64_output_and_keep():
    a = RNG.integers(-2**20, 2**20, 1000)
    b = RNG.integers(-2**20, 2**20, 700)
    out = kronecker.convolve_kronecker(a, b, as_int64=True)
    assert out.dtype == np.int64
    assert out.tolist() == flint_product(a, b)  # python-flint reference
    head = kronecker.convolve_kronecker(a, b, keep=37)
    assert as_list(head) == flint_product(a, b)[:37]  # python-flint reference


def test_kronecker_mpz_inputs():
    import gmpy2
    a = np.array([gmpy2.mpz(-3) ** 90, gmpy2.mpz(7), gmpy2.mpz(0)], dtype=object)
    assert as_list(kronecker.convolve_kronecker(a, a)) == flint_product(a, a)  # python-flint


MODULI = [2, 3, 998244353, 4611686018427387847, 2**64 - 1, 10**99 + 289]


@pytest.mark.parametrize("m", MODULI)
def test_kronecker_mod(m):
    a = RNG.integers(-2**63, 2**63 - 1, 300)
    b = RNG.integers(0, 2**64 - 1, 129, dtype=np.uint64, endpoint=True)
    big = np.array([random.Random(m % 1000).getrandbits(400) - 2**399 for _ in range(50)],
                   dtype=object)
    for x, y in ((a, b), (big, a), (b, b)):
        out = kronecker.convolve_kronecker_mod(x, y, m)
        assert as_list(out) == flint_product_mod(x, y, m)  # python-flint reference
        assert out.dtype == (np.int64 if m <= 2**63 else object)


def test_binomial_coefficients():
    n = 600
    ones = np.ones(2, dtype=np.int64)
    c = np.array([1], dtype=object)
    power = np.array([1, 1], dtype=object)
    k = n
    while k:  # (1 + x)^n by repeated squaring through the engine
        if k & 1:
            c = kronecker.convolve_kronecker(c, power)
        power = kronecker.convolve_kronecker(power, power)
        k >>= 1
    assert as_list(c) == [math.comb(n, i) for i in range(n + 1)]  # math.comb
    limbs = exact_fft.convolve_limbs(c, ones, 20, 40, 1, 1024)
    assert as_list(limbs) == [math.comb(n + 1, i) for i in range(n + 2)]  # math.comb


# ----------------------------------------------------------------------------- NTT and CRT


def _prime_factors(n: int) -> set[int]:
    """Trial division (p - 1 = c 2^k with a small odd c here)."""
    factors, d = set(), 2
    while d * d <= n:
        while n % d == 0:
            factors.add(d)
            n //= d
        d += 1
    return factors | ({n} if n > 1 else set())


@pytest.mark.parametrize("p", sorted(ntt.PRIMES))
def test_ntt_primes_and_generators(p):
    g, k = ntt.PRIMES[p]
    assert gmpy2.is_prime(p, 50) and (p - 1) % 2**k == 0  # gmpy2 Miller-Rabin primality
    # g generates (Z/p)^* iff g^((p-1)/f) != 1 for every prime f | p - 1 (Lagrange; common
    # practice, no source)
    assert all(pow(g, (p - 1) // f, p) != 1 for f in _prime_factors(p - 1))


@pytest.mark.parametrize("p", [998244353, 2013265921, 3221225473, 167772161])
@pytest.mark.parametrize("n1,n2", [(1, 1), (2, 1), (3, 5), (31, 33), (128, 128), (1000, 24)])
def test_ntt_mod_prime(p, n1, n2):
    for a, b in ((RNG.integers(0, p, n1, dtype=np.uint64), RNG.integers(0, p, n2, dtype=np.uint64)),
                 (np.full(n1, p - 1, np.uint64), np.full(n2, p - 1, np.uint64))):
        out = ntt.convolve_ntt_mod_prime(a, b, p)
        assert out.tolist() == flint_product_mod(a, b, p)  # python-flint reference (nmod_poly)


def test_ntt_mod_prime_large_transform():
    p = 998244353
    a = RNG.integers(0, p, 40000, dtype=np.uint64)
    b = RNG.integers(0, p, 30001, dtype=np.uint64)
    out = ntt.convolve_ntt_mod_prime(a, b, p, keep=50000)
    assert out.tolist() == flint_product_mod(a, b, p)[:50000]  # python-flint reference


@pytest.mark.parametrize("bits", [16, 40, 63])
def test_ntt_crt_exact(bits):
    for kind in ("+max", "-max", "alternating", "random"):
        a = adversarial(257, min(bits, 62), kind)
        b = adversarial(129, min(bits, 62), "alternating")
        if bits == 63:
            a = np.full(257, -2**63, dtype=np.int64)
        primes = ntt.primes_needed(bounds.product_bound(a, b), 512)
        out = ntt.convolve_ntt_crt(a, b, primes)
        assert as_list(out) == flint_product(a, b)  # python-flint reference
    u = np.full(100, 2**64 - 1, dtype=np.uint64)
    out = ntt.convolve_ntt_crt(u, u, ntt.primes_needed(100 * (2**64 - 1) ** 2, 256))
    assert as_list(out) == flint_product(u, u)  # python-flint reference


def test_crt_int64_output():
    a = RNG.integers(-2**25, 2**25, 5000)
    b = RNG.integers(-2**25, 2**25, 4000)
    primes = ntt.primes_needed(bounds.product_bound(a, b), 9000)
    out = ntt.convolve_ntt_crt(a, b, primes, as_int64=True)  # |c| < 2^63 proven by the bound
    assert out.dtype == np.int64
    assert out.tolist() == flint_product(a, b)  # python-flint reference


def test_crt_object_operands():
    a = np.array([random.Random(5).getrandbits(100) - 2**99 for _ in range(64)], dtype=object)
    primes = ntt.primes_needed(bounds.product_bound(a, a), 128)
    out = ntt.convolve_ntt_crt_objects(a, a, primes)
    assert as_list(out) == flint_product(a, a)  # python-flint reference


# ----------------------------------------------------------------------------- float FFT rounding


@pytest.mark.parametrize("bits", [16, 63, 300])
def test_limbs_exact(bits):
    for n in (1, 2, 33, 1000):
        for kind in ("+max", "-max", "alternating", "random"):
            a = adversarial(n, bits, kind)
            b = adversarial(n + 3, bits, "alternating")
            n_fft = 1 << (2 * n + 2).bit_length()
            limb_bits, ka, kb = bounds.choose_limbs(max_abs(a), max_abs(b),
                                                    n, n + 3, n_fft, max_limbs=64)
            out = exact_fft.convolve_limbs(a, b, limb_bits, ka, kb, n_fft)
            assert as_list(out) == flint_product(a, b)  # python-flint reference


def test_limbs_uint64_and_int64_output():
    u = np.full(77, 2**64 - 1, dtype=np.uint64)
    limb_bits, ka, kb = bounds.choose_limbs(2**64 - 1, 2**64 - 1, 77, 77, 256)
    assert as_list(exact_fft.convolve_limbs(u, u, limb_bits, ka, kb, 256)) == flint_product(u, u)
    a = RNG.integers(-2**24, 2**24, 3000)
    limb_bits, ka, kb = bounds.choose_limbs(2**24, 2**24, 3000, 3000, 8192)
    out = exact_fft.convolve_limbs(a, a, limb_bits, ka, kb, 8192, as_int64=True)
    assert out.dtype == np.int64 and out.tolist() == flint_product(a, a)  # python-flint


def test_plain_rounding_fails_where_exact_engines_succeed():
    # 30-bit coefficients at n = 2^16: products reach 2^76, far beyond float64's 53 bits.
    from scipy import fft as sfft
    n = 1 << 16
    a = np.full(n, 2**30 - 1, dtype=np.int64)
    b = RNG.integers(2**29, 2**30, n)
    approx = sfft.irfft(sfft.rfft(a.astype(float), 2 * n) * sfft.rfft(b.astype(float), 2 * n),
                        2 * n)
    middle = slice(n - 50, n + 50)
    rounded = [int(v) for v in np.rint(approx[middle])]
    reference = flint_product(a, b)[middle]  # python-flint reference
    assert rounded != reference  # plain float FFT + rounding is wrong here
    assert as_list(kronecker.convolve_kronecker(a, b)[middle]) == reference
    primes = ntt.primes_needed(bounds.product_bound(a, b), 2 * n)
    assert as_list(ntt.convolve_ntt_crt(a, b, primes)[middle]) == reference
    choice = bounds.choose_limbs(2**30, 2**30, n, n, 2 * n)
    assert as_list(exact_fft.convolve_limbs(a, b, *choice, 2 * n)[middle]) == reference


def test_rounding_exact_when_certified():
    a = RNG.integers(-2**12, 2**12, 4096)
    b = RNG.integers(-2**12, 2**12, 4096)
    bound = bounds.fft_error_bound(bounds.norm2_upper(a), bounds.norm2_upper(b), 8192)
    assert bound < 0.5  # the certificate holds for these inputs
    assert exact_fft.convolve_rounded(a, b, 8192).tolist() == flint_product(a, b)  # python-flint


# ----------------------------------------------------------------------------- bounds and checks


@pytest.mark.parametrize("log2n", [10, 12, 14])
def test_fft_error_bound_dominates_observed(log2n):
    from scipy import fft as sfft
    n = 1 << log2n
    top = 2**16 - 1
    ones = np.full(n, top, dtype=np.int64)
    alternating = ones * np.where(np.arange(n) % 2 == 0, 1, -1)
    for a, b in ((ones, ones), (alternating, alternating), (ones, alternating)):
        approx = sfft.irfft(sfft.rfft(a.astype(float), 2 * n) * sfft.rfft(b.astype(float), 2 * n),
                            2 * n)[: 2 * n - 1]
        exact = np.array(flint_product(a, b), dtype=np.float64)  # python-flint reference
        observed = float(np.max(np.abs(approx - exact)))
        bound = bounds.fft_error_bound(bounds.norm2_upper(a), bounds.norm2_upper(b), 2 * n)
        assert bound >= observed


def test_error_factor_first_order():
    # first order (9.71 n + 2.24) eps + 3 n beta (DESIGN.md section 4, Percival 2003)
    for n in (10, 20):
        first = (9.71 * n + 2.24) * 2.0**-53 + 3 * n * 4 * 2.0**-53
        assert bounds.fft_error_factor(1 << n) == pytest.approx(first, rel=1e-2)


def test_bit_helpers():
    x = np.array([3, -2**40, 5], dtype=np.int64)
    assert bounds.bit_length_max(x) == 41  # common practice, no source
    assert bounds.product_bits(x, x) == 41 + 41 + 2 + 1  # DESIGN.md section 5 formula
    assert bounds.norm2_upper(x) >= math.sqrt(9 + 2**80 + 25)  # common practice, no source


def test_check_prime_is_the_largest_prime_below_2_28():
    # reference: gmpy2.prev_prime (GMP's probabilistic primality test, deterministic in this range)
    assert checks.CHECK_PRIME == int(gmpy2.prev_prime(2**28))
    assert checks.CHECK_PRIME < 2**28


def test_random_evaluation_check():
    # Schwartz-Zippel (Schwartz 1980, Zippel 1979)
    a = RNG.integers(-2**40, 2**40, 2000)
    b = RNG.integers(-2**40, 2**40, 1500)
    c = kronecker.convolve_kronecker(a, b)
    rng = random.Random(7)
    assert checks.random_evaluation_check(a, b, c, rng=rng)
    wrong = c.copy()
    wrong[1234] += 1
    assert not checks.random_evaluation_check(a, b, wrong, rng=rng)


# ----------------------------------------------------------------------------- properties


small_ints = st.lists(st.integers(-2**70, 2**70), min_size=1, max_size=40)


@settings(max_examples=60, deadline=None)
@given(small_ints, small_ints)
def test_property_engines_agree(xs, ys):
    a = np.array(xs, dtype=object)
    b = np.array(ys, dtype=object)
    ab = as_list(kronecker.convolve_kronecker(a, b))
    assert ab == as_list(kronecker.convolve_kronecker(b, a))  # commutativity (no source)
    assert ab == as_list(kronecker.convolve_kronecker(a, b, two_point=True))
    n_fft = 1 << (len(xs) + len(ys)).bit_length()
    choice = bounds.choose_limbs(max_abs(a), max_abs(b), len(xs), len(ys), n_fft)
    assert ab == as_list(exact_fft.convolve_limbs(a, b, *choice, n_fft))
    primes = ntt.primes_needed(bounds.product_bound(a, b), n_fft)
    assert ab == as_list(ntt.convolve_ntt_crt_objects(a, b, primes))
    assert ab == flint_product(xs, ys)  # python-flint reference


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(0, 2**64 - 1), min_size=1, max_size=30),
       st.lists(st.integers(-2**63, 2**63 - 1), min_size=1, max_size=30),
       st.sampled_from(MODULI))
def test_property_mod(xs, ys, m):
    a = np.array(xs, dtype=np.uint64)
    b = np.array(ys, dtype=np.int64)
    out = kronecker.convolve_kronecker_mod(a, b, m)
    assert as_list(out) == flint_product_mod(xs, ys, m)  # python-flint reference


# ----------------------------------------------------------------------------- byte rows


def _row_values(rows: np.ndarray) -> list[int]:
    return [int(v) for v in _intpack.rows_to_values(rows)]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.integers(-2**70, 2**70), st.sampled_from([0, 1, -1, -2**63, 2**63 - 1,
                                                                       -2**64, 2**64 - 1])),
                min_size=1, max_size=40), st.integers(0, 3))
def test_byte_rows_round_trip(values, extra):
    """Byte rows <-> ints and slot packing/unpacking are exact (the packed integer is the
    Kronecker evaluation sum x_i 2^(8 w i): common practice, no source)."""
    rows = _intpack.values_to_rows(np.array(values, dtype=object))
    assert _row_values(rows) == values
    bits = _intpack.row_bits(rows)
    assert all(-2**bits <= v < 2**bits for v in values)
    assert bits == 0 or not all(-2**(bits - 1) <= v < 2**(bits - 1) for v in values)
    width = rows.shape[1] + extra
    if any(v <= -2**(8 * width - 1) for v in values):
        width += 1
    z = _intpack.pack_rows(rows, width)
    assert int(z) == sum(v << (8 * width * i) for i, v in enumerate(values))
    assert _row_values(_intpack.unpack_rows(z, width, len(values))) == values


def test_byte_rows_from_int64_and_uint64():
    """int64 and uint64 arrays keep their values (common practice, no source)."""
    x = np.array([0, -1, 2**63 - 1, -2**63, 5], dtype=np.int64)
    assert _row_values(_intpack.values_to_rows(x)) == [int(v) for v in x]
    u = np.array([2**64 - 1, 0, 2**63], dtype=np.uint64)
    assert _row_values(_intpack.values_to_rows(u)) == [int(v) for v in u]


@pytest.mark.parametrize("two_point", [False, True])
@pytest.mark.parametrize("n1,n2,bits1,bits2", [(1, 1, 5, 5), (2, 7, 64, 1), (31, 33, 100, 100),
                                               (64, 65, 15, 500), (129, 128, 63, 63),
                                               (200, 3, 1, 1000)])
def test_multiply_rows_matches_flint(two_point, n1, n2, bits1, bits2):
    """python-flint reference: random signs, every coefficient at -max, and truncation."""
    rng = random.Random(n1 * 1000 + n2 + bits1)
    cases = [([rng.randint(-2**bits1, 2**bits1) for _ in range(n1)],
              [rng.randint(-2**bits2, 2**bits2) for _ in range(n2)]),
             ([-2**bits1] * n1, [-2**bits2] * n2),
             ([(-1)**i * 2**bits1 for i in range(n1)], [2**bits2 - 1] * n2)]
    for a, b in cases:
        ref = flint_product(a, b)
        rows_a = _intpack.values_to_rows(np.array(a, dtype=object))
        rows_b = _intpack.values_to_rows(np.array(b, dtype=object))
        out = kronecker.multiply_rows(rows_a, rows_b, two_point=two_point)
        assert _row_values(out) == ref
        keep = max(1, (n1 + n2) // 3)
        out = kronecker.multiply_rows(rows_a, rows_b, keep, two_point=two_point)
        assert _row_values(out) == ref[:keep]


@pytest.mark.parametrize("m", [2, 4, 2**36, 2**63, 2**64])
def test_kronecker_mod_power_of_two_matches_flint(m):
    """python-flint reference (fmpz_poly product, then % m): slots reduced by their low bits."""
    rng = random.Random(m % 1000)
    a = np.array([rng.randint(-2**70, 2**70) for _ in range(300)], dtype=object)
    b = RNG.integers(-2**62, 2**62, 257)
    got = kronecker.convolve_kronecker_mod(a, b, m)
    assert got.dtype == (np.int64 if m <= 2**63 else object)
    assert [int(v) for v in got] == [c % m for c in flint_product(a, b)]


@pytest.mark.parametrize("modulus", [None, 998244353, 2**62 - 57, 2**64, 10**30 + 57])
def test_two_point_on_two_threads_matches_flint(modulus):
    """python-flint reference: the two-point products run concurrently (GIL released by gmpy2)
    and still give the exact product, signed or reduced."""
    rng = random.Random(17)
    a = np.array([rng.randint(-2**90, 2**90) for _ in range(700)], dtype=object)
    b = np.array([rng.randint(-2**90, 2**90) for _ in range(513)], dtype=object)
    if modulus is None:
        got = kronecker.convolve_kronecker(a, b, two_point=True, threads=2)
        assert [int(v) for v in got] == flint_product(a, b)
        rows = kronecker.multiply_rows(_intpack.values_to_rows(a), _intpack.values_to_rows(a),
                                       two_point=True, threads=2)
        assert _row_values(rows) == flint_product(a, a)
    else:
        got = kronecker.convolve_kronecker_mod(a, b, modulus, 600, two_point=True, threads=2)
        assert [int(v) for v in got] == [c % modulus for c in flint_product(a, b)[:600]]


@pytest.mark.parametrize("split", [True, False])
@pytest.mark.parametrize("m", [2, 998244353, 2**31 - 1])
def test_direct_mod_both_splits_match_flint(monkeypatch, split, m):
    """python-flint reference (nmod_poly): the one-operand split and the Karatsuba halves, with
    every residue at m - 1 (the largest partial sums)."""
    from polyconv.engines import exact_direct
    if not split:
        monkeypatch.setattr(exact_direct, "one_split_fits", lambda terms, modulus: False)
    for n1, n2 in [(1, 1), (7, 300), (257, 256)]:
        a = np.full(n1, m - 1, dtype=np.int64)
        b = RNG.integers(0, m, n2)
        b[::3] = m - 1
        got = exact_direct.convolve_exact_direct_mod(a, b, m)
        assert as_list(got) == flint_product_mod(a, b, m)


@pytest.mark.parametrize("two_point", [False, True])
def test_kronecker_wide_slots_match_flint(two_point):
    """python-flint reference: slots wider than 64 bytes (unpacked through gmpy2.unpack with an
    offset), signed values, a negative packed product and truncation."""
    rng = random.Random(23)
    a = np.array([rng.randint(-2**600, 2**600) for _ in range(150)], dtype=object)
    b = np.array([-rng.randint(2**590, 2**600) for _ in range(97)], dtype=object)
    ref = flint_product(a, b)
    got = kronecker.convolve_kronecker(a, b, two_point=two_point, threads=2)
    assert [int(v) for v in got] == ref
    got = kronecker.convolve_kronecker(a, b, 60, two_point=two_point)
    assert [int(v) for v in got] == ref[:60]


def test_choose_limbs_caps_the_limb_count():
    """More than 12 limbs in all is left to the Kronecker engine (common practice, no source):
    5000-bit operands get no limb size; 62-bit ones get few limbs."""
    assert bounds.choose_limbs(2**5000, 2**5000, 1000, 1000, 2048) is None
    bits, ka, kb = bounds.choose_limbs(2**62, 2**62, 1000, 1000, 2048)
    assert ka + kb <= 12 and bits * ka >= 63
    assert bounds.choose_limbs(2**300, 2**300, 10, 10, 32, max_limbs=64) is not None


def test_direct_zero_times_huge():
    """Found by bench/exactness_campaign.py: an all-zero operand times 2000-bit values (bound 0)
    must not go through float64 (common practice, no source: 0 * x = 0)."""
    from polyconv.engines.exact_direct import convolve_exact_direct
    huge = np.array([2**2000 + i for i in range(5)], dtype=object)
    zeros = np.zeros(3, dtype=np.int64)
    assert as_list(convolve_exact_direct(zeros, huge)) == [0] * 7
    assert as_list(polyconv_convolve(zeros, huge)) == [0] * 7
