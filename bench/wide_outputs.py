"""Products with wide outputs (Python ints out) vs python-flint, end to end, same run.

Run: python bench/wide_outputs.py [--bits 40,63,128,1000] [--log2n 6,7,8,10,12] [--rounds 3]
[--blas-threads 1] (markdown; ~1-3 minutes)

polyconv.convolve on numpy arrays (int64 up to 63 bits, object arrays of Python ints beyond)
against flint from Python lists: ``fmpz_poly(a.tolist()) * fmpz_poly(b.tolist())`` then
``.coeffs()`` (flint's fmpz objects), and the same with the coefficients made Python ints
(``[int(c) for c in ...]``: what polyconv returns).  Ratios are polyconv / flint, the best of
``--rounds`` interleaved rounds (each a best-of-several timing of both sides); below 1: polyconv
faster.  The compiled kernels are loaded before the table (their one-off time is not in any
ratio).  ``--blas-threads`` sets the OpenBLAS threads of the ntt-wide engine's matrix products
(default: the engine's own setting, one).
"""

from __future__ import annotations

import argparse
import random
import time

import numpy as np
from flint import fmpz_poly

import polyconv
from polyconv.engines import jit_state


def best(fn, budget: float = 0.3) -> float:
    fn()
    start = time.perf_counter()
    fn()
    one = max(time.perf_counter() - start, 1e-7)
    out = one
    for _ in range(max(5, min(200, int(budget / one)))):
        start = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - start)
    return out


def operands(bits: int, n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Uniform signed ``bits``-bit operands: int64 arrays up to 63 bits, else Python ints."""
    if bits <= 63:
        rng = np.random.default_rng(seed)
        return tuple(rng.integers(-2**(bits - 1), 2**(bits - 1), n) for _ in range(2))
    gen = random.Random(seed)
    out = []
    for _ in range(2):
        x = np.empty(n, dtype=object)
        x[:] = [gen.getrandbits(bits) - (1 << (bits - 1)) for _ in range(n)]
        out.append(x)
    return tuple(out)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--bits", default="40,63,128,1000")
    parser.add_argument("--log2n", default="6,7,8,10,12")
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--blas-threads", type=int, default=0)
    args = parser.parse_args()
    if args.blas_threads:
        from polyconv.engines import ntt_wide

        ntt_wide.BLAS_THREADS = args.blas_threads
    start = time.perf_counter()
    jit_state.kernels()
    print(f"kernels ready in {time.perf_counter() - start:.2f} s (not in any ratio)\n")
    print("| bits | n | polyconv ms | flint ms | ratio | flint -> ints ms | ratio (ints) "
          "| engine |")
    print("|---|---|---|---|---|---|---|---|")
    for bits in (int(v) for v in args.bits.split(",")):
        for lg in (int(v) for v in args.log2n.split(",")):
            a, b = operands(bits, 1 << lg, 1000 * bits + lg)
            la, lb = a.tolist(), b.tolist()

            def flint_side(la=la, lb=lb):
                return (fmpz_poly(la) * fmpz_poly(lb)).coeffs()

            def flint_ints(la=la, lb=lb):
                return [int(c) for c in (fmpz_poly(la) * fmpz_poly(lb)).coeffs()]

            def ours(a=a, b=b):
                return polyconv.convolve(a, b)

            rounds = []
            for _ in range(args.rounds):
                t_flint, t_ours, t_ints = best(flint_side), best(ours), best(flint_ints)
                rounds.append((t_ours / t_flint, t_ours, t_flint, t_ints))
            ratio, t_ours, t_flint, t_ints = min(rounds)
            ratio_ints = min(r[1] / r[3] for r in rounds)
            engine = polyconv.plan(a, b).engine
            print(f"| {bits} | 2^{lg} | {1e3 * t_ours:.3f} | {1e3 * t_flint:.3f} | {ratio:.2f} "
                  f"| {1e3 * t_ints:.3f} | {ratio_ints:.2f} | {engine} |", flush=True)


if __name__ == "__main__":
    main()
