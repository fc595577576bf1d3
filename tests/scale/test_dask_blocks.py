"""Dask block products: checked once on the caller's side, object dask arrays classified by their
entries (Python floats are never truncated to integers).

References: numpy.convolve (floats to rounding, int64 products whose bound fits) and
python-flint fmpz_poly (exact integer products).  Local schedulers only (no cluster).
"""

from __future__ import annotations

import numpy as np
import pytest

da = pytest.importorskip("dask.array")
flint = pytest.importorskip("flint")

from polyconv.scale.dask import convolve_dask, exact_product_dask  # noqa: E402

RNG = np.random.default_rng(1515)


def _objects(values) -> np.ndarray:
    values = list(values)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _no_default_client() -> bool:
    try:
        from distributed import default_client
        default_client()
    except (ImportError, ValueError):
        return True
    return False


# ----------------------------------------------------------------------------- object dtype

def test_object_dask_array_of_floats_is_a_float_product_not_truncated():
    x = RNG.standard_normal(900) * 10  # fractional values: int64 truncation would change them
    k = np.array([1, -2, 3])
    xd = da.from_array(_objects(float(v) for v in x), chunks=200)
    got = convolve_dask(xd, k).compute(scheduler="sync")
    ref = np.convolve(x, k.astype(np.float64))  # reference: numpy.convolve in float64
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12 * np.abs(ref).max())
    got = convolve_dask(xd, [0.5, 0.25], mode="same").compute(scheduler="sync")
    np.testing.assert_allclose(got, np.convolve(x, [0.5, 0.25], mode="same"), rtol=0,
                               atol=1e-12 * np.abs(x).max())


def test_object_dask_array_mixing_ints_and_floats_is_real():
    values = [int(v) for v in RNG.integers(-50, 50, 300)] + [0.5] + [3] * 99
    xd = da.from_array(_objects(values), chunks=100)  # one block of the four holds a float
    got = convolve_dask(xd, [2, 1]).compute(scheduler="sync")
    assert got.dtype == np.float64
    assert got.tolist() == np.convolve(np.array(values, dtype=float), [2.0, 1.0]).tolist()


def test_object_dask_floats_refused_with_modulus_and_in_exact_products():
    xd = da.from_array(_objects([0.5, 1.5, 2.0]), chunks=2)
    with pytest.raises(TypeError, match="modulus=7 needs integer operands"):
        convolve_dask(xd, [1, 2], modulus=7)
    with pytest.raises(TypeError, match=r"^a must hold integers \(exact product\)"):
        exact_product_dask(xd, [1, 2])
    with pytest.raises(TypeError, match=r"^b must hold integers \(exact product\)"):
        exact_product_dask([1, 2], xd)


def test_object_dask_array_of_python_ints_stays_exact():
    x = _objects(int(v) * 2**80 + 7 for v in RNG.integers(-2**30, 2**30, 500))
    k = RNG.integers(-2**40, 2**40, 40)
    got = convolve_dask(da.from_array(x, chunks=128), k).compute(scheduler="sync")
    c = (flint.fmpz_poly(list(x)) * flint.fmpz_poly([int(v) for v in k])).coeffs()
    assert got.dtype == object and got.tolist() == [int(v) for v in c]  # python-flint


# ----------------------------------------------------------------------------- checked once

def test_dask_blocks_skip_per_block_validation(counted):
    calls = counted
    x = RNG.standard_normal(30 * 400 + 50)
    k = RNG.standard_normal(80)
    got = convolve_dask(da.from_array(x, chunks=400), k).compute(scheduler="sync")
    np.testing.assert_allclose(got, np.convolve(x, k), rtol=0, atol=1e-12 * np.abs(got).max())
    assert calls == {"prepare_pair": 0, "choose": 2}  # 31 blocks, two shapes (400 and 50)
    if _no_default_client():  # dask's local threads: one shared BlockProducts
        a = RNG.integers(1 - 2**20, 2**20, 9000)
        b = RNG.integers(1 - 2**20, 2**20, 7000)
        got = exact_product_dask(a, b, pieces=3)
        assert got.tolist() == np.convolve(a, b).tolist()  # reference: numpy.convolve (fits)
        assert calls["prepare_pair"] == 0 and calls["choose"] <= 2 + 4  # <= 4 block shapes
