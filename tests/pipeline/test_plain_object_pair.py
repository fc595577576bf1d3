"""The short path for 1-D object arrays of Python ints (polyconv.pipeline.execute.plain_object_pair)
and the compiled NTT's stream route for planned Python-int operands.

Values are checked against python-flint's ``fmpz_poly`` product; the dtype and plan must be the
ones the planned pipeline (:func:`polyconv.pipeline.execute.convolve_prepared`, which never takes
the short path) gives.
"""

from __future__ import annotations

import random

import numpy as np
import pytest

import polyconv
from polyconv.engines import jit_state as jit
from polyconv.pipeline.execute import (
    convolve,
    convolve_integer_rows,
    convolve_prepared,
    plain_object_pair,
)

flint = pytest.importorskip("flint")


@pytest.fixture(scope="module", autouse=True)
def kernels():
    try:
        jit.kernels()
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))


def _objects(values) -> np.ndarray:
    values = list(values)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _flint(a, b) -> list[int]:
    c = flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])
    ref = [int(v) for v in c.coeffs()]
    return ref + [0] * (len(a) + len(b) - 1 - len(ref))


def _operand(rng: random.Random, n: int, bits: int) -> np.ndarray:
    edges = [0, 1, -1, 2**(bits - 1), -(2**(bits - 1)), 2**bits - 1, -(2**bits) + 1]
    return _objects(rng.choice(edges) if rng.random() < 0.3
                    else rng.getrandbits(bits) * rng.choice([1, -1]) for _ in range(n))


@pytest.mark.parametrize("n1,n2,bits_a,bits_b", [
    (1, 1, 128, 128), (3, 2, 100, 70), (8, 8, 127, 128), (64, 64, 128, 128), (100, 37, 200, 65),
    (64, 64, 128, 20), (5, 64, 40, 129), (16, 16, 40, 50), (2048, 2048, 128, 128),
    (3000, 10, 300, 300), (64, 64, 1000, 1000)])
def test_plain_object_pair_equals_flint(n1, n2, bits_a, bits_b):
    """Signs, zeros, lengths 1..2^11, values near 2^127 and 2^128, mixed widths (an operand
    below 2^63 is an int64 in the pipeline): values against flint, dtype as the planned path."""
    rng = random.Random(n1 + 7 * n2 + bits_a)
    for _ in range(3):
        a, b = _operand(rng, n1, bits_a), _operand(rng, n2, bits_b)
        out = convolve(a, b)
        assert out.tolist() == _flint(a, b)
        planned, plan = convolve_prepared(a, b)
        assert out.dtype == planned.dtype and out.shape == planned.shape
        assert polyconv.plan(a, b).engine == plan.engine


def test_near_2_127_and_the_64_bit_edge():
    """Operands of +-(2^127 - 1), -2^127, and +-2^63 (the edge where the pipeline turns an
    object operand into int64): flint's values, the planned path's dtype."""
    top = 2**127
    for a, b in [([top - 1] * 64, [-top] * 64), ([-top, top - 1, 0, 1], [top - 1, -top]),
                 ([-(2**63)] * 5, [2**100, 3]), ([2**63] * 5, [2**100, -3]),
                 ([2**63 - 1, -(2**63)], [-(2**63), 2**63 - 1, 7])]:
        x, y = _objects(a), _objects(b)
        out = convolve(x, y)
        assert out.tolist() == _flint(a, b)
        assert out.dtype == convolve_prepared(x, y)[0].dtype


def test_plain_object_pair_declines_other_requests():
    """Modulus, truncation, other modes, forced engines, 2-D, empty operands and entries that
    are not exact Python ints (bools, floats, numpy scalars) take the preparing path."""
    a = _objects([2**100 + i for i in range(10)])
    assert plain_object_pair(a, a, "full", "auto", None, None, -1) is not None
    assert plain_object_pair(a, a, "full", "auto", 7, None, -1) is None
    assert plain_object_pair(a, a, "full", "auto", None, 3, -1) is None
    assert plain_object_pair(a, a, "same", "auto", None, None, -1) is None
    assert plain_object_pair(a, a, "full", "kronecker", None, None, -1) is None
    assert plain_object_pair(a.reshape(2, 5), a, "full", "auto", None, None, -1) is None
    assert plain_object_pair(a[:0], a, "full", "auto", None, None, -1) is None
    for bad in (True, 2.5, np.int64(3)):
        b = a.copy()
        b[4] = bad
        assert plain_object_pair(a, b, "full", "auto", None, None, -1) is None
        assert convolve(a, b).tolist() == convolve_prepared(a, b)[0].tolist()
    c = a.copy()
    c[2] = True  # a bool counts as 1 in the pipeline (int(True))
    assert convolve(c, a).tolist() == _flint([int(v) for v in c], a)


def test_planned_object_rows_take_the_stream_route():
    """Planned products of Python-int operands (a batch of rows, truncation, the algebra's
    entry point) read marshal streams in the compiled engine: flint's values row by row."""
    rng = random.Random(11)
    rows_a = [[rng.getrandbits(130) - 2**129 for _ in range(20)] for _ in range(3)]
    rows_b = [[rng.getrandbits(90) - 2**89 for _ in range(17)] for _ in range(3)]
    a = np.empty((3, 20), dtype=object)
    a[:] = rows_a
    b = np.empty((3, 17), dtype=object)
    b[:] = rows_b
    out = polyconv.convolve(a, b, method="ntt-compiled")
    for r in range(3):
        assert out[r].tolist() == _flint(rows_a[r], rows_b[r])
    cut = polyconv.convolve(a[0], b[0], length=11, method="ntt-compiled")
    assert cut.tolist() == _flint(rows_a[0], rows_b[0])[:11]
    rows = convolve_integer_rows(a[1], b[1])
    assert rows.tolist() == _flint(rows_a[1], rows_b[1])


def _flint_mod(a, b, m) -> list[int]:
    return [v % m for v in _flint(a, b)]  # reduction is a ring homomorphism (common practice)


#: a 200-bit prime (sympy.nextprime(2**199 + 12345), checked below with sympy.isprime), a
#: Mersenne prime and an even modulus above 2^64
P200 = 803469022129495137770981046170581301261101496891396417663059
MODULI = [P200, 2**127 - 1, 2**100]


def test_p200_is_prime():
    sympy = pytest.importorskip("sympy")
    assert sympy.isprime(P200) and P200.bit_length() == 200


@pytest.mark.parametrize("m", MODULI)
@pytest.mark.parametrize("n1,n2", [(1, 1), (3, 2), (8, 5), (64, 64), (2048, 2048)])
def test_residues_modulo_a_wide_modulus_equal_flint(m, n1, n2):
    """Residues in [0, m) (zeros, m - 1, small and wide values) modulo a 200-bit prime, 2^127 - 1
    and 2^100: flint's product reduced modulo m, dtype as the planned path."""
    rng = random.Random(n1 * 31 + n2 + m % 1000)
    for _ in range(2):
        a = _objects(rng.choice([0, 1, m - 1, rng.randrange(m), rng.randrange(2**70)])
                     for _ in range(n1))
        b = _objects(rng.choice([0, m - 1, rng.randrange(m)]) for _ in range(n2))
        out = convolve(a, b, modulus=m)
        assert out.tolist() == _flint_mod(a, b, m)
        planned, plan = convolve_prepared(a, b, modulus=m)
        assert out.dtype == planned.dtype and polyconv.plan(a, b, modulus=m).engine == plan.engine


def test_wide_modulus_declines_what_is_not_residues():
    """Negative entries, entries >= m, and moduli up to 2^64 take the preparing path (which
    reduces): the values are still flint's."""
    m = P200
    a = _objects([5, -7, 2**150])
    b = _objects([m + 3, 2, m - 1])
    assert plain_object_pair(a, b[1:], "full", "auto", m, None, -1) is None  # a negative
    assert plain_object_pair(b, b, "full", "auto", m, None, -1) is None  # m + 3 >= m
    small = _objects([2**63 + 5, 3])  # (64 bits: stays a Python int in the pipeline)
    assert plain_object_pair(small, small, "full", "auto", 2**64, None, -1) is None
    assert plain_object_pair(small, small, "full", "auto", 2**64 + 13, None, -1) is not None
    for x, y in ((a, b), (b, b), (a, a)):
        assert convolve(x, y, modulus=m).tolist() == _flint_mod(x, y, m)
    assert convolve(small, small, modulus=2**64).tolist() == _flint_mod(small, small, 2**64)


def test_planned_modular_object_rows_take_the_stream_route():
    """Forced ntt-compiled products modulo a 200-bit prime (rows of a batch, a truncation)
    reduce the stream's exact products: flint's values."""
    rng = random.Random(12)
    a = np.empty((2, 30), dtype=object)
    a[:] = [[rng.randrange(P200) for _ in range(30)] for _ in range(2)]
    b = np.empty((2, 9), dtype=object)
    b[:] = [[rng.randrange(P200) for _ in range(9)] for _ in range(2)]
    out = polyconv.convolve(a, b, modulus=P200, method="ntt-compiled")
    for r in range(2):
        assert out[r].tolist() == _flint_mod(a[r], b[r], P200)
    cut = polyconv.convolve(a[1], b[1], modulus=P200, length=7, method="ntt-compiled")
    assert cut.tolist() == _flint_mod(a[1], b[1], P200)[:7]
