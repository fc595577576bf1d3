"""Streaming convolution: convolve_file and convolve_chunks.

Reference: polyconv.api.convolve in memory (itself tested against numpy/python-flint).  Exact
results must agree bit for bit (values and dtype); float results to rounding, judged against
``sum|x| max|k|``-sized scales.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest

from polyconv.api import convolve
from polyconv.scale.streaming import convolve_chunks, convolve_file, default_block

RNG = np.random.default_rng(20240607)


def _float_tol(x: np.ndarray, k: np.ndarray, eps: float) -> float:
    return 64 * eps * float(np.abs(x).sum()) * float(np.abs(k).max()) / max(1, len(x)) ** 0.5 \
        + 64 * eps * float(np.abs(x).max() * np.abs(k).sum())


def _save(folder, name: str, x: np.ndarray) -> str:
    path = os.path.join(folder, name)
    np.save(path, x)
    return path


def _leftovers(folder) -> list[str]:
    return sorted(os.listdir(folder))


# ----------------------------------------------------------------------------- convolve_file

@pytest.mark.parametrize("block", [None, 1, 7, 100, 1000, 5000])
def test_file_float64_matches_in_memory(tmp_path, block):
    x = RNG.standard_normal(3001)
    k = RNG.standard_normal(129)
    src = _save(tmp_path, "x.npy", x)
    dst = str(tmp_path / "y.npy")
    convolve_file(src, k, dst, block=block)
    got = np.load(dst)
    ref = convolve(x, k)  # reference: polyconv.api.convolve in memory
    assert got.dtype == np.float64 and got.shape == ref.shape
    np.testing.assert_allclose(got, ref, rtol=0, atol=_float_tol(x, k, 2**-52))
    assert _leftovers(tmp_path) == ["x.npy", "y.npy"]


def test_file_float32_stays_float32(tmp_path):
    x = RNG.standard_normal(20000).astype(np.float32)
    k = RNG.standard_normal(257).astype(np.float32)
    src = _save(tmp_path, "x.npy", x)
    dst = tmp_path / "y.npy"  # a pathlib.Path is accepted too
    convolve_file(src, k, dst, block=4096)
    got = np.load(dst)
    ref = convolve(x, k)
    assert got.dtype == ref.dtype == np.float32
    np.testing.assert_allclose(got, ref, rtol=0, atol=_float_tol(x, k, 2**-23))


def test_file_complex_and_big_endian(tmp_path):
    x = (RNG.standard_normal(999) + 1j * RNG.standard_normal(999)).astype(">c16")
    k = RNG.standard_normal(31)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", block=64)
    got = np.load(tmp_path / "y.npy")
    ref = convolve(x.astype(np.complex128), k)
    assert got.dtype == np.complex128
    np.testing.assert_allclose(got, ref, rtol=0, atol=_float_tol(np.abs(x), k, 2**-52))


@pytest.mark.parametrize("dtype", [np.int64, np.int16, np.uint8, ">i4", np.bool_])
def test_file_integers_exact(tmp_path, dtype):
    info = np.iinfo(np.int16) if np.dtype(dtype).kind != "b" else None
    if info is None:
        x = RNG.integers(0, 2, 4000).astype(dtype)
    else:
        lo, hi = (0, 255) if np.dtype(dtype).kind == "u" else (-30000, 30000)
        x = RNG.integers(lo, hi, 4000).astype(dtype)
    k = RNG.integers(-2**20, 2**20, 300)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", block=333)
    got = np.load(tmp_path / "y.npy")
    ref = convolve(x.astype(np.int64), k)  # exact reference
    assert got.dtype == np.int64
    assert np.array_equal(got, ref)


def test_file_int64_needs_data_pass_and_fits(tmp_path):
    # int64 dtype range cannot prove the bound; the data pass can (values ~2^40, kernel 2^10)
    x = RNG.integers(-2**40, 2**40, 2000)
    k = RNG.integers(-2**10, 2**10, 50)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", block=128)
    assert np.array_equal(np.load(tmp_path / "y.npy"), convolve(x, k))


@pytest.mark.parametrize("modulus", [2, 998244353, 2**61 - 1, 2**62 + 135])
def test_file_modulus(tmp_path, modulus):
    x = RNG.integers(-2**62, 2**62, 1500)
    k = RNG.integers(-2**62, 2**62, 40)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", modulus=modulus, block=97)
    got = np.load(tmp_path / "y.npy")
    ref = convolve(x, k, modulus=modulus)
    assert got.dtype == np.int64
    assert np.array_equal(got, ref.astype(np.int64))
    assert got.min() >= 0 and int(got.max()) < modulus


def test_file_kernel_longer_than_block_and_source(tmp_path):
    x = RNG.integers(-100, 100, 37)
    k = RNG.integers(-100, 100, 500)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", block=5)
    assert np.array_equal(np.load(tmp_path / "y.npy"), convolve(x, k))


def test_file_one_tap_kernel_and_one_sample_source(tmp_path):
    src = _save(tmp_path, "x.npy", np.array([3, -4, 5]))
    convolve_file(src, [7], tmp_path / "y.npy")
    assert np.array_equal(np.load(tmp_path / "y.npy"), [21, -28, 35])
    src1 = _save(tmp_path, "one.npy", np.array([2.0]))
    convolve_file(src1, [1.0, 0.5], tmp_path / "z.npy")
    assert np.array_equal(np.load(tmp_path / "z.npy"), [2.0, 1.0])


def test_file_replaces_existing_destination(tmp_path):
    src = _save(tmp_path, "x.npy", np.arange(10))
    dst = _save(tmp_path, "y.npy", np.zeros(3))
    convolve_file(src, [1, 1], dst)
    assert np.array_equal(np.load(dst), convolve(np.arange(10), [1, 1]))


def test_file_nonfinite_like_in_memory(tmp_path):
    x = RNG.standard_normal(500)
    x[[3, 250, 499]] = [np.nan, np.inf, -np.inf]
    k = RNG.standard_normal(20)
    src = _save(tmp_path, "x.npy", x)
    convolve_file(src, k, tmp_path / "y.npy", block=64)
    got, ref = np.load(tmp_path / "y.npy"), convolve(x, k)
    assert np.array_equal(np.isfinite(got), np.isfinite(ref))


def test_file_progress_reports(tmp_path):
    src = _save(tmp_path, "x.npy", RNG.standard_normal(1000))
    calls = []
    convolve_file(src, np.ones(11), tmp_path / "y.npy", block=300,
                  progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (0, 1010) and calls[-1] == (1010, 1010)
    dones = [d for d, _ in calls]
    assert dones == sorted(dones) and len(calls) == 1 + 4 + 1


class _InjectedError(Exception):
    pass


@pytest.mark.parametrize("failure", [_InjectedError, KeyboardInterrupt])
def test_file_failure_leaves_nothing(tmp_path, failure):
    src = _save(tmp_path, "x.npy", RNG.standard_normal(5000))

    def progress(done, total):
        if done > 2000:
            raise failure()

    with pytest.raises(failure):
        convolve_file(src, np.ones(9), tmp_path / "y.npy", block=1000, progress=progress)
    assert _leftovers(tmp_path) == ["x.npy"]  # no destination, no temporary file


def test_file_failure_keeps_old_destination(tmp_path):
    src = _save(tmp_path, "x.npy", RNG.standard_normal(5000))
    old = np.arange(4.0)
    dst = _save(tmp_path, "y.npy", old)

    def progress(done, total):
        if done:
            raise _InjectedError()

    with pytest.raises(_InjectedError):
        convolve_file(src, np.ones(9), dst, block=1000, progress=progress)
    assert np.array_equal(np.load(dst), old)
    assert _leftovers(tmp_path) == ["x.npy", "y.npy"]


def test_file_unprovable_int64_bound_raises_and_writes_nothing(tmp_path):
    src = _save(tmp_path, "x.npy", np.full(100, 2**40))
    with pytest.raises(ValueError, match="int64"):
        convolve_file(src, np.full(10, 2**30), tmp_path / "y.npy")
    with pytest.raises(ValueError, match="modulus"):
        convolve_file(src, [1, 2], tmp_path / "y.npy", modulus=2**63 + 1)
    assert _leftovers(tmp_path) == ["x.npy"]


def test_file_bad_inputs(tmp_path):
    good = _save(tmp_path, "x.npy", np.arange(10.0))
    dst = tmp_path / "y.npy"
    with pytest.raises(FileNotFoundError, match="source"):
        convolve_file(tmp_path / "missing.npy", [1.0], dst)
    with pytest.raises(ValueError, match="source.*1-D"):
        convolve_file(_save(tmp_path, "m.npy", np.ones((3, 3))), [1.0], dst)
    with pytest.raises(ValueError, match="source.*empty"):
        convolve_file(_save(tmp_path, "e.npy", np.array([])), [1.0], dst)
    np.save(tmp_path / "o.npy", np.array([1, "a"], dtype=object), allow_pickle=True)
    with pytest.raises(ValueError, match="source"):
        convolve_file(tmp_path / "o.npy", [1.0], dst)
    np.savez(tmp_path / "z.npz", a=np.ones(3))
    with pytest.raises(ValueError, match="source.*npz"):
        convolve_file(tmp_path / "z.npz", [1.0], dst)
    (tmp_path / "t.npy").write_text("not an npy file")
    with pytest.raises(ValueError, match="source"):
        convolve_file(tmp_path / "t.npy", [1.0], dst)
    with pytest.raises(ValueError, match="source"):
        convolve_file(tmp_path, [1.0], dst)
    with pytest.raises(ValueError, match="kernel is empty"):
        convolve_file(good, [], dst)
    with pytest.raises(ValueError, match="kernel must be 1-D"):
        convolve_file(good, np.ones((2, 2)), dst)
    with pytest.raises(ValueError, match="destination.*source"):
        convolve_file(good, [1.0], good)
    with pytest.raises(ValueError, match="destination.*directory"):
        convolve_file(good, [1.0], tmp_path)
    with pytest.raises(FileNotFoundError, match="destination"):
        convolve_file(good, [1.0], tmp_path / "nowhere" / "y.npy")
    with pytest.raises(ValueError, match="block"):
        convolve_file(good, [1.0], dst, block=0)
    with pytest.raises(TypeError, match="block"):
        convolve_file(good, [1.0], dst, block=2.5)
    with pytest.raises(TypeError, match="modulus"):
        convolve_file(good, [1.0], dst, modulus=7)
    assert not dst.exists()
    assert not [f for f in os.listdir(tmp_path) if f.endswith(".tmp")]


def test_file_destination_is_a_link_to_source(tmp_path):
    good = _save(tmp_path, "x.npy", np.arange(10.0))
    os.link(good, tmp_path / "hard.npy")
    with pytest.raises(ValueError, match="destination.*source"):
        convolve_file(good, [1.0], tmp_path / "hard.npy")


def test_default_block_is_a_power_of_two_several_kernels_long():
    for m in (1, 4097, 10**6):
        b = default_block(m)
        assert b & (b - 1) == 0 and b >= 8 * m and b >= 2**20


# ----------------------------------------------------------------------------- convolve_chunks

def _irregular_split(x: np.ndarray) -> list[np.ndarray]:
    sizes = [1, 1, 0, 5, 1, 40, 2, 0, 300, 1, 17]
    cuts = np.cumsum(sizes)
    cuts = cuts[cuts < len(x)]
    return np.split(x, cuts)


def test_chunks_float_irregular_sizes_kernel_longer_than_chunks():
    x = RNG.standard_normal(800)
    k = RNG.standard_normal(64)  # longer than most chunks
    parts = list(convolve_chunks(iter(_irregular_split(x)), k))
    got = np.concatenate(parts)
    ref = convolve(x, k)  # reference: polyconv.api.convolve in memory
    np.testing.assert_allclose(got, ref, rtol=0, atol=_float_tol(x, k, 2**-52))
    sizes = [len(c) for c in _irregular_split(x) if len(c)]
    assert [len(p) for p in parts] == sizes + [len(k) - 1]


def test_chunks_integers_exact_and_modulus():
    x = RNG.integers(-2**20, 2**20, 600)
    k = RNG.integers(-2**20, 2**20, 45)
    got = np.concatenate(list(convolve_chunks(_irregular_split(x), k)))
    assert got.dtype == np.int64 and np.array_equal(got, convolve(x, k))
    got = np.concatenate(list(convolve_chunks(_irregular_split(x), k, modulus=1000003)))
    assert got.dtype == np.int64 and np.array_equal(got, convolve(x, k, modulus=1000003))


def test_chunks_widen_to_python_ints_when_int64_is_not_proven():
    x = np.full(60, 2**40, dtype=np.int64)
    x[::7] = -(2**40) + 3
    k = np.full(20, 2**22, dtype=np.int64)
    parts = list(convolve_chunks([x[:1], x[1:3], x[3:]], k))
    assert parts[0].dtype == np.int64  # one sample: 1 x 2^40 x 2^22 fits
    assert parts[1].dtype == object  # three samples: 3 x 2^40 x 2^22 >= 2^63
    assert parts[-1].dtype == object
    got = np.concatenate(parts)
    ref = convolve(x, k)  # object array of Python ints
    assert all(int(a) == int(b) for a, b in zip(got, ref, strict=True))


def test_chunks_python_int_objects():
    x = np.array([2**80 + i for i in range(30)], dtype=object)
    k = np.array([3, -(2**70), 5], dtype=object)
    got = np.concatenate(list(convolve_chunks([x[:4], x[4:5], x[5:]], k)))
    assert got.tolist() == convolve(x, k).tolist()


def test_chunks_single_sample_and_one_tap():
    assert np.concatenate(list(convolve_chunks([[2]], [3, 4]))).tolist() == [6, 8]
    assert [c.tolist() for c in convolve_chunks([[1, 2], [3]], [5])] == [[5, 10], [15]]


def test_chunks_bad_inputs():
    with pytest.raises(ValueError, match="empty"):
        list(convolve_chunks([], [1.0]))
    with pytest.raises(ValueError, match="empty"):
        list(convolve_chunks([np.array([])], [1.0]))
    with pytest.raises(ValueError, match="kernel is empty"):
        list(convolve_chunks([[1.0]], []))
    with pytest.raises(ValueError, match=r"chunks\[1\] must be 1-D"):
        list(convolve_chunks([[1.0], [[1.0]]], [1.0]))
    with pytest.raises(TypeError, match=r"chunks\[1\]"):
        list(convolve_chunks([[1, 2], [1.5]], [1]))
    with pytest.raises(TypeError, match="modulus"):
        list(convolve_chunks([[1.5]], [1.0], modulus=5))


@pytest.mark.parametrize("chunks, said", [
    (None, "got None"), (5, "got an int"), ("123", "got a str"), ({1, 2}, "got a set"),
    (np.arange(4), r"1-D numpy array \(pass \[x\]"),
])
def test_chunks_that_are_not_a_sequence_of_chunks_are_refused_at_the_call(chunks, said):
    # issue 16 leftover: None gave "'NoneType' object is not iterable", a 1-D array or a string
    # "chunks[0] must be 1-D"; now a TypeError naming chunks, raised before anything is consumed
    # (the argument contract of the docstring; common practice, no source)
    with pytest.raises(TypeError, match=rf"^chunks must be an iterable of 1-D arrays.*{said}"):
        convolve_chunks(chunks, [1, 1])


def test_chunks_rows_of_a_2d_array_are_chunks():
    # a 2-D array iterates as its rows: the concatenation is the product of the flattened signal
    # (numpy.convolve reference)
    x = np.arange(12).reshape(3, 4)
    got = np.concatenate(list(convolve_chunks(x, [1, -2, 1])))
    assert got.tolist() == np.convolve(x.ravel(), [1, -2, 1]).tolist()


def test_dask_is_not_imported_by_polyconv():
    code = ("import sys, polyconv, polyconv.scale.streaming, polyconv.scale.dask; "
            "print('dask' in sys.modules or 'distributed' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"
