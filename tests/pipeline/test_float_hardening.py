"""Regression tests for issue 16 on the float path: rigorous bounds at extreme magnitudes, and
overflow giving +-inf as numpy.convolve does.

Sources: exact rational products (fractions.Fraction, the true convolution of the float inputs),
numpy.convolve.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

import polyconv


def exact_product(a, b) -> list[Fraction]:
    """The true convolution of the float inputs, in exact rational arithmetic."""
    fa, fb = [Fraction(float(v)) for v in a], [Fraction(float(v)) for v in b]
    out = [Fraction(0)] * (len(fa) + len(fb) - 1)
    for i, x in enumerate(fa):
        for j, y in enumerate(fb):
            out[i + j] += x * y
    return out


CASES = {
    "issue 16 example": ([1e-173], [1.0, 0.0, 1.0]),
    "tiny both": (np.full(40, 1e-160) * np.linspace(1, 2, 40), np.full(30, 3e-150)),
    "subnormal entries": (np.array([5e-324, 1e-320, 2.5e-310] * 20), np.linspace(-1, 1, 33)),
    "squares overflow": (np.full(50, 1e200), np.linspace(-1e100, 1e100, 41)),
    "mixed scales": (np.r_[np.full(30, 1e-170), 1.0], np.r_[1.0, np.full(40, 1e-200)]),
}


@pytest.mark.parametrize("method", ["auto", "direct", "fft"])
@pytest.mark.parametrize("name", sorted(CASES))
def test_error_bound_covers_the_true_error_at_extreme_magnitudes(name, method):
    # reference: exact rational convolution (fractions.Fraction) of the same float inputs
    a, b = CASES[name]
    the_plan = polyconv.plan(a, b, method=method)
    bound = polyconv.error_bound(a, b, the_plan)
    got = polyconv.convolve(a, b, method=method)
    exact = exact_product(a, b)
    worst = max(abs(Fraction(float(g)) - e) for g, e in zip(got, exact, strict=True))
    assert np.isfinite(bound) and Fraction(bound) >= worst, (bound, float(worst))
    assert bound > 0  # a zero bound would claim an exact float product


def test_fft_overflow_gives_signed_inf_like_numpy():
    # reference: numpy.convolve (every coefficient overflows float64 to +-inf)
    a = np.full(64, 1e300)
    b = np.full(64, 1e10)
    for sign in (1, -1):
        want = np.convolve(a, sign * b)
        got = polyconv.convolve(a, sign * b, method="fft")
        assert np.array_equal(got, want)
    x = np.full((3, 40), 1e300)
    x[1] = 1.0  # a finite row in the same batch stays as numpy computes it, within the bound
    got = polyconv.convolve(x, np.full(20, 1e10), method="fft")
    assert np.all(np.isinf(got[0])) and np.all(got[0] > 0) and np.all(np.isinf(got[2]))
    np.testing.assert_allclose(got[1], np.convolve(x[1], np.full(20, 1e10)), rtol=1e-12)
