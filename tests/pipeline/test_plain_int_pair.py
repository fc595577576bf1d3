"""The short path for mid-size 1-D int64 products (polyconv.pipeline.execute.plain_int_pair).

Values are checked against python-flint's ``fmpz_poly`` product; the dtype must be the one the
planned pipeline (:func:`polyconv.pipeline.execute.convolve_prepared`, which never takes the
short path) gives.  The plan cache is keyed by lengths and operand bit lengths, so operands of
one key but different norms must still come out exact.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.pipeline import execute
from polyconv.pipeline.execute import convolve, convolve_prepared, plain_int_pair

flint = pytest.importorskip("flint")


def _flint(a, b):
    c = flint.fmpz_poly(a.tolist()) * flint.fmpz_poly(b.tolist())
    ref = [int(v) for v in c.coeffs()]
    return ref + [0] * (a.shape[0] + b.shape[0] - 1 - len(ref))


@pytest.mark.parametrize("n1,n2,bits", [(100, 100, 8), (1024, 1024, 16), (300, 700, 31),
                                        (129, 64, 63), (2048, 33, 64), (4096, 4096, 20)])
def test_plain_int_pair_equals_flint(n1, n2, bits):
    """Random and extreme operands: values against flint, dtype as the planned pipeline."""
    rng = np.random.default_rng(n1 + 7 * n2 + bits)
    top = 2**(bits - 1)
    for trial in range(3):
        a = rng.integers(-top, top, n1)
        b = rng.integers(-top, top, n2)
        if trial == 0:
            a[:] = -top  # the largest magnitudes (-2^63 at 64 bits)
            b[::3] = -top
        out = convolve(a, b)
        assert plain_int_pair(a, b, "full", "auto", None, None, -1) is not None
        assert [int(v) for v in out] == _flint(a, b)
        planned, _ = convolve_prepared(a, b)
        assert out.dtype == planned.dtype


def test_cached_plan_never_serves_data_dependent_norms():
    """A sparse operand whose own norm certifies a float product is not cached under its key:
    a dense operand of the same lengths and bit lengths afterwards is still exact (flint)."""
    rng = np.random.default_rng(5)
    n = 2**13
    sparse = np.zeros(n, dtype=np.int64)
    sparse[::512] = 2**20 - 1  # (here the planner picks the float product for these only)
    dense = rng.integers(2**19, 2**20, n)
    other = rng.integers(-2**20 + 1, 2**20, n)
    execute._plain_int_plans.clear()
    first = convolve(sparse, other)
    assert [int(v) for v in first] == _flint(sparse, other)
    assert not execute._plain_int_plans  # its facts hold for this pair only
    second = convolve(dense, other)
    assert [int(v) for v in second] == _flint(dense, other)


def test_plain_int_pair_declines_other_requests():
    """Modulus, truncation, other dtypes, 2-D or empty operands take the preparing path."""
    a = np.arange(100, dtype=np.int64)
    assert plain_int_pair(a, a, "full", "auto", 7, None, -1) is None
    assert plain_int_pair(a, a, "full", "auto", None, 10, -1) is None
    assert plain_int_pair(a, a, "same", "auto", None, None, -1) is None
    assert plain_int_pair(a, a, "full", "direct-exact", None, None, -1) is None
    assert plain_int_pair(a.astype(np.int32), a, "full", "auto", None, None, -1) is None
    assert plain_int_pair(a.reshape(10, 10), a, "full", "auto", None, None, -1) is None
    assert plain_int_pair(a[:0], a, "full", "auto", None, None, -1) is None


def test_compiled_norms_are_the_float_bound():
    """The facts' norms of int64 operands (an exact compiled sum of squares below 2^53) equal
    numerics.bounds.norm2_upper and bound the exact norm from Python ints (math.isqrt of the
    integer sum of squares) from above, within a relative 2^-40."""
    import math

    from polyconv.engines import jit_state as jit
    from polyconv.numerics.bounds import norm2_upper
    from polyconv.pipeline.facts import _norm2_upper

    try:
        jit.kernels("_kernels_small")
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    rng = np.random.default_rng(8)
    for n, bits in [(1, 1), (7, 26), (1000, 16), (2**14, 20), (2**18, 16), (3, 27), (50, 63)]:
        x = rng.integers(-2**(bits - 1), 2**(bits - 1), n)
        x[0] = -2**(bits - 1)
        for y in (x, x[::2], np.zeros(n, dtype=np.int64)):
            got = _norm2_upper(y)
            assert got == norm2_upper(y)
            exact = sum(v * v for v in y.tolist())
            assert got >= math.sqrt(exact) and got <= (math.isqrt(exact) + 1) * (1 + 2**-40)
