"""Dask back end: convolve_dask and exact_product_dask, locally and on a LocalCluster.

Reference: polyconv.api.convolve in memory (itself tested against numpy/python-flint).  Exact
results must agree bit for bit (values and dtype); float results to rounding.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.api import convolve

da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("distributed")

from polyconv.scale.dask import convolve_dask, exact_product_dask  # noqa: E402

RNG = np.random.default_rng(7)


def _float_tol(x: np.ndarray, k: np.ndarray) -> float:
    return 64 * 2**-52 * float(np.abs(x).max() * np.abs(k).sum())


# ----------------------------------------------------------------------------- local scheduler
# These run before the cluster fixture starts, with dask's local (threaded) scheduler.

def test_local_convolve_dask_modes_match_numpy_semantics():
    x = RNG.integers(-1000, 1000, 700)
    k = RNG.integers(-1000, 1000, 31)
    xd = da.from_array(x, chunks=(5, 1, 94, 300, 300))  # chunks shorter than the kernel
    for mode in ("full", "same", "valid"):
        got = convolve_dask(xd, k, mode=mode).compute(scheduler="sync")
        ref = convolve(x, k, mode=mode)  # reference: polyconv.api.convolve in memory
        assert got.dtype == ref.dtype and np.array_equal(got, ref), mode
        assert np.array_equal(ref, np.convolve(x, k, mode=mode))


def test_local_exact_product_without_client():
    if _has_default_client():
        pytest.skip("a default distributed client is running")
    a = RNG.integers(-2**15, 2**15, 3000)
    b = RNG.integers(-2**15, 2**15, 2100)
    got = exact_product_dask(a, b, pieces=3)
    assert got.dtype == np.int64 and np.array_equal(got, convolve(a, b))


def _has_default_client() -> bool:
    try:
        distributed.default_client()
    except ValueError:
        return False
    return True


def test_bad_arguments():
    x = da.from_array(np.arange(10.0), chunks=3)
    with pytest.raises(TypeError, match="a must be a 1-D dask array"):
        convolve_dask(np.arange(10.0), [1.0])
    with pytest.raises(ValueError, match="a must be 1-D"):
        convolve_dask(da.ones((3, 3), chunks=2), [1.0])
    with pytest.raises(ValueError, match="kernel is empty"):
        convolve_dask(x, [])
    with pytest.raises(ValueError, match="mode"):
        convolve_dask(x, [1.0], mode="middle")
    with pytest.raises(TypeError, match="modulus"):
        convolve_dask(x, [1.0], modulus=7)
    with pytest.raises(TypeError, match="a must hold integers"):
        exact_product_dask(np.arange(5.0), [1, 2])
    with pytest.raises(ValueError, match="b is empty"):
        exact_product_dask([1, 2], [])
    with pytest.raises(ValueError, match="pieces"):
        exact_product_dask([1, 2], [3], pieces=0)
    with pytest.raises(ValueError, match="modulus"):
        exact_product_dask([1, 2], [3], modulus=1)


# ----------------------------------------------------------------------------- LocalCluster

@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None, silence_logs=40)
    with distributed.Client(cluster) as c:
        yield c
    cluster.close()


def test_cluster_convolve_dask_float(client):
    x = RNG.standard_normal(20000)
    k = RNG.standard_normal(513)
    got = convolve_dask(da.from_array(x, chunks=3000), k).compute()
    ref = convolve(x, k)
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, ref, rtol=0, atol=_float_tol(x, k))


def test_cluster_convolve_dask_float32_and_dask_kernel(client):
    x = RNG.standard_normal(9000).astype(np.float32)
    k = RNG.standard_normal(200).astype(np.float32)
    got = convolve_dask(da.from_array(x, chunks=1000), da.from_array(k, chunks=50),
                        mode="same").compute()
    ref = convolve(x, k, mode="same")
    assert got.dtype == ref.dtype == np.float32
    np.testing.assert_allclose(got, ref, rtol=0, atol=2**29 * _float_tol(x, k))


def test_cluster_convolve_dask_exact_int64_and_modulus(client):
    x = RNG.integers(-2**40, 2**40, 12000)  # int64 dtype: bound from one pass over the data
    k = RNG.integers(-2**12, 2**12, 300)
    xd = da.from_array(x, chunks=2500)
    got = convolve_dask(xd, k).compute()
    ref = convolve(x, k)
    assert got.dtype == ref.dtype == np.int64 and np.array_equal(got, ref)
    got = convolve_dask(xd, k, mode="valid", modulus=2**61 - 1).compute()
    assert np.array_equal(got, convolve(x, k, mode="valid", modulus=2**61 - 1))


def test_cluster_convolve_dask_exact_object(client):
    x = RNG.integers(-2**62, 2**62, 3000)
    k = RNG.integers(-2**62, 2**62, 50)
    got = convolve_dask(da.from_array(x, chunks=700), k).compute()
    ref = convolve(x, k)
    assert got.dtype == ref.dtype == object
    assert got.tolist() == ref.tolist()


@pytest.mark.parametrize("pieces", [None, 1, 2, 3])
def test_cluster_exact_product_int64(client, pieces):
    a = RNG.integers(-2**15, 2**15, 20000)
    b = RNG.integers(-2**15, 2**15, 15001)
    got = exact_product_dask(a, b, client=client, pieces=pieces)
    ref = convolve(a, b)
    assert got.dtype == ref.dtype == np.int64 and np.array_equal(got, ref)


def test_cluster_exact_product_big_ints_and_modulus(client):
    a = np.array([int(v) * 2**70 + 1 for v in RNG.integers(-2**30, 2**30, 3000)], dtype=object)
    b = RNG.integers(-2**62, 2**62, 2500)
    got = exact_product_dask(a, b, pieces=2)  # the fixture's client is the default one
    ref = convolve(a, b)
    assert got.dtype == ref.dtype == object and got.tolist() == ref.tolist()
    for modulus in (998244353, 2**62 + 135):
        got = exact_product_dask(a, b, modulus=modulus, client=client, pieces=2)
        ref = convolve(a, b, modulus=modulus)
        assert got.dtype == np.int64 and np.array_equal(got, ref.astype(np.int64))


def test_cluster_exact_product_from_dask_arrays(client):
    a = RNG.integers(-2**20, 2**20, 10000)
    b = RNG.integers(-2**20, 2**20, 333)  # much shorter: a-blocks x whole b
    got = exact_product_dask(da.from_array(a, chunks=1234), da.from_array(b, chunks=100),
                             client=client, pieces=4)
    assert np.array_equal(got, convolve(a, b))
