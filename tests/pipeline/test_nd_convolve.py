"""convolve / plan / error_bound over several axes (axes=) against scipy, numpy and python-flint."""

from __future__ import annotations

import math

import flint
import numpy as np
import pytest
import scipy.signal as ss

import polyconv
from polyconv.numerics.budget import MemoryBudgetError, using_budget

RNG = np.random.default_rng(20261203)
METHODS = ("auto", "direct", "fft", "overlap-add")


def _close(out, ref, scale):
    assert out.shape == ref.shape
    np.testing.assert_allclose(out, ref, rtol=0, atol=1e-12 * scale)


@pytest.mark.parametrize("mode", ["full", "same", "valid"])
@pytest.mark.parametrize("method", METHODS)
def test_2d_floats_against_scipy(mode, method):
    a = RNG.standard_normal((37, 29))
    b = RNG.standard_normal((6, 5))
    out = polyconv.convolve(a, b, axes=(0, 1), mode=mode, method=method)
    # reference: scipy.signal.fftconvolve with axes= (a is larger along each axis, so scipy's
    # "same"/"valid" coincide with numpy.convolve's per-axis definitions)
    _close(out, ss.fftconvolve(a, b, mode=mode, axes=(0, 1)), 30)
    # and scipy's direct summation
    _close(out, ss.convolve(a, b, mode=mode, method="direct"), 30)


@pytest.mark.parametrize("mode", ["full", "same", "valid"])
def test_3d_axes_subset_with_batch_broadcast(mode):
    a = RNG.standard_normal((9, 3, 11, 4))
    b = RNG.standard_normal((4, 1, 3, 2))
    for method in METHODS:
        out = polyconv.convolve(a, b, axes=(0, 2, 3), mode=mode, method=method)
        # reference: scipy.signal.fftconvolve over the same axes (axis 1 broadcast)
        ref = ss.fftconvolve(a, b, mode=mode, axes=(0, 2, 3))
        _close(out, ref, 100)


def test_axes_order_and_negative_axes():
    a = RNG.standard_normal((12, 7, 10))
    b = RNG.standard_normal((3, 7, 4))
    out = polyconv.convolve(a, b, axes=(-1, 0))
    _close(out, ss.fftconvolve(a, b, axes=(0, 2)), 30)  # scipy.signal.fftconvolve


def test_per_axis_modes_against_separable_numpy():
    # a rank-one kernel u v^T: the 2-D product is numpy.convolve with u down the columns, then
    # with v along the rows, each in its own mode (separability; common practice, no source)
    a = RNG.standard_normal((20, 15))
    u, v = RNG.standard_normal(4), RNG.standard_normal(6)
    out = polyconv.convolve(a, np.outer(u, v), axes=(0, 1), mode=("valid", "same"))
    step = np.apply_along_axis(lambda col: np.convolve(col, u, mode="valid"), 0, a)
    ref = np.apply_along_axis(lambda row: np.convolve(row, v, mode="same"), 1, step)
    _close(out, ref, 30)


def test_complex_and_float32():
    a = RNG.standard_normal((16, 9)) + 1j * RNG.standard_normal((16, 9))
    b = RNG.standard_normal((5, 4)) - 1j * RNG.standard_normal((5, 4))
    for method in METHODS:
        out = polyconv.convolve(a, b, axes=(0, 1), method=method)
        _close(out, ss.fftconvolve(a, b), 30)  # scipy.signal.fftconvolve
    a32, b32 = a.real.astype(np.float32), b.real.astype(np.float32)
    out = polyconv.convolve(a32, b32, axes=(0, 1), method="fft")
    assert out.dtype == np.float32
    np.testing.assert_allclose(out, ss.convolve(a.real, b.real, method="direct"), atol=1e-4)


def test_long_operand_overlap_add_and_choice():
    a = RNG.standard_normal((4000, 8))
    b = RNG.standard_normal((40, 8))
    plan = polyconv.plan(a, b, axes=(0, 1), method="overlap-add")
    assert plan.block_axis_user == 0 and plan.block_length >= 39
    out = polyconv.convolve(a, b, axes=(0, 1), method="overlap-add", mode="same")
    _close(out, ss.oaconvolve(a, b, mode="same", axes=(0, 1)), 100)  # scipy.signal.oaconvolve
    with pytest.raises(ValueError, match="overlap-add"):
        polyconv.plan(np.ones((8, 8)), np.ones((7, 7)), axes=(0, 1), method="overlap-add")


def test_small_kernel_is_direct_and_plan_names_axes():
    plan = polyconv.plan(np.ones((300, 300)), np.ones((2, 2)), axes=(0, 1))
    # 4 shift-and-add passes over 90,000 entries against a 301 x 301 transform: common
    # practice that direct wins for a 2 x 2 kernel (no source)
    assert plan.engine == "direct"
    assert "axes (0, 1)" in plan.reason and "direct" in str(plan)
    big = polyconv.plan(np.ones((300, 300)), np.ones((64, 64)), axes=(0, 1))
    assert big.engine in ("fft", "overlap-add") and "transform" in big.reason


def test_error_bound_holds_and_is_tight_enough():
    a = RNG.integers(-1000, 1000, (60, 50)).astype(float)
    b = RNG.integers(-1000, 1000, (30, 20)).astype(float)
    exact = ss.convolve2d(a.astype(np.int64), b.astype(np.int64))  # exact int64 sums (scipy)
    for method in ("fft", "overlap-add", "direct"):
        if method == "overlap-add":
            a2 = RNG.integers(-1000, 1000, (400, 20)).astype(float)
            exact2 = ss.convolve2d(a2.astype(np.int64), b.astype(np.int64))
            x, ref = a2, exact2
        else:
            x, ref = a, exact
        plan = polyconv.plan(x, b, axes=(0, 1), method=method)
        bound = polyconv.error_bound(x, b, plan)
        assert bound == plan.error_bound
        err = np.max(np.abs(polyconv.convolve(x, b, axes=(0, 1), method=method) - ref))
        assert err <= bound
        # Percival's bound at log2 P levels: at most ||a|| ||b|| times a few hundred eps
        norms = np.linalg.norm(x) * np.linalg.norm(b)
        assert bound < 1e-12 * norms
    assert polyconv.error_bound(a.astype(int), b.astype(int), axes=(0, 1)) == 0.0


def test_nonfinite_inputs_like_direct_summation():
    a = RNG.standard_normal((20, 18))
    b = RNG.standard_normal((5, 4))
    a[3, 7] = np.nan
    a[15, 2] = np.inf
    ref = ss.convolve(a, b, method="direct")  # scipy's direct sum propagates NaN/inf
    for method in ("fft", "overlap-add", "direct"):
        out = polyconv.convolve(a, b, axes=(0, 1), method=method)
        assert np.array_equal(np.isfinite(out), np.isfinite(ref))
        ok = np.isfinite(ref)
        np.testing.assert_allclose(out[ok], ref[ok], atol=1e-12 * 30)


def test_overflowing_finite_product_gives_inf_not_nan():
    a = np.full((10, 10), 1e300)
    b = np.full((3, 3), 1e10)
    out = polyconv.convolve(a, b, axes=(0, 1), method="fft")
    assert np.all(np.isposinf(out))  # each output is >= 1e310 > max float (IEEE 754)


def test_exact_integers_against_fmpz_mpoly():
    ctx = flint.fmpz_mpoly_ctx.get(("x", "y"), "lex")
    a = RNG.integers(-50, 50, (13, 9))
    b = RNG.integers(-50, 50, (7, 11))

    def poly(arr):
        return ctx.from_dict({(int(i), int(j)): int(arr[i, j])
                              for i, j in zip(*np.nonzero(arr), strict=True)})

    prod = (poly(a) * poly(b)).to_dict()  # python-flint fmpz_mpoly product
    ref = np.zeros((19, 19), dtype=object)
    for (i, j), c in prod.items():
        ref[i, j] = int(c)
    out = polyconv.convolve(a, b, axes=(0, 1))
    assert out.dtype == np.int64 and np.array_equal(out.astype(object), ref)
    plan = polyconv.plan(a, b, axes=(0, 1))
    assert plan.exact and plan.engine == "kronecker-nd" and "Kronecker" in plan.reason
    # modes cut the exact full product as numpy.convolve's windows per axis (scipy.signal's
    # convolve2d on int64 agrees for the larger-first operand)
    big = RNG.integers(-50, 50, (20, 17))
    for mode in ("same", "valid"):
        assert np.array_equal(polyconv.convolve(big, b, axes=(0, 1), mode=mode),
                              ss.convolve2d(big, b, mode=mode))


def test_big_integers_against_fmpz_mpoly():
    ctx = flint.fmpz_mpoly_ctx.get(("x", "y", "z"), "lex")
    a = np.empty((3, 4, 2), dtype=object)
    b = np.empty((2, 3, 3), dtype=object)
    for arr in (a, b):
        for idx in np.ndindex(arr.shape):
            arr[idx] = int(RNG.integers(-2**62, 2**62)) * 2**70 + int(RNG.integers(0, 2**40))

    def poly(arr):
        return ctx.from_dict({tuple(map(int, idx)): int(arr[idx]) for idx in np.ndindex(
            arr.shape)})

    prod = (poly(a) * poly(b)).to_dict()  # python-flint fmpz_mpoly product
    out = polyconv.convolve(a, b, axes=(0, 1, 2))
    assert out.shape == (4, 6, 4) and out.dtype == object
    for idx in np.ndindex(out.shape):
        assert out[idx] == int(prod.get(idx, 0))


def test_modulus_against_nmod_poly_after_kronecker_by_hand():
    p = 998244353
    a = RNG.integers(0, p, (6, 5))
    b = RNG.integers(0, p, (4, 7))
    # Kronecker by hand: x_2 = x, x_1 = x^11 (11 = 5 + 7 - 1), product in nmod_poly (flint)
    s = 11
    fa = flint.nmod_poly([int(a[i, j]) if j < 5 else 0 for i in range(6) for j in range(s)], p)
    fb = flint.nmod_poly([int(b[i, j]) if j < 7 else 0 for i in range(4) for j in range(s)], p)
    coeffs = [int(c) for c in (fa * fb).coeffs()]
    coeffs += [0] * (9 * s - len(coeffs))
    ref = np.array(coeffs[: 9 * s], dtype=np.int64).reshape(9, s)
    out = polyconv.convolve(a, b, axes=(0, 1), modulus=p)
    assert np.array_equal(out, ref)
    plan = polyconv.plan(a, b, axes=(0, 1), modulus=p)
    assert plan.modulus == p and plan.exact
    # a modulus beyond 64 bits against fmpz_mpoly's exact product reduced (python-flint)
    big = 2**89 - 1
    ctx = flint.fmpz_mpoly_ctx.get(("x", "y"), "lex")
    pa = ctx.from_dict({(i, j): int(a[i, j]) * 2**40 for i in range(6) for j in range(5)})
    pb = ctx.from_dict({(i, j): int(b[i, j]) * 2**40 for i in range(4) for j in range(7)})
    prod = (pa * pb).to_dict()
    out = polyconv.convolve(a.astype(object) * 2**40, b.astype(object) * 2**40, axes=(0, 1),
                            modulus=big)
    for idx in np.ndindex(out.shape):
        assert out[idx] == int(prod.get(idx, 0)) % big


def test_default_axes_none_and_single_axis_keep_todays_behaviour():
    a = RNG.standard_normal((4, 30))
    b = RNG.standard_normal((4, 5))
    rows = np.array([np.convolve(x, y) for x, y in zip(a, b, strict=True)])  # numpy.convolve
    _close(polyconv.convolve(a, b), rows, 10)
    _close(polyconv.convolve(a, b, axes=(-1,)), rows, 10)
    _close(polyconv.convolve(a.T, b.T, axes=0), rows.T, 10)
    assert polyconv.plan(a, b, axes=[1]).lengths == (30, 5)


@pytest.mark.parametrize(("kwargs", "message"), [
    (dict(axes=(0, 0)), "more than once"),
    (dict(axes=(0, 5)), "out of range"),
    (dict(axes=(0, -4)), "out of range"),
    (dict(axes=()), "at least one axis"),
    (dict(axes=(0, 1), length=3), "length"),
    (dict(axes=(0, 1), axis=0), "not both"),
    (dict(axes=(0, 1), mode=("full",)), "one mode per"),
    (dict(axes=(0, 1), mode="middle"), "mode must be one of"),
    (dict(axes=(0, 1), method="ntt"), "method must be one of"),
])
def test_bad_arguments_are_named(kwargs, message):
    with pytest.raises(ValueError, match=message):
        polyconv.convolve(np.ones((4, 5)), np.ones((2, 3)), **kwargs)


def test_bad_axes_types_and_ndim_mismatch():
    with pytest.raises(TypeError, match="axes"):
        polyconv.convolve(np.ones((4, 5)), np.ones((2, 3)), axes=(0, 1.0))
    with pytest.raises(ValueError, match="same number of dimensions"):
        polyconv.convolve(np.ones((4, 5, 2)), np.ones((2, 3)), axes=(0, 1))
    with pytest.raises(ValueError, match="do not broadcast"):
        polyconv.convolve(np.ones((4, 5, 2)), np.ones((2, 3, 3)), axes=(0, 1))
    with pytest.raises(ValueError, match="empty"):
        polyconv.convolve(np.ones((4, 0)), np.ones((2, 3)), axes=(0, 1))


def test_memory_budget_checked_before_allocating():
    a = np.ones((3000, 3000))
    with using_budget("16M"), pytest.raises(MemoryBudgetError, match="axes"):
        polyconv.convolve(a, a, axes=(0, 1))
    ints = np.ones((2000, 2000), dtype=np.int64)
    with using_budget("16M"), pytest.raises(MemoryBudgetError, match="Kronecker"):
        polyconv.convolve(ints, ints, axes=(0, 1))


def test_empty_batch():
    out = polyconv.convolve(np.ones((0, 4, 5)), np.ones((1, 2, 3)), axes=(1, 2))
    assert out.shape == (0, 5, 7)
    assert math.prod(out.shape) == 0


def _separable_reference(a, u, v, modes):
    """numpy.convolve with u down the columns, then v along the rows, each in its own mode:
    the 2-D product with the rank-one kernel u v^T (separability; common practice, no source).
    Object arrays keep integers exact."""
    step = np.array([np.convolve(col, u, mode=modes[0]) for col in a.T]).T
    return np.array([np.convolve(row, v, mode=modes[1]) for row in step])


def test_random_shapes_and_per_axis_modes_against_numpy_separable():
    rng = np.random.default_rng(4)
    for _ in range(12):
        n1, n2, m1, m2 = (int(x) for x in rng.integers(1, 9, 4))
        modes = tuple(rng.choice(["full", "same", "valid"], 2))
        a = rng.standard_normal((n1, n2))
        u, v = rng.standard_normal(m1), rng.standard_normal(m2)
        ref = _separable_reference(a, u, v, modes)
        for method in ("auto", "direct", "fft"):
            out = polyconv.convolve(a, np.outer(u, v), axes=(0, 1), mode=modes, method=method)
            _close(out, ref, 30)
        # integers, exact: the same identity in Python ints (object arrays)
        ai = rng.integers(-2**40, 2**40, (n1, n2)).astype(object)
        ui = rng.integers(-2**20, 2**20, m1).astype(object)
        vi = rng.integers(-2**20, 2**20, m2).astype(object)
        kernel = np.outer(ui, vi)
        out = polyconv.convolve(ai, kernel, axes=(0, 1), mode=modes)
        ref = _separable_reference(ai, ui, vi, modes)
        assert out.shape == ref.shape
        assert all(int(x) == int(y) for x, y in zip(out.ravel(), ref.ravel(), strict=True))
