"""Extended-precision routes and componentwise enclosures (issue 11, bounds within 10-100x).

References outside the project: exact enumeration with fractions.Fraction (convolutions,
binomial and Poisson compounds as weighted sums of convolution powers), mpmath at 40-50 digits
(roots of unity, Panjer's recursion, Poisson weights), scipy.stats closed forms (binomial pmf for
sums of Bernoulli variables, products of cdfs for maxima).  Each check names its source.
"""

import math
import warnings
from fractions import Fraction

import mpmath as mp
import numpy as np
import pytest
from scipy import fft as sfft
from scipy import stats

from polyconv.dist import Lattice, all_of, compound, first_of, long_route, mixture
from polyconv.dist.compound_tail import tail_moment_bound
from polyconv.dist.counts import classify
from polyconv.dist.enclosure import Enclosure, EnclosureSums
from polyconv.dist.panjer_long import long_recursion

U = 2.0 ** -53
UL = float(np.finfo(np.longdouble).eps) / 2

pytestmark = pytest.mark.skipif(not long_route.available(), reason="longdouble is float64 here")


def as_mp(x) -> mp.mpf:
    """A longdouble (or float) as an exact mpmath number."""
    m, e = np.frexp(np.longdouble(x))
    return mp.mpf(int(np.ldexp(m, 64))) * mp.mpf(2) ** (int(e) - 64)


def exact_conv(a: list[Fraction], b: list[Fraction]) -> list[Fraction]:
    out = [Fraction(0)] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def dyadic_pmf(parts: list[int]) -> np.ndarray:
    total = sum(parts)
    k = 1 << total.bit_length()
    parts = [parts[0] + k - total] + parts[1:]
    return np.array([v / k for v in parts])


def test_longdouble_twiddles_within_the_assumed_error():
    # source: mpmath roots of unity exp(-2 pi i k / N) at 40 digits; the complex transform of
    # a unit impulse at index 1 returns the roots as the transform builds them (assumption
    # TWIDDLE_ERROR_LONG of polyconv.dist.long_route)
    mp.mp.dps = 40
    worst = 0.0
    for n in (1000, 4096, 4620, 19683):
        e = np.zeros(n, dtype=np.clongdouble)
        e[1] = 1
        w = sfft.fft(e)
        for k in range(0, n, max(1, n // 200)):
            ref = mp.expjpi(-2 * mp.mpf(k) / n)
            worst = max(worst, float(abs(mp.mpc(as_mp(w[k].real), as_mp(w[k].imag)) - ref)))
    assert worst <= long_route.TWIDDLE_ERROR_LONG
    assert worst > 0  # the check measures something (the roots are not all exact)


def test_long_convolution_enclosure_contains_the_exact_product():
    # source: exact product by fractions.Fraction; radius gamma_m g (Higham 3.1)
    rng = np.random.default_rng(3)
    a, b = rng.random(40), rng.random(25)
    enc = long_route.convolve(a, b)
    exact = exact_conv([Fraction(float(v)) for v in a], [Fraction(float(v)) for v in b])
    mp.mp.dps = 50
    for k, q in enumerate(exact):
        err = abs(as_mp(enc.center[k]) - mp.mpf(q.numerator) / q.denominator)
        assert err <= enc.radius[k]
    assert np.all(enc.radius <= 30 * UL * enc.center.astype(float) + 1e-300)  # tight


def test_long_power_of_a_bernoulli_is_the_binomial_pmf():
    # source: a sum of n Bernoulli(p) is Binomial(n, p) (scipy.stats.binom.pmf); p dyadic
    p = 0.375
    enc = long_route.power(np.array([1 - p, p]), 9)
    ref = stats.binom(9, p).pmf(np.arange(10))
    np.testing.assert_allclose(enc.center.astype(float), ref, rtol=1e-14)  # scipy's own ulps
    exact = [Fraction(math.comb(9, k)) * Fraction(3, 8) ** k * Fraction(5, 8) ** (9 - k)
             for k in range(10)]  # source: binomial formula, exact
    mp.mp.dps = 50
    for k, q in enumerate(exact):
        assert abs(as_mp(enc.center[k]) - mp.mpf(q.numerator) / q.denominator) <= enc.radius[k]


def exact_poisson_compound(lam: int, f: list[Fraction], size: int, terms: int = 60):
    """sum_n e^-lam lam^n / n! f^{*n} on size points (mpmath weights at 50 digits, exact
    convolution powers); the Poisson tail beyond ``terms`` is below 1e-40 for lam <= 4."""
    mp.mp.dps = 50
    g = [mp.mpf(0)] * size
    conv = [Fraction(1)]
    for n in range(terms):
        w = mp.exp(-lam) * mp.mpf(lam) ** n / mp.factorial(n)
        for k, v in enumerate(conv[:size]):
            g[k] += w * mp.mpf(v.numerator) / v.denominator
        conv = exact_conv(conv, f)[:size]
    return g


@pytest.mark.parametrize("method", ["fft", "recursion"])
def test_compound_enclosure_contains_the_exact_model_and_is_tight(method):
    # source: exact Poisson compound by enumeration (exact_poisson_compound); the TVaR formula
    # of Acerbi & Tasche (2002) at the lattice's own points
    f = dyadic_pmf([3, 5, 9, 1, 6])
    lam, size = 3, 120
    s = compound(stats.poisson(float(lam)), Lattice(f), size=size, method=method)
    enc = s._cache["enclosure"]
    ref = exact_poisson_compound(lam, [Fraction(float(v)) for v in f], size)
    mp.mp.dps = 50
    for k in range(size):
        assert abs(as_mp(enc.center[k]) - ref[k]) <= enc.radius[k] + 1e-45
    br = s._br()
    lo, hi = br.cdf_range(np.arange(size))
    cum = mp.mpf(0)
    worst_ratio = 0.0
    for k in range(size):
        cum += ref[k]
        assert lo[k] <= cum <= hi[k]
        err = max(float(abs(mp.mpf(br.cum[k]) - cum)), U * float(cum))
        worst_ratio = max(worst_ratio, max(hi[k] - br.cum[k], br.cum[k] - lo[k]) / err)
    assert worst_ratio < 100  # reached: a few units (the campaign goal is 100)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tv = s.bounded("tvar", 0.99)
    q = int(round(s.value_at_risk(0.99)))
    e_s = lam * sum(k * float(v) for k, v in enumerate(f))  # Wald: E[S] = E[N] E[X]
    below = sum((q - k) * ref[k] for k in range(q + 1))
    tref = q + (mp.mpf(e_s) - q + below) / (1 - mp.mpf(0.99))  # E[(S-q)+] = E[S] - q + E[(q-S)+]
    assert tv.low <= tref <= tv.high
    half = max(tv.high - tv.value, tv.value - tv.low)
    assert half / max(float(abs(mp.mpf(tv.value) - tref)), U * float(tref)) < 10


def test_binomial_recursion_is_exactly_zero_beyond_the_support():
    # source: N <= m and X <= top give S <= m top (by hand); exact enumeration below it
    f = dyadic_pmf([1, 4, 2, 7])
    s = compound(stats.binom(5, 0.25), Lattice(f), size=40, method="recursion")
    assert np.all(np.asarray(s.pmf)[16:] == 0.0)
    exact = [Fraction(0)] * 40
    conv = [Fraction(1)]
    for n in range(6):
        w = math.comb(5, n) * Fraction(1, 4) ** n * Fraction(3, 4) ** (5 - n)
        for k, v in enumerate(conv):
            exact[k] += w * v
        conv = exact_conv(conv, [Fraction(float(v)) for v in f])
    for k in range(40):
        lo, hi = s._br().cdf_range(np.array(k))
        c = float(sum(exact[: k + 1]))
        assert lo - 1e-300 <= c <= hi + 1e-300
    assert s.errors.l1 < 1e-15  # was the ledger's saturated 2.0 for unstable binomials


def test_long_recursion_nbinom_contains_mpmath_panjer():
    # source: Panjer's recursion in mpmath at 50 digits, a = q, b = (r - 1) q, g0 = (p/(1-q f0))^r
    f = dyadic_pmf([2, 5, 3, 8, 1])
    r, p = 2.5, 0.5
    law = classify(stats.nbinom(r, p))
    enc = long_recursion(law, f, 60)
    mp.mp.dps = 50
    fm = [mp.mpf(float(v)) for v in f]
    q = 1 - mp.mpf(p)
    a, b = q, (mp.mpf(r) - 1) * q
    g = [(mp.mpf(p) / (1 - q * fm[0])) ** r]
    for x in range(1, 60):
        acc = sum((a + b * y / x) * fm[y] * g[x - y] for y in range(1, min(x, 4) + 1))
        g.append(acc / (1 - a * fm[0]))
    for k in range(60):
        assert abs(as_mp(enc.center[k]) - g[k]) <= enc.radius[k]
    assert float(np.max(enc.radius / np.maximum(enc.center.astype(float), 1e-300))) < 1e-16


def test_enclosure_sums_bound_signed_sums():
    # source: triangle inequality on an explicit example (by hand): pmf = center + d exactly
    center = np.array([0.5, 0.25, 0.25], dtype=np.longdouble)
    pmf = np.array([0.5 + 2 * U, 0.25 - 2 * U, 0.25])
    sums = EnclosureSums(pmf, Enclosure(center, np.array([1e-20, 1e-20, 1e-20])))
    assert sums.cum[1] < 1e-19 + 4 * UL  # the two roundings cancel in the cumulative sum
    assert sums.profile[0] >= 2 * U
    assert sums.tail[1] >= 2 * U - 1e-30


def test_exact_all_of_first_of_mixture_match_scipy_products():
    # source: P(max <= k) = prod F_i(k), P(min > k) = prod S_i(k) (scipy.stats.randint cdfs)
    a = Lattice(np.full(8, 0.125))
    b = Lattice(np.full(4, 0.25), origin=2.0)
    k = np.arange(0, 8)
    fa, fb = stats.randint(0, 8).cdf(k), stats.randint(2, 6).cdf(k)
    mx = all_of(a, b)
    np.testing.assert_array_equal(np.cumsum(mx.pmf), (fa * fb)[: len(mx)])  # exact dyadics
    mn = first_of(a, b)
    s_ref = (1 - fa) * (1 - fb)
    assert np.allclose(1 - np.cumsum(mn.pmf), s_ref[: len(mn)], atol=1e-16, rtol=0)
    mix = mixture([0.75, 0.25], [a, b])
    ref = 0.75 * stats.randint(0, 8).pmf(k) + 0.25 * stats.randint(2, 6).pmf(k)
    np.testing.assert_array_equal(mix.pmf, ref)
    for lat in (mx, mn, mix):
        assert lat.errors.l1 <= 8 * UL  # exact values rounded once


def test_tail_moment_bound_above_the_exact_tail_moment():
    # source: E[S 1{S >= s}] = E[S] - sum_{k < s} k g_k, E[S] = E[N] E[X] (Wald), g exact
    f = dyadic_pmf([2, 6, 1, 3])
    lam, size = 2, 30
    ref = exact_poisson_compound(lam, [Fraction(float(v)) for v in f], size)
    e_s = lam * sum(k * float(v) for k, v in enumerate(f))
    tail = mp.mpf(e_s) - sum(k * ref[k] for k in range(size))
    bound = tail_moment_bound(classify(stats.poisson(float(lam))), f, 1.0, size)
    assert tail <= bound < 1e6 * float(tail) + 1e-300


def test_wald_tail_moment_in_longdouble_above_the_exact_tail_moment():
    # source: E[S 1{S >= s}] = E[S] - sum_{k < s} k g_k with E[S] = E[N] E[X] (Wald), g by exact
    # enumeration; the longdouble bound is within a few 1e-17 of it (the float one: ~8 u E[S])
    f = dyadic_pmf([4, 3, 6, 2, 5])
    lam, size = 3, 40
    s = compound(stats.poisson(float(lam)), Lattice(f), size=size, method="fft")
    ref = exact_poisson_compound(lam, [Fraction(float(v)) for v in f], size)
    e_s = lam * sum(k * Fraction(float(v)) for k, v in enumerate(f))
    tail = mp.mpf(e_s.numerator) / e_s.denominator - sum(k * ref[k] for k in range(size))
    from polyconv.dist.compound_tail import wald_tail_moment
    ramp = float(EnclosureSums(np.asarray(s.pmf), s._cache["enclosure"]).ramp[0])
    bound = wald_tail_moment(classify(stats.poisson(float(lam))), f, np.asarray(s.pmf), ramp, 1.0)
    assert tail <= bound <= float(tail) + 1e-15  # the float route's floor: 8 u E[S] ~ 3e-14
    assert s.errors.truncated_moment <= bound * (1 + 1e-12)
