"""The short path for tiny integer products (polyconv.pipeline.small) against python-flint.

Values are checked against python-flint's ``fmpz_poly`` product (reduced modulo ``m`` where one
is given: reduction is a ring homomorphism, so ``(a b) mod m`` equals the product of the
reduced operands; common practice, no source); the dtype must be the one the planned pipeline
(:func:`polyconv.pipeline.execute.convolve_prepared`, which never takes the short path) gives.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.pipeline.execute import convolve, convolve_prepared
from polyconv.pipeline.small import TINY_WORK, tiny_product

flint = pytest.importorskip("flint")


def _flint(a, b, m=None):
    c = flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])
    ref = [int(v) for v in c.coeffs()]
    ref += [0] * (len(a) + len(b) - 1 - len(ref))
    return ref if m is None else [v % m for v in ref]


CASES = [  # a, b, modulus
    ([1, 2, 3], [4, 5], None),
    ([1, 2, 3], [4, 5], 998244353),
    ([-7, 0, 9, -1], [3, -2], 13),                      # negative operands reduced
    ([2**40, -2**40, 5], [2**21, 7], None),            # bound 2^63: objects by the rounding rule
    ([2**62, 1], [3, 2**62], None),                     # products beyond int64: Python ints
    ([2**70, -3], [5, 2**65, 1], None),                 # operands beyond int64
    ([2**70, -3], [5, 2**65, 1], 2**61 - 1),
    ([5, 6, 7], [8, 9], 2**63),                         # residues still int64
    ([5, 6, 7], [8, 9], 2**64 + 13),                    # residues as Python ints
    (list(range(-20, 20)), list(range(30, 0, -1)), None),  # numpy.convolve int64 route
    (list(range(40)), list(range(50)), 2**31 - 1),
    ([0, 0, 0], [0], None),
    ([0] * 30, [2**70, 1] * 15, None),                  # all-zero side, the other beyond int64
    ([0] * 30, [2**70, 1] * 15, 2**80),
]


@pytest.mark.parametrize("a,b,m", CASES)
@pytest.mark.parametrize("as_array", [False, True])
def test_tiny_product_equals_flint_and_pipeline_dtype(a, b, m, as_array):
    x, y = (a, b)
    if as_array and max(map(abs, a + b)) < 2**63:
        x, y = np.array(a, dtype=np.int64), np.array(b, dtype=np.int64)
    out = convolve(x, y, modulus=m)
    assert [int(v) for v in out] == _flint(a, b, m)
    planned, _ = convolve_prepared(x, y, modulus=m)
    assert out.dtype == planned.dtype


def test_short_path_taken_and_declined():
    """It answers plain tiny operands and declines what the pipeline must classify."""
    assert tiny_product([1, 2], [3], "full", "auto", None, None, -1) is not None
    declined = [
        ([1, 2], [3], "same", "auto", None, None, -1),
        ([1, 2], [3], "full", "direct-exact", None, None, -1),
        ([1, 2], [3], "full", "auto", None, 5, -1),
        ([1.0, 2], [3], "full", "auto", None, None, -1),
        ([True, 2], [3], "full", "auto", None, None, -1),
        ([np.int64(1), 2], [3], "full", "auto", None, None, -1),
        ([], [3], "full", "auto", None, None, -1),
        ([1, 2], [3], "full", "auto", 1, None, -1),
        ([1] * TINY_WORK, [1, 2], "full", "auto", None, None, -1),
        (np.ones((2, 2), dtype=np.int64), [3], "full", "auto", None, None, -1),
    ]
    for args in declined:
        assert tiny_product(*args) is None


def test_bad_input_still_named():
    """Declined input reaches the pipeline's checks (the argument is named)."""
    with pytest.raises(ValueError, match="modulus"):
        convolve([1, 2], [3], modulus=1)


WIDE_CASES = [  # (n1, n2, bits, modulus): sums beyond int64 (128-bit rows)
    (8, 8, 62, None),
    (5, 7, 63, None),
    (16, 16, 59, None),
    (8, 8, 61, 2**61 - 1),
    (6, 9, 40, 998244353),
    (8, 8, 62, 2**63 + 29),   # residues as Python ints
    (32, 32, 64, None),       # sums beyond 2^127: split into 32-bit halves, two 128-bit rows
    (64, 64, 63, None),
    (10, 40, 64, None),
]


@pytest.mark.parametrize("n1,n2,bits,m", WIDE_CASES)
def test_wide_rows_route_equals_flint(batch_kernels, n1, n2, bits, m):
    """int64 operands whose sums need 64-127 bits (the compiled 128-bit rows once the kernels
    are loaded): values against flint, dtype as the planned pipeline, strided arrays too."""
    rng = np.random.default_rng(n1 * 100 + n2 + bits)
    top = 2**(bits - 1)
    for trial in range(5):
        a = rng.integers(-top, top, 2 * n1)[::2]  # not contiguous
        b = rng.integers(-top, top, n2)
        if trial == 0:
            a[:] = -top  # the most negative entries: the extreme two-word sums
            b[:] = -top
        x, y = (a.tolist(), b.tolist()) if trial % 2 else (a, b)  # lists of ints too
        out = convolve(x, y, modulus=m)
        assert [int(v) for v in out] == _flint(a.tolist(), b.tolist(), m)
        planned, _ = convolve_prepared(x, y, modulus=m)
        assert out.dtype == planned.dtype
