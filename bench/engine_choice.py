"""Does the planner pick the fastest exact engine?  Every offered engine forced and timed.

Run: python bench/engine_choice.py [--log2n 6,8,9,10,12,14]   (markdown-ish lines; ~2 minutes)

For 8/16/32/63-bit signed int64 operands and residues modulo 998244353 and 2^61 - 1 (n x n),
``polyconv.convolve(..., method=engine)`` for the four cheapest engines of ``polyconv.plan``
(through the planned path, so every engine pays the same preparation), best of several calls.
A line reads ``auto <engine> (<time of auto's engine / fastest forced>x fastest <engine>)``,
then each engine's measured / predicted microseconds; ``<--`` marks a choice 15% or more slower.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import polyconv
from polyconv.engines import jit_state

SETTINGS = [("8-bit", 8, None), ("16-bit", 16, None), ("32-bit", 32, None), ("63-bit", 63, None),
            ("mod p", 0, 998244353), ("mod 2^61-1", 0, 2**61 - 1)]


def best(fn, budget: float = 0.04) -> float:
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


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--log2n", default="6,8,9,10,12,14")
    args = parser.parse_args()
    jit_state.kernels()
    rng = np.random.default_rng(5)
    worst = []
    for name, bits, m in SETTINGS:
        for lg in (int(v) for v in args.log2n.split(",")):
            n = 1 << lg
            if m:
                a, b = rng.integers(0, m, n), rng.integers(0, m, n)
            else:
                a, b = (rng.integers(-2**(bits - 1), 2**(bits - 1), n) for _ in range(2))
            plan = polyconv.plan(a, b, modulus=m)
            predicted = dict(plan.alternatives)
            times = {}
            for engine, _ in plan.alternatives[:4]:
                try:
                    times[engine] = best(lambda a=a, b=b, m=m, e=engine: polyconv.convolve(
                        a, b, modulus=m, method=e))
                except ValueError:  # (an engine that refuses when forced)
                    pass
            fastest = min(times, key=times.get)
            ratio = times.get(plan.engine, float("nan")) / times[fastest]
            worst.append((ratio, name, lg))
            cells = ", ".join(f"{k} {v * 1e6:.0f}/{predicted[k] * 1e6:.0f}"
                              for k, v in times.items())
            flag = "  <--" if ratio >= 1.15 else ""
            print(f"{name} 2^{lg}: auto {plan.engine} ({ratio:.2f}x fastest {fastest}) "
                  f"{cells}{flag}", flush=True)
    print("worst:", ", ".join(f"{name} 2^{lg} {r:.2f}" for r, name, lg in sorted(worst)[-5:]))


if __name__ == "__main__":
    main()
