"""The batch axis of convolve on the batched compiled engine ("ntt-batch"), row by row against
python-flint.

Each row of a 2-D (or N-D, broadcast) integer product is compared with python-flint's
``fmpz_poly`` / ``nmod_poly`` product of that row pair (the reference), zero-padded to the full
length; the plan must name the batched engine where it is forced, and "auto" must give the same
values whichever engine it picks.
"""

from __future__ import annotations

import numpy as np
import pytest

flint = pytest.importorskip("flint")
pytest.importorskip("numba")

from flint_rows import flint_row_product as _reference  # noqa: E402

from polyconv.pipeline.execute import convolve_prepared  # noqa: E402
from polyconv.pipeline.prepare import plan  # noqa: E402

P = 998244353


pytestmark = pytest.mark.usefixtures("batch_kernels")


def _rows(x, batch):
    return np.broadcast_to(x, batch + x.shape[-1:]).reshape(-1, x.shape[-1])


CASES = [  # shape of a, shape of b, bits, modulus
    ((100, 8), (100, 8), 15, None),       # int64 out, schoolbook in wrapping arithmetic
    ((5, 3, 7), (7,), 62, None),          # Python ints out (primes + Garner), b broadcast
    ((1, 9), (4, 9), 20, P),              # an NTT prime, a broadcast
    ((6, 30), (6, 40), 40, 2**61 - 1),    # any modulus: primes, Garner reduced modulo m
    ((50, 16), (50, 16), 31, None),       # bound above 2^63: objects out
    ((4, 200), (4, 100), 62, None),       # NTT rows beyond the schoolbook cutoff
    ((3, 70), (3, 90), 29, P),            # NTT rows modulo the prime
]


@pytest.mark.parametrize("method", ["ntt-batch", "auto"])
@pytest.mark.parametrize("shape_a,shape_b,bits,m", CASES)
def test_batch_rows_equal_flint(shape_a, shape_b, bits, m, method):
    rng = np.random.default_rng(sum(shape_a) + 7 * sum(shape_b) + bits)
    lo = 0 if m is not None else -2**bits
    a = rng.integers(lo, 2**bits, shape_a)
    b = rng.integers(lo, 2**bits, shape_b)
    out, the_plan = convolve_prepared(a, b, modulus=m, method=method)
    if method != "auto":
        assert the_plan.engine == "ntt-batch"
    batch = np.broadcast_shapes(a.shape[:-1], b.shape[:-1])
    assert out.shape == batch + (shape_a[-1] + shape_b[-1] - 1,)
    rows_a, rows_b = _rows(a, batch), _rows(b, batch)
    got = out.reshape(-1, out.shape[-1])
    for i in range(rows_a.shape[0]):
        assert [int(v) for v in got[i]] == _reference(rows_a[i], rows_b[i], m)


def test_batch_modes_and_length_equal_flint():
    """"same", "valid" and ``length=`` slice the batched full products as numpy.convolve's
    definitions do (reference: flint's full product, sliced)."""
    rng = np.random.default_rng(3)
    a = rng.integers(-2**40, 2**40, (6, 12))
    b = rng.integers(-2**40, 2**40, (6, 5))
    full = [_reference(a[i], b[i]) for i in range(6)]
    for mode in ("same", "valid"):
        out, the_plan = convolve_prepared(a, b, mode=mode, method="ntt-batch")
        # numpy.convolve's documented windows for n1 = 12, n2 = 5: "same" keeps 12 entries
        # from (5 - 1) // 2 = 2, "valid" the 12 - 5 + 1 = 8 from 4
        window = {"same": slice(2, 14), "valid": slice(4, 12)}[mode]
        assert out.shape[1] == len(range(26)[window])
        for i in range(6):
            assert [int(v) for v in out[i]] == full[i][window]
    out, _ = convolve_prepared(a, b, length=20, method="ntt-batch")
    for i in range(6):
        assert [int(v) for v in out[i]] == full[i] + [0] * 4


def test_batched_engine_chosen_for_many_short_rows():
    """Many short integer rows: the cost model prefers one batched call to a call per row."""
    a = np.ones((200, 8), dtype=np.int64)
    assert plan(a, a).engine == "ntt-batch"
    assert plan(a, a, modulus=P).engine == "ntt-batch"
