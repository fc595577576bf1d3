"""The wide multi-modular engine (polyconv.engines.ntt_wide, registry name "ntt-wide") against
python-flint's fmpz_poly product and Python-int schoolbook sums; its prime table against sympy;
its float64 exactness bounds; the planner's choice and certificate."""

from __future__ import annotations

import marshal
import math
import random

import numpy as np
import pytest

pytest.importorskip("numba")
flint = pytest.importorskip("flint")
sympy = pytest.importorskip("sympy")

import polyconv  # noqa: E402
from polyconv.engines import _blas, _pyints  # noqa: E402
from polyconv.engines import jit_state as jit  # noqa: E402
from polyconv.engines import ntt_wide as nw  # noqa: E402


@pytest.fixture(scope="module")
def kernels():
    """The kernels, loaded once (skipped where they cannot run here)."""
    try:
        jit.kernels()
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    assert _pyints.ready() is not None
    return jit.kernels("_kernels_wide")


def schoolbook(a: list[int], b: list[int]) -> list[int]:
    """Python-int sums c_k = sum a_i b_(k-i) (the definition; common practice, no source)."""
    out = [0] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def flint_product(a: list[int], b: list[int]) -> list[int]:
    """python-flint's fmpz_poly product, padded with the zeros its coefficient list drops."""
    c = [int(v) for v in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    return c + [0] * (len(a) + len(b) - 1 - len(c))


def bound_of(a: list[int], b: list[int]) -> int:
    return min(len(a), len(b)) * max(map(abs, a)) * max(map(abs, b))


def draw(rng: random.Random, n: int, bits: int, sign: str = "mixed") -> list[int]:
    out = [rng.getrandbits(bits) for _ in range(n)]
    if sign == "negative":
        return [-v for v in out]
    if sign == "mixed":
        return [v if rng.random() < 0.5 else -v for v in out]
    return out


def test_prime_table_is_ntt_primes():
    # primality and the order-2^e root checked by sympy (isprime; Euler's criterion for the
    # non-residue g: g^((p-1)/2) = -1 mod p, so g^((p-1)/2^e) has order exactly 2^e)
    table = nw.prime_table()
    assert len(table) == nw.MAX_PRIMES + 1
    assert len({p for p, _, _ in table}) == len(table)
    for p, g, e in table:
        assert 2**29 < p < 2**30 and sympy.isprime(p)
        assert (p - 1) % 2**e == 0 and ((p - 1) >> e) % 2 == 1
        assert pow(g, (p - 1) // 2, p) == p - 1
    assert [e for _, _, e in table] == sorted((e for _, _, e in table), reverse=True)


def test_primes_for_bound_margin():
    # P > 4 B: the CRT's rounding margin |c| < P/4 (module docstring)
    for bound in (2**63, 3**500, 2**2012 - 1):
        primes = nw.primes_for(bound, 2**12)
        assert math.prod(primes) > 4 * bound
        assert math.prod(primes[:-1]) <= 4 * bound
    assert nw.primes_for(2**(30 * 300), 2**10) is None  # more than MAX_PRIMES
    assert nw.primes_for(2**600, 2**29) is None  # no prime admits 2^29 points but 2^29 + 1


def test_float64_bounds_of_the_matrix_products():
    # every term below 2^45, at most 255 terms: sums below 2^53 (IEEE 754 doubles hold every
    # integer up to 2^53 exactly; common practice, no source)
    assert nw.MAX_PRIMES * (2**30 - 1) * (2**15 - 1) + nw.MAX_PRIMES * (2**15 - 1) < 2**53
    assert nw.MAX_DIGITS * (2**15 - 1) * (2**30 - 1) < 2**53
    # the rounding of t: float error of sum y_i / p_i below 1/4 for 255 terms
    assert nw.MAX_PRIMES * 2.0**-52 + nw.MAX_PRIMES**2 * 2.0**-53 < 0.25
    primes = nw.primes_for(2**2000, 2**11)
    w, inv = nw.crt_matrix(primes)
    total = math.prod(primes)
    for i, p in enumerate(primes):  # the columns are the 15-bit digits of P / p_i and of -P
        assert sum(int(v) << (15 * j) for j, v in enumerate(w[:, i])) == total // p
        assert inv[i] == 1.0 / p
    assert sum(int(v) << (15 * j) for j, v in enumerate(w[:, -1])) == -total
    assert np.abs(w).max() < 2**15


def test_crt_extremes_against_python_ints(kernels):
    # the largest products the bound allows: all coefficients at +-(2^b - 1), where |c| = B
    for bits, n, sign in ((200, 7, "positive"), (1000, 33, "negative"), (2999, 5, "positive")):
        top = (1 << bits) - 1
        a = [top if sign == "positive" else -top] * n
        b = [top] * (n + 3)
        assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == schoolbook(a, b)


@pytest.mark.parametrize("seed", range(6))
def test_random_against_flint(kernels, seed):
    rng = random.Random(seed)
    for _ in range(6):
        bits_a, bits_b = rng.randint(200, 3000), rng.randint(200, 3000)
        n1 = rng.choice([1, 2, 3, rng.randint(1, 64), rng.randint(1, 700), 2**rng.randint(0, 12)])
        n2 = rng.choice([1, 5, rng.randint(1, 300), 2**rng.randint(0, 11) + 1])
        sign = rng.choice(["mixed", "mixed", "negative", "positive"])
        a, b = draw(rng, n1, bits_a, sign), draw(rng, n2, bits_b, "mixed")
        if rng.random() < 0.3:  # zeros, whole stretches of them
            start = rng.randrange(n1)
            stop = rng.randint(start, n1)
            a[start:stop] = [0] * (stop - start)
        if not any(a):
            a[0] = 1
        got = nw.convolve_wide(np.array(a, dtype=object), np.array(b, dtype=object),
                               bound_of(a, b))
        if got is None:  # beyond the engine's limits (primes or digits): nothing to check
            assert (nw.primes_for(bound_of(a, b), nw.transform_length(n1, n2)) is None
                    or max(bits_a, bits_b) > 15 * nw.MAX_DIGITS)
            continue
        assert got.tolist() == flint_product(a, b)


def test_small_cases_against_schoolbook(kernels):
    rng = random.Random(5)
    for n1 in (1, 2, 3, 8):
        for n2 in (1, 4, 9):
            a, b = draw(rng, n1, 300), draw(rng, n2, 700)
            assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == schoolbook(a, b)
    a = draw(rng, 20, 500)  # a square (one stream, one forward transform per prime)
    assert nw.convolve_wide(a, a, bound_of(a, a)).tolist() == schoolbook(a, a)
    assert nw.convolve_wide(a, a, bound_of(a, a), keep=7).tolist() == schoolbook(a, a)[:7]


@pytest.mark.parametrize("route", ["direct", "transforms"])
def test_short_products_both_routes_against_flint(kernels, monkeypatch, route):
    # the schoolbook route with the primes in SIMD lanes (uses_direct) and the transforms give
    # python-flint's fmpz_poly product on both sides of the crossover, squares and keep included
    monkeypatch.setattr(nw, "DIRECT_MAX_TERMS", 2**40 if route == "direct" else 0)
    rng = random.Random(21)
    for n1, n2, bits in ((1, 1, 300), (2, 1, 700), (3, 200, 1000), (16, 64, 1000), (64, 16, 999),
                         (13, 11, 3000), (64, 64, 1000), (100, 97, 200), (5, 5, 3500)):
        a, b = draw(rng, n1, bits), draw(rng, n2, bits)
        assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == flint_product(a, b)
        assert nw.convolve_wide(a, a, bound_of(a, a)).tolist() == flint_product(a, a)
        assert nw.convolve_wide(a, b, bound_of(a, b), keep=n1).tolist() == \
            flint_product(a, b)[:n1]


def test_direct_lanes_extreme_residues_against_python_ints(kernels):
    # every residue at p_i - 1 or at the largest sums the residue product allows (|r| near
    # 2^53): the most a uint64 lane takes between folds (FOLD_EVERY terms, a fold leaves it
    # below 2^62 + 2^32); each output checked against sum_i r_ai r_b(j-i) u_i mod p_i in
    # Python ints (u_i = (P/p_i)^-1 mod p_i, the CRT factor; common practice, no source)
    from polyconv.engines import _kernels_wide as kw

    assert kw.FOLD_EVERY * (2**30 - 1) ** 2 + 2**62 + 2**32 < 2**64
    primes = nw.primes_for(2**2500, 2**7)
    k = len(primes)
    total = math.prod(primes)
    p_arr, scale = nw.crt_scales(primes)
    inv = nw.crt_matrix(primes)[1]
    rng = np.random.default_rng(3)
    for n1, n2, kind in ((64, 64, "top"), (40, 25, "wide"), (1, 30, "wide"), (7, 7, "top")):
        if kind == "top":
            r = np.array([[p - 1 for p in primes]] * (n1 + n2), dtype=np.float64)
        else:
            r = rng.integers(-(2**53) + 1, 2**53, size=(n1 + n2, k)).astype(np.float64)
        yf = np.empty((k + 1, n1 + n2 - 1))
        kernels.lanes_direct(r, n1, False, p_arr, scale, inv, yf)
        for i, p in enumerate(primes):
            a = [int(v) % p for v in r[:n1, i]]
            b = [int(v) % p for v in r[n1:, i]]
            u = pow(total // p, -1, p)
            want = [v * u % p for v in schoolbook(a, b)]
            assert yf[i].tolist() == want
        quotient = [round(sum(int(yf[i, j]) / p for i, p in enumerate(primes)))
                    for j in range(n1 + n2 - 1)]
        assert yf[k].tolist() == quotient


def test_direct_route_checks_its_lanes_against_the_budget(kernels):
    # the direct route's own arrays (residue lanes, reduced sums: 12 (n1 + n2) + 8 count bytes
    # per lane) are in the estimate checked before anything is allocated
    from polyconv.numerics import budget

    rng = random.Random(23)
    a, b = draw(rng, 4000, 3000), draw(rng, 2, 3000)
    assert nw.uses_direct(len(a), len(b))
    primes = nw.primes_for(bound_of(a, b), nw.transform_length(len(a), len(b)))
    k, count, values = len(primes), len(a) + len(b) - 1, len(a) + len(b)
    rows = nw.crt_matrix(primes)[0].shape[0]
    others = 8.0 * ((k + 1) * count + 3 * k * values + rows * min(count, nw.CRT_CHUNK))
    lanes_bytes = (4.0 * values + 8.0 * count) * nw.lanes(k)
    with budget.using_budget(int(others + 0.5 * lanes_bytes)):  # refused for the lanes
        with pytest.raises(budget.MemoryBudgetError, match="wide NTT engine"):
            nw.convolve_wide(a, b, bound_of(a, b))
    with budget.using_budget(int(others + 1.01 * lanes_bytes)):  # granted: no tables needed
        assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == flint_product(a, b)


def test_long_transforms_per_prime(kernels, monkeypatch):
    # the per-prime route of transforms longer than STACKED_LENGTH, and CRT column chunks
    monkeypatch.setattr(nw, "STACKED_LENGTH", 2**6)
    monkeypatch.setattr(nw, "CRT_CHUNK", 100)
    rng = random.Random(9)
    a, b = draw(rng, 300, 900), draw(rng, 129, 1100)
    assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == flint_product(a, b)


def test_same_result_with_two_blas_threads(kernels, monkeypatch):
    # exact whatever the BLAS summation order (module docstring): 1 and 2 threads agree
    rng = random.Random(11)
    a, b = draw(rng, 700, 1000), draw(rng, 650, 1000)
    want = flint_product(a, b)
    for threads in (1, 2):
        monkeypatch.setattr(nw, "BLAS_THREADS", threads)
        assert nw.convolve_wide(a, b, bound_of(a, b)).tolist() == want


def test_two_threads_same_values(kernels):
    # the helper thread takes half the primes and half the CRT columns (separate streams)
    rng = random.Random(12)
    a, b = draw(rng, 900, 1200), draw(rng, 700, 800)
    got = nw.convolve_wide(a, b, bound_of(a, b), threads=2)
    assert got.tolist() == flint_product(a, b)
    assert nw.convolve_wide(a, a, bound_of(a, a), keep=1000, threads=2).tolist() == \
        flint_product(a, a)[:1000]


def test_blas_threads_restored():
    found = _blas._setter()
    if found is None:
        pytest.skip("no OpenBLAS in this process")
    before = found[1]()
    with _blas.blas_threads(1):
        assert found[1]() == 1
    assert found[1]() == before


def test_not_plain_ints_means_none(kernels):
    gmpy2 = pytest.importorskip("gmpy2")
    a = [gmpy2.mpz(3) ** 200] * 4
    assert nw.convolve_wide(a, [5**300] * 3, 4 * 3**200 * 5**300) is None
    assert nw.digit_matrix([True, 2**100]) is None


def test_through_convolve_forced_and_planned(kernels):
    rng = random.Random(3)
    a = np.array(draw(rng, 1024, 1000), dtype=object)
    b = np.array(draw(rng, 1000, 1000), dtype=object)
    want = flint_product(a.tolist(), b.tolist())
    plan = polyconv.plan(a, b, method="ntt-wide")
    assert plan.exact and plan.certificate == "construction"
    k = len(nw.primes_for(plan.setting("ntt_bound"), 2048))
    assert f"{k} primes" in plan.reason or f"{k} primes" in str(plan)
    assert polyconv.convolve(a, b, method="ntt-wide").tolist() == want
    assert polyconv.convolve(a, b).tolist() == want
    assert polyconv.plan(a, b).engine == "ntt-wide"  # measured: ~2x faster than Kronecker here


def test_refusals():
    small = np.arange(1, 100, dtype=np.int64)
    with pytest.raises(ValueError, match="ntt-wide"):
        polyconv.convolve(small, small, method="ntt-wide")  # outputs fit int64
    wide = np.array([1 << 4000] * 3, dtype=object)
    with pytest.raises(ValueError, match="ntt-wide"):
        polyconv.convolve(wide, wide, method="ntt-wide")  # digits beyond MAX_DIGITS


@pytest.mark.parametrize("n1, n2, bits1, bits2, square", [
    (64, 64, 1000, 1000, False), (64, 64, 1000, 1000, True), (33, 70, 1000, 20, False),
    (100, 9, 1500, 900, False), (64, 64, 999, 1001, False)])
def test_products_from_marshal_streams_equal_flint(kernels, n1, n2, bits1, bits2, square):
    # plain 1-D object arrays reach ntt-wide through their marshal streams (plain_object_pair
    # -> nw.convolve_streams): values against python-flint's fmpz_poly product.
    rng = random.Random(n1 * 7919 + bits1 + n2)
    a = draw(rng, n1, bits1)
    a[rng.randrange(n1)] = -(2**bits1 - 1)  # the widest value at the digit boundary
    b = a if square else draw(rng, n2, bits2)
    x = np.array(a, dtype=object)
    y = x if square else np.array(b, dtype=object)
    got = polyconv.convolve(x, y)
    assert got.dtype == object
    assert got.tolist() == flint_product(a, b)
    da = np.frombuffer(marshal.dumps(a, 2), dtype=np.uint8)
    db = da if square else np.frombuffer(marshal.dumps(b, 2), dtype=np.uint8)
    direct = nw.convolve_streams(da, db, len(a), len(b), max(bits1, bits2), bound_of(a, b))
    assert direct is not None and direct.tolist() == flint_product(a, b)
