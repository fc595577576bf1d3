"""The compiled NTT engines (polyconv.engines.ntt_compiled) against python-flint and Python ints.

The kernels are compiled (or loaded from numba's cache) once per test session by the
``kernels`` fixture; every check names its reference beside it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

flint = pytest.importorskip("flint")
pytest.importorskip("numba")

from polyconv.engines import _wrap  # noqa: E402
from polyconv.engines import jit_state as jit  # noqa: E402
from polyconv.engines import ntt_compiled as nc  # noqa: E402

P = 998244353


@pytest.fixture(scope="session")
def kernels():
    """Compile or load the kernels once for the whole session."""
    return jit.kernels()


def _nmod(a, b, m):
    """python-flint's nmod_poly product, as Python ints (the reference)."""
    return [int(c) for c in (flint.nmod_poly([int(v) for v in a], m)
                             * flint.nmod_poly([int(v) for v in b], m)).coeffs()]


def _fmpz(a, b):
    """python-flint's fmpz_poly product, as Python ints (the reference)."""
    return [int(c) for c in (flint.fmpz_poly([int(v) for v in a])
                             * flint.fmpz_poly([int(v) for v in b])).coeffs()]


def _padded(ref, count):
    """flint drops trailing zero coefficients; our products keep the full length."""
    return ref + [0] * (count - len(ref))


def test_prime_table_is_correct():
    # sympy's isprime and is_primitive_root are the reference
    sympy = pytest.importorskip("sympy")
    for p, g, k in nc.PRIMES:
        assert sympy.isprime(p)
        assert (p - 1) % (1 << k) == 0 and ((p - 1) >> k) % 2 == 1
        assert sympy.is_primitive_root(g, p)
        assert 4 * p < 2**32  # lazy butterflies stay in uint32
    assert len({p for p, _, _ in nc.PRIMES}) == len(nc.PRIMES)


def _cases(rng, m):
    """Random and adversarial operand pairs with entries in [0, m)."""
    yield rng.integers(0, m, 1), rng.integers(0, m, 1)
    yield rng.integers(0, m, 2), rng.integers(0, m, 1)
    yield np.full(37, m - 1), np.full(1000, m - 1)          # all-max residues
    yield np.zeros(50, dtype=np.int64), rng.integers(0, m, 70)  # zeros
    yield rng.integers(0, m, 3000), rng.integers(0, m, 1234)  # non-powers of two
    yield np.full(2**15, m - 1), np.full(2**15, m - 1)         # full length 2^16 - 1


@pytest.mark.parametrize("m", [P, 754974721, 167772161])
def test_mod_prime_matches_flint_nmod_poly(kernels, m):
    rng = np.random.default_rng(m)
    for a, b in _cases(rng, m):
        got = nc.convolve_mod_prime(a, b, m)
        assert got.dtype == np.int64
        # python-flint nmod_poly
        assert got.tolist() == _padded(_nmod(a, b, m), len(a) + len(b) - 1)


def test_mod_prime_square_and_keep(kernels):
    rng = np.random.default_rng(3)
    a = rng.integers(0, P, 777)
    full = _nmod(a, a, P)  # python-flint nmod_poly
    assert nc.convolve_mod_prime(a, a, P).tolist() == full
    assert nc.convolve_mod_prime(a, a, P, keep=100).tolist() == full[:100]


def _signed_cases(rng, top):
    big = 2**top - 1
    yield rng.integers(-big, big, 1, endpoint=True), rng.integers(-big, big, 1, endpoint=True)
    yield rng.integers(-big, big, 2, endpoint=True), rng.integers(-big, big, 5, endpoint=True)
    yield np.full(300, big), np.full(301, big)                                 # all +max
    alt = np.where(np.arange(513) % 2 == 0, big, -big)
    yield alt, alt[:400].copy()                                                # alternating
    yield np.full(64, -big), np.full(65, big)
    yield np.zeros(10, dtype=np.int64), rng.integers(-big, big, 9, endpoint=True)
    yield rng.integers(-big, big, 5000, endpoint=True), rng.integers(-big, big, 3333,
                                                                    endpoint=True)


@pytest.mark.parametrize("top", [1, 15, 31, 62])
def test_exact_signed_matches_flint_fmpz_poly(kernels, top):
    rng = np.random.default_rng(top)
    for a, b in _signed_cases(rng, top):
        bound = min(len(a), len(b)) * (2**top - 1) ** 2
        got = nc.convolve_exact(a, b, bound)
        assert got.dtype == (np.int64 if bound < 2**63 else object)
        # python-flint fmpz_poly
        assert [int(v) for v in got] == _padded(_fmpz(a, b), len(a) + len(b) - 1)


def test_exact_wide_objects_match_flint_fmpz_poly(kernels):
    rng = np.random.default_rng(11)
    for bits, n1, n2 in [(100, 1, 1), (200, 300, 257), (300, 2, 1000)]:
        a = np.array([int(v) << (bits - 40) for v in rng.integers(-2**40, 2**40, n1)],
                     dtype=object)
        b = np.array([-(1 << bits) + 1 if i % 3 == 0 else int(v) << (bits - 40)
                      for i, v in enumerate(rng.integers(-2**40, 2**40, n2))], dtype=object)
        bound = min(n1, n2) * (1 << bits) ** 2
        got = nc.convolve_exact(a, b, bound, keep=n1 + n2 - 2)
        # python-flint fmpz_poly
        assert [int(v) for v in got] == _padded(_fmpz(a, b), n1 + n2 - 1)[:n1 + n2 - 2]


def test_exact_int64_forced_output(kernels):
    # products of 31-bit values over 2^12 terms need P > 2^75 (three primes) but fit int64
    rng = np.random.default_rng(5)
    a = rng.integers(-2**31, 2**31, 4096)
    got = nc.convolve_exact(a, a, 4096 * 2**62, as_int64=False)
    assert got.dtype == object
    assert [int(v) for v in got] == _fmpz(a, a)  # python-flint fmpz_poly


def test_garner_matches_python_int_crt(kernels):
    # reference: the CRT computed with Python ints, sum r_i (P/p_i) ((P/p_i)^-1 mod p_i) mod P,
    # shifted into (-P/2, P/2]  (Knuth TAOCP 2, 4.3.2)
    rng = np.random.default_rng(8)
    for k in (1, 2, 3, 5, 9):
        primes = tuple(p for p, _, _ in nc.PRIMES[:k])
        total = math.prod(primes)
        values = [int(v) for v in rng.integers(-2**62, 2**62, 200)]
        values += [total // 2, -(total // 2), 0, 1, -1]
        values = [v for v in values if abs(v) <= total // 2]
        res = np.array([[v % p for v in values] for p in primes], dtype=np.int64)
        expected = []
        for c in range(len(values)):
            x = sum(int(res[i, c]) * (total // p) * pow(total // p, -1, p)
                    for i, p in enumerate(primes)) % total
            expected.append(x - total if x > total // 2 else x)
        assert expected == values
        got = nc.recombine(res, primes, as_int64=False)
        assert [int(v) for v in got] == expected
        small = [i for i, v in enumerate(values) if abs(v) < 2**63]
        got64 = nc.recombine(np.ascontiguousarray(res[:, small]), primes, as_int64=True)
        assert got64.tolist() == [expected[i] for i in small]


@pytest.mark.parametrize("m", [10**9 + 7, 2**61 - 1, 2**62 - 57, 2**64 - 59, 3])
def test_mod_any_modulus_matches_flint(kernels, m):
    rng = np.random.default_rng(m % 1000)
    hi = min(m, 2**63)
    cases = [(rng.integers(0, hi, 1000), rng.integers(0, hi, 999)),
             (np.full(2, hi - 1), np.full(1, hi - 1)),
             (np.full(4000, hi - 1), np.full(300, hi - 1))]
    if m > 2**63:  # residues above int64: object operands
        cases.append((np.array([m - 1] * 50, dtype=object), np.array([m - 2] * 7, dtype=object)))
    for a, b in cases:
        got = nc.convolve_mod(a, b, m)
        if m < 2**64:
            ref = _nmod(a, b, m)  # python-flint nmod_poly
        else:
            ref = [c % m for c in _fmpz(a, b)]
        assert [int(v) for v in got] == _padded(ref, len(a) + len(b) - 1)


def test_primes_for_bound():
    # the product of the chosen primes exceeds twice the bound, one prime fewer does not
    for bits in (1, 30, 63, 127, 500):
        primes = nc.primes_for(2**bits, 2**16)
        assert math.prod(primes) > 2 ** (bits + 1)
        assert math.prod(primes[:-1]) <= 2 ** (bits + 1)
    with pytest.raises(ValueError, match="more NTT primes"):
        nc.primes_for(2**200, 2**25)


def test_short_multi_prime_square_and_one_point(kernels):
    """Products up to 2^12 points run all primes in one kernel call (stacked tables), a square
    with one forward transform per prime; single coefficients use one-point transforms."""
    rng = np.random.default_rng(8)
    a = rng.integers(-2**62, 2**62, 300)
    got = nc.convolve_exact(a, a, 300 * 2**124)
    assert [int(v) for v in got] == _fmpz(a, a)  # python-flint fmpz_poly
    one = np.array([-(2**62) + 1])
    assert [int(v) for v in nc.convolve_exact(one, one, 2**124)] == _fmpz(one, one)
    assert nc.convolve_mod_prime(np.array([P - 1]), np.array([P - 1]), P).tolist() == [1]


@pytest.mark.parametrize("m", [P, 754974721])
def test_every_transform_length_matches_flint(kernels, m):
    """Each transform length 2^0 .. 2^17 takes its own branch of the vector kernels (scalar
    below 32 words, fused 32-word blocks, radix 8/4/2 steps, stages wider than a block): products
    whose length just fits or just spills, of all-max residues (the lazy reductions' worst
    case), of int64 values of any sign (the vector residue load) and squares, all against
    python-flint's nmod_poly."""
    rng = np.random.default_rng(17)
    for lg in range(18):
        big = 2**lg
        cases = [(np.full(big // 2 + 1, m - 1), np.full(max(1, big - big // 2), m - 1)),
                 (rng.integers(-2**63, 2**63 - 1, big, dtype=np.int64),
                  rng.integers(-2**63, 2**63 - 1, max(1, big // 3), dtype=np.int64))]
        for a, b in cases:
            assert nc.convolve_mod_prime(a, b, m).tolist() == _padded(
                _nmod(a % m, b % m, m), len(a) + len(b) - 1)
            assert nc.convolve_mod_prime(a, a, m).tolist() == _padded(
                _nmod(a % m, a % m, m), 2 * len(a) - 1)


def test_products_just_above_a_power_of_two_match_flint(kernels):
    """Lengths m + r with r <= m / 8 take a cyclic m-point product and a short product of the
    top ends (engines/_wrap.py): unbalanced and balanced operands, squares, ``keep`` cutting
    inside and beyond the wrapped part, exact multi-prime products; python-flint nmod_poly and
    fmpz_poly are the references."""
    rng = np.random.default_rng(29)
    m = 2**13
    for n1, n2 in ((m // 2 + 1, m // 2 + 1), (m, m // 8 + 1), (m // 8 + 1, m), (m - 5, 30),
                   (m // 2 + m // 16, m // 2 + m // 16)):
        assert _wrap.wrap_length(n1, n2, 2 * m) == m  # the route under test is taken
        a, b = np.full(n1, P - 1), rng.integers(0, P, n2)
        full = _padded(_nmod(a, b, P), n1 + n2 - 1)
        assert nc.convolve_mod_prime(a, b, P).tolist() == full
        assert nc.convolve_mod_prime(a, b, P, keep=7).tolist() == full[:7]
        assert nc.convolve_mod_prime(a, b, P, keep=m + 3).tolist() == full[:m + 3]
        assert nc.convolve_mod_prime(b, b, P).tolist() == _padded(_nmod(b, b, P), 2 * n2 - 1)
        sa = rng.integers(-2**40, 2**40, n1)
        sb = rng.integers(-2**40, 2**40, n2)
        got = nc.convolve_exact(sa, sb, min(n1, n2) * 2**80)
        assert [int(v) for v in got] == _padded(_fmpz(sa, sb), n1 + n2 - 1)
    # operands beyond int64: residue matrices (one row per prime) take the same route
    wide = np.array([int(v) << 70 for v in rng.integers(-2**30, 2**30, m // 2 + 1)], dtype=object)
    got = nc.convolve_exact(wide, wide[::-1].copy(), (m // 2 + 1) * 2**200)
    assert [int(v) for v in got] == _fmpz(wide, wide[::-1])  # python-flint fmpz_poly
