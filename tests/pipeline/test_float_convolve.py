"""Float convolution against reference libraries: numpy.convolve and scipy.signal.fftconvolve.

Every expected value comes from numpy.convolve (direct summation, the reference for modes
full/same/valid) or scipy.signal.fftconvolve (the reference for N-D batches along an axis).
Tolerances follow the usual forward error bounds: eps * n * (|a| * |b|)[k] for direct summation
and eps * log2(N) * ||a||_2 ||b||_2 for FFT products (the normwise form of Percival's bound, Math.
Comp. 72 (2003) 387-395; constants here are loose multiples).
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.signal

import polyconv
from polyconv.engines.fft import convolve_fft

ENGINES = ("auto", "direct", "fft", "overlap-add")
LENGTHS = [1, 2, 3, 7, 16, 17, 64, 100, 257, 1000]


def _tolerance(a, b, dtype) -> np.ndarray:
    """Entry-wise error allowance covering both direct summation and FFT rounding."""
    eps = np.finfo(np.dtype(dtype).char.lower() if np.dtype(dtype).kind == "c" else dtype).eps
    n = a.shape[-1] + b.shape[-1]
    entrywise = n * np.convolve(np.abs(a), np.abs(b))
    normwise = max(np.log2(n), 1.0) * np.linalg.norm(a) * np.linalg.norm(b)
    return 16 * eps * (entrywise + normwise) + np.finfo(float).tiny


def _close(got, want, tol):
    assert got.shape == want.shape, (got.shape, want.shape)
    err = np.abs(np.asarray(got, dtype=complex) - want)
    assert np.all(err <= tol), f"max excess {np.max(err - tol)}"


def _mode_slice(full: np.ndarray, mode: str, n1: int, n2: int) -> np.ndarray:
    start = {"full": 0, "same": (min(n1, n2) - 1) // 2, "valid": min(n1, n2) - 1}[mode]
    length = {"full": n1 + n2 - 1, "same": max(n1, n2), "valid": max(n1, n2) - min(n1, n2) + 1}
    return full[start: start + length[mode]]


def _usable(method: str, n1: int, n2: int, mode: str) -> bool:
    if method != "overlap-add":
        return True
    try:
        polyconv.plan(np.ones(n1), np.ones(n2), method=method, mode=mode)
        return True
    except ValueError:
        return False


@pytest.mark.parametrize("mode", ["full", "same", "valid"])
@pytest.mark.parametrize("method", ENGINES)
def test_matches_numpy_convolve_all_modes(mode, method):
    # reference: numpy.convolve
    rng = np.random.default_rng(11)
    for n1, n2 in itertools.product(LENGTHS, [1, 2, 5, 31, 100]):
        if not _usable(method, n1, n2, mode):
            continue
        a, b = rng.standard_normal(n1), rng.standard_normal(n2)
        want = np.convolve(a, b, mode=mode)
        got = polyconv.convolve(a, b, mode=mode, method=method)
        assert got.dtype == np.float64
        full_tol = _tolerance(a, b, np.float64)
        _close(got, want, _mode_slice(full_tol, mode, n1, n2))


@pytest.mark.parametrize(
    "dtype_a, dtype_b, expected",
    [
        (np.float64, np.float64, np.float64),
        (np.float32, np.float32, np.float32),
        (np.float32, np.float64, np.float64),
        (np.complex128, np.float64, np.complex128),
        (np.complex64, np.float32, np.complex64),
        (np.int32, np.float64, np.float64),
        (np.float16, np.float16, np.float32),
    ],
)
@pytest.mark.parametrize("method", ["direct", "fft", "overlap-add"])
def test_dtypes_against_numpy(dtype_a, dtype_b, expected, method):
    # reference: numpy.convolve computed in complex128 / float64
    rng = np.random.default_rng(3)
    n1, n2 = 300, 20
    a = rng.standard_normal(n1) * 4
    b = rng.standard_normal(n2) * 4
    if np.dtype(dtype_a).kind == "c":
        a = a + 1j * rng.standard_normal(n1)
    a, b = a.astype(dtype_a), b.astype(dtype_b)
    got = polyconv.convolve(a, b, method=method)
    assert got.dtype == expected
    want = np.convolve(a.astype(complex), b.astype(complex))
    _close(got, want, _tolerance(a.astype(complex), b.astype(complex), expected))


@pytest.mark.parametrize("method", ENGINES)
@pytest.mark.parametrize("mode", ["full", "same", "valid"])
def test_batches_against_scipy_fftconvolve(method, mode):
    # reference: scipy.signal.fftconvolve with axes= (batch axes broadcast where one side is 1)
    rng = np.random.default_rng(5)
    a = rng.standard_normal((3, 1, 200))
    b = rng.standard_normal((1, 4, 30))
    if not _usable(method, 200, 30, mode):
        pytest.skip("engine not applicable")
    got = polyconv.convolve(a, b, mode=mode, method=method)
    if mode == "same":  # scipy centres "same" on in1; numpy.convolve's convention is ours
        full = scipy.signal.fftconvolve(a, b, mode="full", axes=-1)
        want = full[..., 14: 14 + 200]
    else:
        want = scipy.signal.fftconvolve(a, b, mode=mode, axes=-1)
    assert got.shape == want.shape == (3, 4, want.shape[-1])
    np.testing.assert_allclose(got, want, atol=1e-11)


def test_axis_argument_and_different_ndims():
    # reference: numpy.convolve row by row
    rng = np.random.default_rng(8)
    a = rng.standard_normal((50, 6))  # convolve along axis 0, six series
    b = rng.standard_normal(9)
    got = polyconv.convolve(a, b, axis=0)
    assert got.shape == (58, 6)
    for j in range(6):
        np.testing.assert_allclose(got[:, j], np.convolve(a[:, j], b), atol=1e-12)
    c = rng.standard_normal((2, 40, 3))
    d = rng.standard_normal((2, 5, 3))
    got = polyconv.convolve(c, d, axis=1, mode="valid")
    assert got.shape == (2, 36, 3)
    np.testing.assert_allclose(got[1, :, 2], np.convolve(c[1, :, 2], d[1, :, 2], "valid"),
                               atol=1e-12)


def test_batch_goes_through_one_plan_with_batch_shape():
    a = np.ones((7, 1000))
    b = np.ones(1000)
    the_plan = polyconv.plan(a, b)
    assert the_plan.batch_shape == (7,)
    assert the_plan.output_length == 1999


def test_long_times_short_uses_overlap_add_and_matches_numpy():
    # reference: numpy.convolve
    rng = np.random.default_rng(21)
    x = rng.standard_normal(200_000)
    k = rng.standard_normal(300)
    the_plan = polyconv.plan(x, k)
    assert the_plan.engine == "overlap-add"
    assert the_plan.block_length >= 300 - 1
    got = polyconv.convolve(x, k)
    np.testing.assert_allclose(got, np.convolve(x, k), atol=1e-10)


# ------------------------------------------------------------------ wrap-around and lengths


def test_short_transform_wraps_around_but_chosen_length_never_does():
    # circular convolution theorem (common practice, no source): a transform shorter than
    # n1 + n2 - 1 folds the tail back onto the head
    rng = np.random.default_rng(2)
    a, b = rng.standard_normal(40), rng.standard_normal(25)
    linear = np.convolve(a, b)
    short = convolve_fft(a, b, 63, 63)  # one short of 64 = n1 + n2 - 1
    assert np.abs(short - linear[:63]).max() > 1e-3
    folded = linear[:63].copy()
    folded[0] += linear[63]
    np.testing.assert_allclose(short, folded, atol=1e-12)
    for n1, n2 in itertools.product([1, 2, 3, 5, 8, 64, 127, 1000], repeat=2):
        for mode in ("full", "same", "valid"):
            p = polyconv.plan(np.ones(n1), np.ones(n2), mode=mode, method="fft")
            need = max(n1, n2) if mode == "valid" else n1 + n2 - 1
            assert p.transform_length >= need, (n1, n2, mode)
            a, b = np.arange(1.0, n1 + 1), np.arange(2.0, n2 + 2)
            got = polyconv.convolve(a, b, mode=mode, method="fft")
            want = np.convolve(a, b, mode=mode)
            _close(got, want, _mode_slice(_tolerance(a, b, np.float64), mode, n1, n2))


def test_overlap_add_blocks_cover_kernel_tail():
    for n, m in [(5000, 2), (5000, 100), (4097, 64), (10_000, 1500)]:
        p = polyconv.plan(np.ones(n), np.ones(m), method="overlap-add")
        assert p.block_length >= m - 1
        assert p.transform_length == p.block_length + m - 1


# ------------------------------------------------------------------ bad input


@pytest.mark.parametrize(
    "a, b, kwargs, error, words",
    [
        ([], [1.0], {}, ValueError, "a is empty"),
        ([1.0], np.ones((3, 0)), {}, ValueError, "b is empty"),
        (3.0, [1.0], {}, ValueError, "a must be a sequence"),
        ([1.0], np.float64(2.0), {}, ValueError, "b must be a sequence"),
        (np.ones((3, 5)), np.ones((4, 5)), {}, ValueError, "do not broadcast"),
        (["x", "y"], [1.0], {}, TypeError, "a must hold numbers"),
        ([1.0], np.array(["2020-01-01"], dtype="datetime64[D]"), {}, TypeError,
         "b must hold numbers"),
        ([1.0, 2.0], [1.0], {"mode": "middle"}, ValueError, "mode must be one of"),
        ([1.0, 2.0], [1.0], {"method": "magic"}, ValueError, "method must be one of"),
        ([1.0, 2.0], [1.0], {"axis": 1}, ValueError, "axis=1 is out of range"),
        ([1.0, 2.0], [1.0], {"axis": 1.5}, TypeError, "axis must be an int"),
        ([1.0, 2.0], [1.0], {"modulus": 7}, TypeError, "modulus=7 needs integer operands"),
        ([1, 2], [1], {"modulus": 1}, ValueError, "modulus must be >= 2"),
        ([1, 2], [1], {"modulus": 7.0}, TypeError, "modulus must be an integer"),
        ([1.0, 2.0], [1.0], {"length": 0}, ValueError, "length must be >= 1"),
        ([1.0, 2.0], [1.0], {"length": 2, "mode": "same"}, ValueError, "only defined"),
        ([[1.0, 2.0], [3.0]], [1.0], {}, ValueError, "a must be an array-like"),
        ([1.0, None], [1.0], {}, TypeError, "a must hold numbers"),
    ],
)
def test_bad_input_names_the_argument(a, b, kwargs, error, words):
    with pytest.raises(error, match=words):
        polyconv.convolve(a, b, **kwargs)
    with pytest.raises(error, match=words):
        polyconv.plan(a, b, **kwargs)


def test_valid_mode_refuses_overlap_add_by_name():
    with pytest.raises(ValueError, match="overlap-add"):
        polyconv.convolve(np.ones(5000), np.ones(10), mode="valid", method="overlap-add")


def test_empty_batch_gives_empty_result_of_right_shape():
    got = polyconv.convolve(np.ones((0, 5)), np.ones(3))
    assert got.shape == (0, 7)


# ------------------------------------------------------------------ NaN / inf policy


@pytest.mark.parametrize("method", ["fft", "overlap-add", "direct"])
def test_nonfinite_inputs_mark_exactly_the_outputs_they_reach(method):
    # reference: numpy.convolve's pattern of non-finite outputs
    rng = np.random.default_rng(4)
    a, b = rng.standard_normal(3000), rng.standard_normal(40)
    a[100], a[2000], b[7] = np.nan, np.inf, -np.inf
    want = np.convolve(a, b)
    got = polyconv.convolve(a, b, method=method)
    assert np.array_equal(~np.isfinite(got), ~np.isfinite(want))
    ok = np.isfinite(want)
    np.testing.assert_allclose(got[ok], want[ok], atol=1e-10)
    if method == "direct":  # the direct engine is numpy's own summation: identical
        np.testing.assert_array_equal(got, want)


def test_huge_finite_values_are_not_taken_for_nonfinite():
    a = np.full(2000, 1e300)
    b = np.full(2000, 1e-300)
    got = polyconv.convolve(a, b, method="fft")
    np.testing.assert_allclose(got, np.convolve(a, b), rtol=1e-9)


# ------------------------------------------------------------------ the Plan record


def test_plan_record_for_floats():
    p = polyconv.plan(np.ones(4096), np.ones(4096))
    assert p.engine in ("fft", "overlap-add", "direct")
    assert p.exact is False and p.certificate == "none"
    assert p.predicted_seconds > 0
    assert p.reason
    text = str(p)
    assert p.engine in text and "predicted" in text and "certificate: none" in text
    forced = polyconv.plan(np.ones(64), np.ones(64), method="fft")
    assert forced.engine == "fft" and "requested" in forced.reason
    names = [name for name, _ in p.alternatives]
    assert set(names) >= {"direct", "fft"}


def test_truncated_length_equals_sliced_full_product():
    # reference: numpy.convolve, sliced and zero padded
    rng = np.random.default_rng(9)
    a, b = rng.standard_normal(50), rng.standard_normal(30)
    full = np.convolve(a, b)
    for length in (1, 10, 79, 100):
        got = polyconv.convolve(a, b, length=length)
        want = np.zeros(length)
        want[: min(length, 79)] = full[:length]
        np.testing.assert_allclose(got, want, atol=1e-12)
