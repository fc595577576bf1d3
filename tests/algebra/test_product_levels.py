"""product() over Z of many equal-length int64 factors: the batched tree levels (int64, then
multi-prime rows with Python ints out, then the heap) against python-flint's product."""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.algebra import product

flint = pytest.importorskip("flint")


@pytest.mark.parametrize("count,length,bits", [(300, 2, 8), (65, 3, 40), (33, 4, 62)])
def test_product_of_equal_length_factors_matches_flint(count, length, bits):
    rng = np.random.default_rng(count + bits)
    top = 2**(bits - 1)
    factors = [rng.integers(1, top, length) * rng.choice([-1, 1], length) for _ in range(count)]
    expected = flint.fmpz_poly([1])
    for f in factors:                                           # python-flint reference
        expected *= flint.fmpz_poly([int(v) for v in f])
    got = product(factors)
    assert [int(v) for v in got] == [int(v) for v in expected.coeffs()]
