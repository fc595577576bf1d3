"""Short exact products of Python-int operands read from marshal streams
(polyconv.engines.ntt_stream, kernels ``stream_bits`` / ``stream_product``) against python-flint's
``fmpz_poly`` product and a Python-int schoolbook sum, and the bit lengths against ``int``'s own
``bit_length``."""

from __future__ import annotations

import random

import numpy as np
import pytest

pytest.importorskip("numba")
flint = pytest.importorskip("flint")

from polyconv.engines import jit_state as jit  # noqa: E402
from polyconv.engines import ntt_stream as ns  # noqa: E402


@pytest.fixture(scope="module")
def kernels():
    try:
        jit.kernels()
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    module = ns.kernels()
    assert module is not None  # CPython's marshal streams read back as written
    return module


def _objects(values: list) -> np.ndarray:
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _schoolbook(a: list[int], b: list[int]) -> list[int]:
    """c_k = sum_i a_i b_{k-i} in Python ints (the definition; common practice, no source)."""
    out = [0] * (len(a) + len(b) - 1)
    for i, u in enumerate(a):
        for j, v in enumerate(b):
            out[i + j] += u * v
    return out


def _flint(a: list[int], b: list[int]) -> list[int]:
    ref = [int(c) for c in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    return ref + [0] * (len(a) + len(b) - 1 - len(ref))


#: Values where marshal's encoding changes (int32 items up to 2^31, then 15-bit digits), where
#: 30-bit chunks and the 63/64/127/128-bit edges lie (common practice, no source).
EDGES = [0, 1, -1, 2**15 - 1, 2**15, 2**30 - 1, 2**30, 2**31 - 1, -(2**31), 2**31, 2**45,
         2**60 - 1, 2**63 - 1, -(2**63), 2**63, 2**64 - 1, 2**127 - 1, -(2**127), 2**127,
         2**128 - 1, -(2**200) + 1]


def test_stream_bits_are_the_largest_bit_length(kernels):
    """The bit length of max|v| (``int.bit_length``), and -1 for anything but exact ints."""
    rng = random.Random(3)
    for _ in range(200):
        values = [rng.choice(EDGES) * rng.choice([1, -1]) for _ in range(rng.randint(1, 9))]
        found = ns.streams(_objects(values), _objects(values[::-1]))
        top = max(abs(v) for v in values).bit_length()
        assert found[2] == found[3] == top
    for bad in ([1, True], [2**70, 1.5], [np.int64(3)], [2**70, None], [1, "7"]):
        assert ns.streams(_objects(bad), _objects([1])) is None
        assert ns.streams(_objects([1]), _objects(bad)) is None


@pytest.mark.parametrize("bits", [8, 31, 32, 63, 64, 100, 127, 128, 129, 200, 400])
def test_stream_product_equals_flint(kernels, bits):
    """Signs, zeros, lengths 1..8 and up to 2^11, values at the edges: against flint and the
    Python-int schoolbook sum; truncated products are prefixes."""
    rng = random.Random(bits)
    lengths = [(n1, n2) for n1 in range(1, 9) for n2 in (1, 2, 5, 8)] + [(64, 64), (100, 29),
                                                                         (2048, 2048)]
    for n1, n2 in lengths:
        def value():
            r = rng.random()
            return (0 if r < 0.15 else rng.choice(EDGES) if r < 0.3
                    else rng.getrandbits(bits) * rng.choice([1, -1]))
        a = [value() for _ in range(n1)]
        b = [value() for _ in range(n2)]
        found = ns.streams(_objects(a), _objects(b))
        bound = max(2**63, min(n1, n2) * 2**(found[2] + found[3]))
        full = ns.product(found[0], found[1], n1, n2, bound, n1 + n2 - 1)
        ref = _flint(a, b)
        assert full.dtype == object and full.tolist() == ref
        if n1 * n2 <= 64:
            assert ref == _schoolbook(a, b)
        keep = rng.randint(1, n1 + n2 - 1)
        assert ns.product(found[0], found[1], n1, n2, bound, keep).tolist() == ref[:keep]


def test_stream_product_with_int64_operand(kernels):
    """One operand an int64 array (its stream holds Python ints of the same values)."""
    rng = np.random.default_rng(4)
    a = rng.integers(-2**62, 2**62, 40)
    a[0] = -2**63
    b = _objects([random.Random(5).getrandbits(150) - 2**149 for _ in range(33)])
    found = ns.streams(a, b)
    assert found[2] == 64
    out = ns.product(found[0], found[1], 40, 33, 33 * 2**(64 + 150), 72)
    assert out.tolist() == _flint(a.tolist(), b.tolist())
