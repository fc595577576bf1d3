"""The fused circular product of the float engines and the short path for plain 1-D floats.

References: numpy.convolve on int64 operands (exact for the integer-valued floats used here), so
the float results can be held to polyconv's certified error bound (Percival's bound,
numerics/bounds.py) against exact values; numpy.convolve's pattern of non-finite outputs.
"""

from __future__ import annotations

import numpy as np
import pytest

import polyconv
from polyconv.engines import fft, overlap_add
from polyconv.numerics import transforms as tf
from polyconv.pipeline import execute
from polyconv.tuning import costs

needs_fused = pytest.mark.skipif(not tf.FUSED, reason="no fused circular product here")


def _integer_pair(rng, n1, n2, batch=()):
    a = rng.integers(-1000, 1000, batch + (n1,))
    b = rng.integers(-1000, 1000, n2)
    return a, b


@needs_fused
@pytest.mark.parametrize("n1, n2", [(64, 64), (1000, 999), (4096, 4096), (3000, 17)])
def test_fused_and_separate_calls_stay_within_the_certified_bound(n1, n2):
    rng = np.random.default_rng(n1 + n2)
    a, b = _integer_pair(rng, n1, n2, (2,))
    exact = np.array([np.convolve(r, b) for r in a])  # int64: exact
    x, y = a.astype(float), b.astype(float)
    n_fft = tf.fast_length(n1 + n2 - 1)
    bound = polyconv.error_bound(x[0], y)  # the float certificate of this product
    for fused in (True, False):
        one = fft.convolve_fft(x[0], y, n_fft, n1 + n2 - 1, 1, fused=fused)
        rows = fft.convolve_fft(x, y, n_fft, n1 + n2 - 1, 1, fused=fused)
        assert np.max(np.abs(one - exact[0])) <= bound
        assert np.max(np.abs(rows - exact)) <= 2 * bound  # the larger row's norm, within 2x


@needs_fused
def test_fused_overlap_add_matches_exact_values():
    rng = np.random.default_rng(7)
    a, b = _integer_pair(rng, 20000, 300)
    exact = np.convolve(a, b)
    x, y = a.astype(float), b.astype(float)
    for n_fft in (1024, 4096):  # 29 and 6 blocks: several calls of FUSED_BLOCKS, a partial one
        for fused in (True, False):
            got = overlap_add.convolve_overlap_add(x, y, n_fft, 1, fused=fused)
            # each output gathers at most two block products: twice the block bound
            bound = 2 * polyconv.error_bound(x[:n_fft - 299], y)
            assert got.shape == exact.shape and np.max(np.abs(got - exact)) <= bound


@pytest.mark.parametrize("n", [5, 64, 300, 2048, 20000])
def test_short_path_gives_the_planned_product(n):
    rng = np.random.default_rng(n)
    x, y = rng.standard_normal(n), rng.standard_normal(n // 2 + 1)
    got = polyconv.convolve(x, y)  # plain float64 arrays: the short path
    planned = execute.convolve_prepared(x.tolist(), y.tolist())[0]  # lists: the full pipeline
    np.testing.assert_array_equal(got, planned)  # same plan, same engine call
    ref = np.convolve(x, y)  # numpy.convolve as the outside reference
    assert np.max(np.abs(got - ref)) <= 4 * polyconv.error_bound(x, y) + 1e-300
    g32 = polyconv.convolve(x.astype(np.float32), y.astype(np.float32))
    assert g32.dtype == np.float32  # single precision stays single, as numpy.convolve keeps it
    assert np.allclose(g32, ref, atol=1e-4 * np.linalg.norm(x) * np.linalg.norm(y))


def test_short_path_marks_nonfinite_outputs_like_the_pipeline():
    # reference: numpy.convolve's pattern of non-finite outputs
    rng = np.random.default_rng(3)
    a, b = rng.standard_normal(5000), rng.standard_normal(2000)
    a[10], b[1999] = np.nan, -np.inf
    got, want = polyconv.convolve(a, b), np.convolve(a, b)
    assert np.array_equal(~np.isfinite(got), ~np.isfinite(want))
    ok = np.isfinite(want)
    np.testing.assert_allclose(got[ok], want[ok], atol=1e-9)
    huge = np.full(3000, 1e300)  # finite operands whose product overflows: inf, as numpy gives
    assert np.array_equal(polyconv.convolve(huge, huge), np.convolve(huge, huge))


def test_cost_tables_without_fused_constants_still_load():
    table = costs.default_costs()
    for section, key in [("fft", "fused_overhead"), ("fft", "fused_rate_by_log2n"),
                         ("overlap_add", "fused_per_point"), ("overlap_add", "fused_overhead"),
                         ("overlap_add", "fused_per_sample_large")]:
        table[section].pop(key, None)
    assert costs.table_problem(table) is None  # a file calibrated before them is still valid
    # without them the fused prediction falls back to the separate calls' constants
    assert fft.predict_fft(table, 2**12, 1.0, 1, False, True) == fft.predict_fft(
        table, 2**12, 1.0, 1, False, False)


@needs_fused
def test_kernel_buffer_reuse_across_lengths_and_threads():
    # reference: numpy.convolve on int64 (exact); kernels of falling and rising length at one
    # transform length exercise the clearing of the reused buffer, threads its isolation
    from concurrent.futures import ThreadPoolExecutor

    rng = np.random.default_rng(11)
    pairs = [_integer_pair(rng, 300, m) for m in (200, 3, 150, 1, 211, 90)]

    def worst(pairs):
        return max(np.max(np.abs(fft.convolve_fft(a.astype(float), b.astype(float), 512,
                                                  a.shape[0] + b.shape[0] - 1)
                                 - np.convolve(a, b))) for a, b in pairs)

    assert worst(pairs) < 0.5  # integers below 2^31 in magnitude: rounding far below 1/2
    with ThreadPoolExecutor(2) as pool:
        assert max(pool.map(worst, [pairs, pairs[::-1], pairs, pairs[::-1]])) < 0.5
