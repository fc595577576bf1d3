"""Block products (polyconv.scale.blocks): checked once, one plan per block shape, still exact.

References: numpy.convolve (int64 products whose bound fits, floats to rounding) and python-flint
(fmpz_poly, exact integer products of any size) on the concatenated data.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.scale.blocks import BlockProducts, KernelProducts
from polyconv.scale.streaming import convolve_chunks, convolve_file

flint = pytest.importorskip("flint")

RNG = np.random.default_rng(15)


def _flint_product(x, k, modulus=None) -> list[int]:
    """The exact full product by python-flint's fmpz_poly, padded to n + m - 1 entries."""
    c = (flint.fmpz_poly([int(v) for v in x]) * flint.fmpz_poly([int(v) for v in k])).coeffs()
    out = [int(v) for v in c] + [0] * (len(x) + len(k) - 1 - len(c))
    return out if modulus is None else [v % modulus for v in out]


# ----------------------------------------------------------------------------- validated once

@pytest.mark.parametrize("exact", [True, False])
def test_stream_of_k_chunks_validates_once_plans_per_shape(counted, exact):
    k_blocks, size = 40, 300
    x = RNG.integers(1 - 2**15, 2**15, k_blocks * size + 17) if exact else \
        RNG.standard_normal(k_blocks * size + 17)
    k = RNG.integers(-2**15, 2**15, 64) if exact else RNG.standard_normal(64)
    chunks = [x[s: s + size] for s in range(0, x.shape[0], size)]  # 40 of 300, one of 17
    got = np.concatenate(list(convolve_chunks(chunks, k)))
    ref = np.convolve(x, k)  # reference: numpy.convolve on the concatenated signal
    if exact:
        assert got.dtype == np.int64 and np.array_equal(got, ref)
    else:
        np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12 * np.abs(ref).max())
    assert counted["prepare_pair"] == 0  # no block went through the validating entry point
    # one plan per block shape (300 x 64; 17 x 64 is tiny for exact int64 and takes no plan);
    # the magnitudes of these blocks share a bit length, so no re-plan
    assert counted["choose"] == (1 if exact else 2)


def test_file_blocks_validate_once(tmp_path, counted):
    x = RNG.integers(1 - 2**15, 2**15, 50 * 256, dtype=np.int16)  # |x| < 2^15: one bit length
    k = RNG.integers(-2**15, 2**15, 33)
    np.save(tmp_path / "x.npy", x)
    convolve_file(tmp_path / "x.npy", k, tmp_path / "y.npy", block=256)
    got = np.load(tmp_path / "y.npy")
    # reference: numpy.convolve on int64 (the bound 33 * 2^30 fits)
    assert got.dtype == np.int64 and np.array_equal(got, np.convolve(x.astype(np.int64), k))
    assert counted["prepare_pair"] == 0 and counted["choose"] == 1  # 50 blocks, one shape


# ----------------------------------------------------------------------------- exactness

def test_block_beyond_planned_magnitude_is_replanned_and_exact():
    k = RNG.integers(-3, 4, 512)
    products = KernelProducts(k, exact=True)
    small = RNG.integers(-3, 4, 2048)
    assert np.array_equal(products(small), np.convolve(small, k))  # reference: numpy.convolve
    first = products.plan_for(products.operand(small), products.kernel)
    assert products.plans_made == 1
    # the plan chosen for |x| <= 3 may be a rounded float FFT certified only for such blocks;
    # a block of the same shape with |x| < 2^40 must not reuse it
    big = RNG.integers(-2**40, 2**40, 2048)
    got = products(big)
    assert got.tolist() == _flint_product(big, k)  # reference: python-flint fmpz_poly
    assert products.plans_made == 2
    assert products.plan_for(products.operand(big), products.kernel) is not first
    # a smaller block afterwards keeps the wider plan (bounds only grow)
    assert products(small).tolist() == np.convolve(small, k).tolist()
    assert products.plans_made == 2


def test_chunks_growing_past_int64_stay_exact():
    k = RNG.integers(-2**20, 2**20, 700)
    parts = [RNG.integers(-3, 4, 3000), RNG.integers(-2**40, 2**40, 3000),
             np.array([3**50, -(5**30)] + [7] * 2998, dtype=object), RNG.integers(-3, 4, 3000)]
    got = np.concatenate(list(convolve_chunks(parts, k)))
    x = np.concatenate([p.astype(object) for p in parts])
    assert got.dtype == object and got.tolist() == _flint_product(x, k)  # python-flint


@pytest.mark.parametrize("modulus", [998244353, 2**61 - 1, 2**64 + 13])
def test_chunks_modulus_matches_flint(modulus):
    k = RNG.integers(-2**40, 2**40, 300)
    parts = [RNG.integers(-2**62, 2**62, n) for n in (500, 500, 1, 800)]
    got = np.concatenate(list(convolve_chunks(parts, k, modulus=modulus)))
    x = np.concatenate(parts)
    # reference: python-flint fmpz_poly product, reduced
    assert got.tolist() == _flint_product(x, k, modulus)


def test_block_pairs_of_varying_shapes_match_flint():
    products = BlockProducts(exact=True)
    for n1, n2, bits in ((5, 7, 3), (600, 700, 30), (600, 700, 62), (64, 3000, 100)):
        x = [int(v) for v in RNG.integers(-2**62, 2**62, n1)]
        x = np.array([v >> (62 - bits) if bits <= 62 else v << (bits - 62) for v in x],
                     dtype=object)
        y = RNG.integers(-2**31, 2**31, n2)
        assert products.product(x, y).tolist() == _flint_product(x, y)  # python-flint


def test_object_block_of_floats_is_refused_in_an_exact_product():
    products = KernelProducts(np.array([1, 2]), exact=True, name="a")
    with pytest.raises(TypeError, match=r"^a holds real floating point numbers"):
        products(np.array([0.5, 1.5], dtype=object))


def test_object_block_in_float_product_too_large_for_float64_is_named():
    products = KernelProducts(np.array([1.0, 2.0]), exact=False)
    with pytest.raises(ValueError, match=r"chunks\[1\] holds an integer too large"):
        list(convolve_chunks([np.array([1.0]), np.array([2**1100, 1.0], dtype=object)],
                             [1.0, 2.0]))
    assert products(np.array([1, 2.5], dtype=object)).tolist() == [1.0, 4.5, 5.0]  # by hand


def test_bound_facts_hold_for_every_operand_within_the_bounds():
    from polyconv.pipeline.facts import bound_facts, integer_facts

    facts = bound_facts(3000, 700, 2**15 - 1, 3, None)
    # the rounded magnitudes are those integer_facts would plan for (2^bits - 1)
    assert (facts.max_a, facts.max_b) == (2**15 - 1, 3)
    for x in (np.full(3000, 2**15 - 1), RNG.integers(1 - 2**15, 2**15, 3000)):
        y = RNG.integers(-3, 4, 700)
        # ||x||_2 <= max|x| sqrt(n) (Cauchy-Schwarz) bounds every such operand's norm (numpy)
        assert np.linalg.norm(x.astype(float)) <= facts.norm_a
        assert np.linalg.norm(y.astype(float)) <= facts.norm_b
        assert integer_facts(x, y, None).norm_a <= facts.norm_a
