"""Certified ranges of small exact models (issue 11): contained references and how tight they are.

References: exact enumeration with fractions.Fraction (the binomial compound sum
``sum_n C(m, n) p^n (1 - p)^(m - n) f^{*n}``), Wald's identity for the mean, the TVaR formula of
Acerbi & Tasche (2002).  Each check names its source beside it.
"""

import math
from fractions import Fraction

import pytest
from scipy import stats

from polyconv.dist import Bounded, Lattice, compound

U = 2.0 ** -53


def ratio(b: Bounded, ref: float) -> float:
    """Half-width of the certified range over the observed error (floored at one roundoff)."""
    half = max(b.high - b.value, b.value - b.low)
    return half / max(abs(b.value - ref), U * abs(ref), 1e-300)


def exact_binomial_compound(m: int, p: Fraction, f: list[Fraction], size: int) -> list[Fraction]:
    """sum_n C(m, n) p^n (1 - p)^(m - n) f^{*n}, exactly (fractions.Fraction enumeration)."""
    g = [Fraction(0)] * size
    conv = [Fraction(1)]
    for n in range(m + 1):
        w = math.comb(m, n) * p ** n * (1 - p) ** (m - n)
        for k, v in enumerate(conv[:size]):
            g[k] += w * v
        new = [Fraction(0)] * (len(conv) + len(f) - 1)
        for i, a in enumerate(conv):
            for j, b in enumerate(f):
                new[i + j] += a * b
        conv = new
    return g


@pytest.mark.parametrize("method", ["fft", "recursion"])
def test_small_compound_against_exact_fractions(method):
    f = [Fraction(1, 8), Fraction(3, 8), Fraction(1, 4), Fraction(0), Fraction(1, 4)]
    m, p, size = 6, Fraction(1, 4), 30
    g = exact_binomial_compound(m, p, f, size)
    s = compound(stats.binom(m, 0.25), Lattice([float(v) for v in f]), method=method, size=size)
    cum = Fraction(0)
    mean = m * p * sum(k * v for k, v in enumerate(f))  # Wald: E[S] = E[N] E[X]
    for k in range(size):
        cum += g[k]
        b = s.bounded("cdf", float(k))
        assert Fraction(b.low) <= cum <= Fraction(b.high)
        # stop-loss E[(S - k)+] = E[S] - k + sum_{j <= k} (k - j) g_j (exact)
        sl = mean - k + sum((k - j) * g[j] for j in range(k + 1))
        bs = s.bounded("stop_loss", float(k))
        assert Fraction(bs.low) <= sl <= Fraction(bs.high)
    for level in (0.5, 0.9, 0.99):
        qk = next(k for k in range(size) if sum(g[: k + 1]) >= Fraction(level))
        lo, hi = s.quantile_bracket(level)
        assert lo <= qk <= hi and s.cdf(s.quantile(level)) >= level


# bound / observed ratios reached (measured on this model, 2026-12-03): cdf (largest
# half-width over the largest error) recursion 13.5, fft 276; TVaR recursion 65-313, fft
# 1470-1840 (the transform carries Higham's worst-case FFT constants); asserted with ~3x room
LOOSENESS = {"recursion": (40.0, 1000.0), "fft": (1000.0, 6000.0)}


@pytest.mark.parametrize("method", ["fft", "recursion"])
def test_small_compound_bounds_are_not_absurdly_loose(method):
    f = [Fraction(1, 8), Fraction(3, 8), Fraction(1, 4), Fraction(0), Fraction(1, 4)]
    m, p, size = 6, Fraction(1, 4), 30
    g = exact_binomial_compound(m, p, f, size)  # exact reference (fractions.Fraction)
    s = compound(stats.binom(m, 0.25), Lattice([float(v) for v in f]), method=method, size=size)
    mean = m * p * sum(k * v for k, v in enumerate(f))  # Wald: E[S] = E[N] E[X]
    cum, half, err = Fraction(0), 0.0, 0.0
    for k in range(size):
        cum += g[k]
        b = s.bounded("cdf", float(k))
        half = max(half, b.high - b.value, b.value - b.low)
        err = max(err, abs(float(Fraction(b.value) - cum)), U * float(cum))
    cdf_room, tvar_room = LOOSENESS[method]
    assert half / err <= cdf_room
    for level in (0.5, 0.9, 0.99):
        qk = next(k for k in range(size) if sum(g[: k + 1]) >= Fraction(level))
        # TVaR_p = VaR + E[(S - VaR)+] / (1 - p) (Acerbi & Tasche 2002), exact in fractions
        sl = mean - qk + sum((qk - j) * g[j] for j in range(qk + 1))
        want = qk + sl / (1 - Fraction(level))
        tv = s.bounded("tvar", level)
        assert not tv.refused and Fraction(tv.low) <= want <= Fraction(tv.high)
        assert ratio(tv, float(want)) <= tvar_room


def test_exact_lattice_tvar_range_is_a_few_roundoffs():
    # an exact dyadic pmf: the TVaR range is the rounding of the sums alone (longdouble, one
    # outward rounding), measured 1.4-2 ulps of the half-width over the observed error
    pmf = [Fraction(3, 16), Fraction(5, 16), Fraction(1, 8), Fraction(1, 4), Fraction(1, 8)]
    x = Lattice([float(v) for v in pmf], 0.1, 0.3)
    for level in (0.5, 0.9, 0.99):
        k = next(i for i in range(len(pmf)) if sum(pmf[: i + 1]) >= Fraction(level))
        h, o = Fraction(0.1), Fraction(0.3)  # the float step and origin, exactly
        sl = sum((j - k) * h * v for j, v in enumerate(pmf) if j > k)
        want = o + k * h + sl / (1 - Fraction(level))  # Acerbi & Tasche 2002, exact
        tv = x.bounded("tvar", level)
        assert Fraction(tv.low) <= want <= Fraction(tv.high)
        assert ratio(tv, float(want)) <= 4.0


def test_long_lattice_stop_loss_and_quantile_without_whole_arrays():
    # a geometric law on {0, 1, ...}, P(K = k) = (1 - q) q^k: E[(K - d)+] = q^(d + 1) / (1 - q)
    # and the p-quantile is ceil(log(1 - p) / log q) - 1 (closed forms, common practice, no
    # source); 30000 points, so one stop-loss is read from sums above d and one quantile from
    # a window of the cdf bounds (risk.WINDOW_MIN), the same ranges as the whole arrays
    import numpy as np

    from polyconv.dist import ErrorLedger, risk

    n, q, one_q = 30000, math.exp(-1 / 2000), -math.expm1(-1 / 2000)
    pmf = one_q * np.exp(-np.arange(n) / 2000)
    # each entry within (3 + k / 2000) roundoffs of (1 - q) q^k (expm1, exp, product and the
    # rounded exponent), so within 8u in L1; the mass beyond the grid is q^n, its first moment
    # q^n (n + q / (1 - q))
    tail = q ** n
    led = ErrorLedger(8 * U * float(pmf.max()), 8 * U, tail, n,
                      tail * (n + q / one_q) * (1 + 1e-12), 8 * U)
    x = Lattice(pmf, errors=led)
    assert n >= risk.WINDOW_MIN
    for d in (0.0, 1000.0, 25000.0):
        b = x.bounded("stop_loss", d)
        want = math.exp(-(d + 1) / 2000) / one_q
        # width: the truncated part's position (mass q^n beyond the grid whose mean excess is
        # q / (1 - q), memoryless) plus the on-grid error, measured equal to that within 1e-3
        allowance = tail * q / one_q
        assert b.low <= want <= b.high and b.high - b.low <= 1.01 * allowance + 1e-9 * want
        whole = risk.Bracketer(x.pmf, 1.0, 0.0, x.errors)
        _ = whole.t  # builds the tail arrays: the array route
        lo, hi = whole.stop_loss_range(np.asarray(d))
        assert (b.high - b.low) <= 1.01 * (hi - lo)
    for p in (0.5, 0.99, 0.999):
        want = math.ceil(math.log(1 - p) / math.log(q)) - 1
        lo, hi = x.quantile_bracket(p)
        assert lo <= want <= hi
        whole = risk.Bracketer(x.pmf, 1.0, 0.0, x.errors)
        _ = whole.F_high
        assert tuple(int(v) for v in whole.quantile_range(np.asarray(p))) == (int(lo), int(hi))


def test_stop_loss_range_holds_at_a_shifted_float_origin():
    # source: exact sum over the lattice's own points origin + step k (fractions.Fraction of
    # the floats): -0.3 + 3 * 0.1 is 2.8e-17 exactly, 5.6e-17 in float (cancellation)
    pmf = [0.02813720703125, 0.05718994140625, 0.0147705078125, 0.785400390625,
           0.0584716796875, 0.0467529296875, 0.00927734375]
    lat = Lattice(pmf, 0.1) + (-0.3)
    o, h = Fraction(lat.origin), Fraction(lat.step)
    for d in (0.0, 0.1, -0.2):
        ref = sum(max(o + k * h - Fraction(d), 0) * Fraction(p) for k, p in enumerate(pmf))
        b = lat.bounded("stop_loss", d)
        assert Fraction(b.low) <= ref <= Fraction(b.high)
        assert ratio(b, float(ref)) < 100  # reached: a few units
