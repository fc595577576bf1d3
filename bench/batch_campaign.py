"""Randomised campaign for the batch axis of convolve: 2-D and broadcast N-D integer operands,
every row against python-flint.

    python bench/batch_campaign.py [--seconds 60] [--seed 1]

Each draw picks a batch shape (1-3 leading axes, one side possibly broadcast), row lengths
(mostly short, some up to 300), a magnitude pattern (random, maximum, alternating, zeros, sparse)
at 1-63 bits, and a modulus class (none, an NTT prime, a prime below 2^31, 2^61 - 1, 2^64 + 13),
then computes ``polyconv.convolve`` with ``method="auto"`` and ``method="ntt-batch"`` (skipped
when it refuses) in modes full / same / valid, and compares every row with python-flint's
``fmpz_poly`` product (reduced by the modulus, sliced by numpy.convolve's mode windows).  Stops
at the first mismatch with a reproducer.  Long campaigns live here, not in the test suite.
"""

from __future__ import annotations

import argparse
import random
import sys
import time
from collections import Counter
from pathlib import Path

import flint
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import polyconv  # noqa: E402
from polyconv.engines import jit_state  # noqa: E402

MODULI = (None, 998244353, 2**31 - 1, 2**61 - 1, 2**64 + 13)


def operand(rng: random.Random, shape: tuple, bits: int, m) -> np.ndarray:
    top = (1 << bits) - 1 if m is None else min(m - 1, 2**63 - 1)
    gen = np.random.default_rng(rng.getrandbits(32))
    pattern = rng.choice(("random", "max", "alternating", "zeros", "sparse"))
    lo = -top if m is None else 0
    if pattern == "random":
        x = gen.integers(lo, top, shape, endpoint=True)
    elif pattern == "max":
        x = np.full(shape, top, dtype=np.int64)
    elif pattern == "alternating":
        x = np.where(np.indices(shape).sum(axis=0) % 2 == 0, top, lo).astype(np.int64)
    elif pattern == "zeros":
        x = np.zeros(shape, dtype=np.int64)
    else:
        x = gen.integers(lo, top, shape, endpoint=True) * (gen.random(shape) < 0.1)
    return x.astype(np.int64)


def window(mode: str, n1: int, n2: int) -> slice:
    """numpy.convolve's mode windows of the full product."""
    if mode == "full":
        return slice(0, n1 + n2 - 1)
    if mode == "same":
        start = (min(n1, n2) - 1) // 2
        return slice(start, start + max(n1, n2))
    return slice(min(n1, n2) - 1, max(n1, n2))


def reference(a, b, m) -> list[int]:
    c = flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])
    out = [int(v) for v in c.coeffs()]
    out += [0] * (len(a) + len(b) - 1 - len(out))
    return out if m is None else [v % m for v in out]


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--seconds", type=float, default=60.0)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    jit_state.kernels()
    rng = random.Random(args.seed)
    tally: Counter = Counter()
    start = time.perf_counter()
    draws = 0
    while time.perf_counter() - start < args.seconds:
        draws += 1
        batch = tuple(rng.choice((1, 2, 3, 7, 40)) for _ in range(rng.choice((1, 1, 2, 3))))
        n1 = rng.choice((1, 2, 3, 5, 8, 16, 33, 64, 100, 300))
        n2 = rng.choice((1, 2, 4, 9, 16, 31, 64, 200))
        shape_a = batch + (n1,)
        shape_b = (batch if rng.random() < 0.7 else batch[-1:]) + (n2,)
        m = rng.choice(MODULI)
        bits = rng.choice((1, 8, 16, 31, 40, 62, 63))
        a, b = operand(rng, shape_a, bits, m), operand(rng, shape_b, bits, m)
        mode = rng.choice(("full", "full", "same", "valid"))
        full_batch = np.broadcast_shapes(a.shape[:-1], b.shape[:-1])
        rows_a = np.broadcast_to(a, full_batch + (n1,)).reshape(-1, n1)
        rows_b = np.broadcast_to(b, full_batch + (n2,)).reshape(-1, n2)
        cut = window(mode, n1, n2)
        expected = [reference(x, y, m)[cut] for x, y in zip(rows_a, rows_b, strict=True)]
        for method in ("auto", "ntt-batch"):
            try:
                got = polyconv.convolve(a, b, mode=mode, modulus=m, method=method)
            except ValueError:
                tally[f"{method} refused"] += 1
                continue
            flat = got.reshape(-1, got.shape[-1])
            for i, want in enumerate(expected):
                if [int(v) for v in flat[i]] != want:
                    print(f"MISMATCH seed={args.seed} draw={draws} method={method} mode={mode} "
                          f"modulus={m} shapes={shape_a},{shape_b} bits={bits} row={i}")
                    return 1
            tally[method] += 1
            tally["rows " + method] += len(expected)
    print(f"{draws} draws in {time.perf_counter() - start:.0f} s, 0 mismatches against "
          "python-flint")
    for key, count in sorted(tally.items()):
        print(f"  {key:22s} {count}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
