"""Algebraic properties of convolution, checked with hypothesis.

Each property is a textbook identity of the convolution product (commutativity, bilinearity,
the unit impulse as identity, output length n1 + n2 - 1, shift equivariance); common practice,
no source.  Floats are compared with a tolerance scaled by the operands' magnitudes.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

import polyconv

finite = st.floats(min_value=-1e3, max_value=1e3, allow_nan=False, allow_infinity=False)
seqs = arrays(np.float64, st.integers(1, 300), elements=finite)
methods = st.sampled_from(["auto", "direct", "fft"])


def _scale(a, b):
    return 1e-9 * (1.0 + np.abs(a).sum() * np.abs(b).max())


@settings(max_examples=60, deadline=None)
@given(seqs, seqs, methods)
def test_commutative(a, b, method):
    np.testing.assert_allclose(polyconv.convolve(a, b, method=method),
                               polyconv.convolve(b, a, method=method), atol=_scale(a, b))


@settings(max_examples=60, deadline=None)
@given(seqs, st.integers(1, 200), finite, finite, methods)
def test_linear_in_first_argument(a, n, s, t, method):
    rng = np.random.default_rng(n)
    b = rng.standard_normal(a.size)
    k = rng.standard_normal(n)
    left = polyconv.convolve(s * a + t * b, k, method=method)
    right = s * polyconv.convolve(a, k, method=method) + t * polyconv.convolve(b, k, method=method)
    tol = 1e-9 * (1 + (abs(s) * np.abs(a).sum() + abs(t) * np.abs(b).sum()) * np.abs(k).max())
    np.testing.assert_allclose(left, right, atol=tol)


@settings(max_examples=60, deadline=None)
@given(seqs, st.integers(0, 50), methods)
def test_shifted_delta_shifts(a, shift, method):
    delta = np.zeros(shift + 1)
    delta[shift] = 1.0
    got = polyconv.convolve(a, delta, method=method)
    assert got.shape == (a.size + shift,)
    np.testing.assert_allclose(got[shift:], a, atol=_scale(a, delta))
    np.testing.assert_allclose(got[:shift], 0.0, atol=_scale(a, delta))


@settings(max_examples=60, deadline=None)
@given(seqs, seqs, st.integers(0, 20))
def test_output_length_and_shift_equivariance(a, b, shift):
    base = polyconv.convolve(a, b)
    assert base.shape == (a.size + b.size - 1,)
    moved = polyconv.convolve(np.concatenate([np.zeros(shift), a]), b)
    np.testing.assert_allclose(moved[shift:], base, atol=_scale(a, b))


@settings(max_examples=40, deadline=None)
@given(seqs, seqs)
def test_mode_lengths(a, b):
    n1, n2 = a.size, b.size
    assert polyconv.convolve(a, b, mode="same").shape == (max(n1, n2),)
    assert polyconv.convolve(a, b, mode="valid").shape == (max(n1, n2) - min(n1, n2) + 1,)
