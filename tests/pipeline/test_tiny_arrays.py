"""The one-call short path for tiny 1-D int64 array products (polyconv.pipeline.small.tiny_arrays,
the compiled ``tiny_auto`` of polyconv.engines._kernels_small) against python-flint.

Values are checked against python-flint's ``fmpz_poly`` product, reduced modulo ``m`` where one
is given (reduction is a ring homomorphism; common practice, no source); the dtype must be the
one the planned pipeline (:func:`polyconv.pipeline.execute.convolve_prepared`) gives: the
int64 / Python-int decision is taken inside the kernel here.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.pipeline.execute import convolve, convolve_prepared
from polyconv.pipeline.small import tiny_arrays

flint = pytest.importorskip("flint")


@pytest.fixture(scope="module")
def small_kernels():
    from polyconv.engines import jit_state as jit
    from polyconv.pipeline import small

    try:
        jit.kernels("_kernels_small")
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    if small.small_kernels() is None:
        pytest.skip("marshal streams are not read back here")


def _flint(a, b, m):
    c = [int(v) for v in (flint.fmpz_poly(a.tolist()) * flint.fmpz_poly(b.tolist())).coeffs()]
    c += [0] * (a.shape[0] + b.shape[0] - 1 - len(c))
    return c if m is None else [v % m for v in c]


@pytest.mark.parametrize("n1,n2", [(1, 1), (3, 2), (8, 8), (5, 17), (64, 64), (1, 4096)])
@pytest.mark.parametrize("m", [None, 3, 998244353, 2**61 - 1, 2**63 - 25])
def test_tiny_arrays_equal_flint(small_kernels, n1, n2, m):
    """Every coefficient size from 1 to 64 bits around the int64 / Python-int boundary, strided
    and extreme (-2^63) operands: values against flint, dtype as the planned pipeline."""
    rng = np.random.default_rng(n1 * 1000 + n2)
    for bits in (1, 2, 16, 31, 32, 33, 62, 63, 64):
        top = 2**(bits - 1)
        for trial in range(3):
            a = rng.integers(-top, top, 2 * n1)[::2] if trial == 1 else rng.integers(-top, top, n1)
            b = rng.integers(-top, top, n2)
            if trial == 2:
                a[:] = -top
                b[:] = -top
            out = tiny_arrays(a, b, m)  # (beyond PRIME_WORK mod an NTT prime: one NTT)
            assert out is not None
            assert [int(v) for v in out] == _flint(a, b, m)
            assert convolve(a, b, modulus=m).dtype == convolve_prepared(a, b, modulus=m)[0].dtype
            assert out.dtype == convolve_prepared(a, b, modulus=m)[0].dtype


def test_tiny_arrays_decline(small_kernels):
    """Even or too large moduli, other dtypes, 2-D, empty or too long operands: None."""
    a = np.arange(5, dtype=np.int64)
    assert tiny_arrays(a, a, 2**62) is None
    assert tiny_arrays(a, a, 2**63 + 29) is None
    assert tiny_arrays(a, a, 1) is None
    assert tiny_arrays(a, a, np.int64(7)) is None
    assert tiny_arrays(a.astype(np.int32), a, None) is None
    assert tiny_arrays(a.reshape(1, 5), a, None) is None
    assert tiny_arrays(a[:0], a, None) is None
    long = np.arange(4097, dtype=np.int64)
    assert tiny_arrays(long, long[:1], None) is None


def _schoolbook(a, b):
    """c_k = sum_i a_i b_{k-i} in Python ints (the definition; common practice, no source)."""
    out = [0] * (len(a) + len(b) - 1)
    for i, u in enumerate(a):
        for j, v in enumerate(b):
            out[i + j] += u * v
    return out


def test_tiniest_wide_products_one_coefficient_at_a_time(small_kernels):
    """Lengths 1..8 with sums past int64 (written one coefficient at a time in the kernel):
    signs, zeros, +-(2^63 - 1) and -2^63, against the Python-int schoolbook sum and flint."""
    rng = np.random.default_rng(12)
    edges = np.array([0, 1, -1, 2**63 - 1, -(2**63 - 1), -(2**63), 2**62, -(2**31), 2**32],
                     dtype=np.int64)
    for n1 in range(1, 9):
        for n2 in range(1, 9):
            for trial in range(6):
                if trial < 3:
                    a, b = rng.choice(edges, n1), rng.choice(edges, n2)
                else:
                    a = rng.integers(-2**63, 2**63 - 1, n1, endpoint=True)
                    b = rng.integers(-2**63, 2**63 - 1, n2, endpoint=True)
                out = tiny_arrays(a, b, None)
                ref = _schoolbook(a.tolist(), b.tolist())
                assert [int(v) for v in out] == ref == _flint(a, b, None)
                assert out.dtype == convolve_prepared(a, b)[0].dtype
