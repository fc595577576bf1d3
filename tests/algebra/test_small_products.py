"""Short exact products of the algebra (polyconv.algebra.small_products) against python-flint.

Reference: python-flint's ``fmpz_poly`` product (truncated by slicing its coefficients).
"""

from __future__ import annotations

import random

import numpy as np
import pytest

from polyconv.algebra import small_products
from polyconv.algebra.rings import _Integers

flint = pytest.importorskip("flint")


def _flint(x, y, count=None):
    c = [int(v) for v in (flint.fmpz_poly([int(v) for v in x])
                          * flint.fmpz_poly([int(v) for v in y])).coeffs()]
    c += [0] * (len(x) + len(y) - 1 - len(c))
    return c if count is None else c[:count]


def _bits(x, y):
    """The bound product_values asks for: above every operand and product coefficient."""
    top_x, top_y = max(map(abs, x)), max(map(abs, y))
    return max(min(len(x), len(y)) * top_x * top_y, top_x, top_y).bit_length()


@pytest.mark.parametrize("two_point", [False, True])
@pytest.mark.parametrize("n1,n2,bits", [(1, 1, 70), (3, 2, 100), (16, 31, 300), (64, 64, 900),
                                        (200, 7, 65)])
def test_product_values_equals_flint(monkeypatch, n1, n2, bits, two_point):
    """One product, and (forced at every size) the evaluation at +-2^s."""
    monkeypatch.setattr(small_products, "TWO_POINT_BITS", 1 if two_point else 2**60)
    rng = np.random.default_rng(n1 + 7 * n2 + bits)
    for trial in range(4):
        x = [int(v) << (bits - 40) for v in rng.integers(-2**39, 2**39, n1)]
        y = [int(v) << (bits - 40) for v in rng.integers(-2**39, 2**39, n2)]
        if trial == 0:  # extreme signs: every slot at the edge of its range
            x = [-(2**bits - 1)] * n1
            y = [2**bits - 1] * n2
        if trial == 1:
            x[0] = 0
            y[-1] = -y[-1] or 1
        bound = _bits(x, y)
        assert small_products.product_values(x, y, bound) == _flint(x, y)
        count = max(1, (n1 + n2) // 3)
        assert small_products.product_values(x, y, bound, count) == _flint(x, y, count)
        assert small_products.product_values(x, x, _bits(x, x)) == _flint(x, x)  # square


def test_product_routes_equal_flint(batch_kernels):
    """int64 operands (128-bit rows once the kernels are loaded), object operands (one GMP
    product) and the exact ring's mul in full, truncated and valid modes."""
    rng = np.random.default_rng(5)
    ring = _Integers()
    for n1, n2, top in ((12, 9, 2**62), (40, 40, 2**50), (30, 5, 2**200)):
        big = top >= 2**63
        x = [int(v) * (top >> 30) for v in rng.integers(-2**30, 2**30, n1)]
        y = [int(v) * (top >> 30) for v in rng.integers(-2**30, 2**30, n2)]
        ax = np.array(x, dtype=object if big else np.int64)
        ay = np.array(y, dtype=object if big else np.int64)
        out = small_products.product(ax, ay, _bits(x, y))
        assert out is not None and out.tolist() == _flint(x, y)
        assert ring.mul(ax, ay, length=7).tolist() == _flint(x, y, 7)
        full = _flint(x, y)
        valid = full[min(n1, n2) - 1: max(n1, n2)]
        assert [int(v) for v in ring.mul(ax, ay, mode="valid")] == valid


def test_long_products_are_declined():
    # 600 slots of 8005 bits: over the GMP limit, and 4002-bit operands are beyond the
    # multi-modular engine's 255 digits of 15 bits
    x = np.array([3 << 4000] * 600, dtype=object)
    assert small_products.product(x, x, 8004) is None


def test_long_products_by_the_multimodular_engine():
    """With the kernels loaded, products of >= WIDE_MIN_LENGTH terms on both sides go to
    ntt_wide (checked against python-flint's fmpz_poly product)."""
    from polyconv.engines import jit_state

    try:
        jit_state.kernels()
    except jit_state.JitUnavailableError as exc:
        pytest.skip(str(exc))
    rng = random.Random(4)
    n = small_products.WIDE_MIN_LENGTH
    x = np.array([rng.getrandbits(2000) - (1 << 1999) for _ in range(n + 500)], dtype=object)
    y = np.array([rng.getrandbits(900) for _ in range(n)], dtype=object)
    bits = (n * max(map(abs, x)) * max(map(abs, y))).bit_length()
    assert [int(v) for v in small_products.product(x, y, bits)] == _flint(x.tolist(),
                                                                          y.tolist())
    assert [int(v) for v in small_products.product(x, x, 2 * bits, 7)] == _flint(
        x.tolist(), x.tolist())[:7]


def test_power_values_against_flint():
    """x^k by pointwise powers of the spectra (python-flint's fmpz_poly ** k as the oracle)."""
    from polyconv.engines import jit_state

    try:
        jit_state.kernels()
    except jit_state.JitUnavailableError as exc:
        pytest.skip(str(exc))
    rng = random.Random(8)
    for n, bits, k in ((16, 64, 50), (1, 200, 3), (2, 3, 70), (7, 500, 9), (40, 20, 5)):
        x = [rng.getrandbits(bits) - (1 << (bits - 1)) for _ in range(n)]
        x[0], x[-1] = x[0] or 3, x[-1] or -2  # ||x||_1^k beyond int64
        got = small_products.power_values(np.array(x, dtype=object), k)
        want = [int(v) for v in (flint.fmpz_poly(x) ** k).coeffs()]
        assert got is not None and [int(v) for v in got] == want + [0] * (len(got) - len(want))
    assert small_products.power_values(np.array([1, 2, 3]), 4) is None  # fits int64


def test_truncation_beyond_the_full_product_is_zero_padded():
    """length above n1 + n2 - 1 pads with zeros, as polyconv.convolve(length=) does."""
    ring = _Integers()
    x = np.array([3 << 100, -1], dtype=object)
    y = np.array([5, 7 << 90], dtype=object)
    out = ring.mul(x, y, length=6)
    assert [int(v) for v in out] == _flint(x.tolist(), y.tolist()) + [0, 0, 0]
