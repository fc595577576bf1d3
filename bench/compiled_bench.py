"""Compiled NTT engine vs python-flint and vs the numpy engines; JIT costs reported apart.

Run: python bench/compiled_bench.py [--quick]     (markdown tables; ~1 minute)

Ratios are polyconv / python-flint in the same process, best of several rounds (below 1:
polyconv faster).  "multiply alone" times flint's product of ready nmod_poly objects against
ntt_compiled.convolve_mod_prime on ready arrays; "end to end" times flint from Python lists
(fmpz_poly construction, product, coeffs) against polyconv.convolve on numpy arrays.  Compile
and warm-cache load times are measured in fresh processes and reported separately.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

import numpy as np
from flint import fmpz_poly, nmod_poly

import polyconv
from polyconv.engines import jit_state as jit
from polyconv.engines import ntt_compiled as nc
from polyconv.engines.ntt import convolve_ntt_mod_prime

P = 998244353


def best(fn, budget=0.2):
    fn()
    start = time.perf_counter()
    fn()
    one = max(time.perf_counter() - start, 1e-7)
    reps = max(3, min(50, int(budget / one)))
    out = one
    for _ in range(reps):
        start = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - start)
    return out


def cold_costs() -> tuple[float, float]:
    """(first compile, warm-cache load) in new processes, seconds of wall time."""
    code = ("import time; t = time.perf_counter(); "
            "from polyconv.engines import jit_state as jit; jit.kernels(); "
            "print(time.perf_counter() - t)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        run = [sys.executable, "-c", code]
        first = float(subprocess.run(run, env=env, capture_output=True, text=True,
                                     check=True).stdout)
        warm = float(subprocess.run(run, env=env, capture_output=True, text=True,
                                    check=True).stdout)
    return first, warm


def main() -> None:
    quick = "--quick" in sys.argv
    first, warm = cold_costs()
    print(f"JIT: first compile {first:.2f} s, warm-cache load {warm:.2f} s (new processes)")
    jit.kernels()
    rng = np.random.default_rng(1)
    sizes = range(6, 17 if quick else 21, 2)
    print("\n| n | mod 998244353 multiply alone / flint | numpy NTT / flint |")
    print("|---|---|---|")
    for lg in sizes:
        n = 2**lg
        a, b = rng.integers(0, P, n), rng.integers(0, P, n)
        fa, fb = nmod_poly(a.tolist(), P), nmod_poly(b.tolist(), P)
        t_flint = best(lambda fa=fa, fb=fb: fa * fb)
        t_c = best(lambda a=a, b=b: nc.convolve_mod_prime(a, b, P))
        ua, ub = a.astype(np.uint64), b.astype(np.uint64)
        t_np = best(lambda ua=ua, ub=ub: convolve_ntt_mod_prime(ua, ub, P)) if lg <= 18 else None
        np_cell = f"{t_np / t_flint:.2f}" if t_np else "-"
        print(f"| 2^{lg} | {t_c / t_flint:.3f} | {np_cell} |", flush=True)
    print("\n| n | bits | end to end / flint (auto, kernels ready) | engine |")
    print("|---|---|---|---|")
    for bits in (16, 63):
        for lg in range(6, 17 if quick else 19, 4):
            n = 2**lg
            a = rng.integers(-2**(bits - 1), 2**(bits - 1), n)
            b = rng.integers(-2**(bits - 1), 2**(bits - 1), n)

            def flint_e2e(a=a, b=b):
                return (fmpz_poly(a.tolist()) * fmpz_poly(b.tolist())).coeffs()

            t_flint = best(flint_e2e)
            t_pc = best(lambda a=a, b=b: polyconv.convolve(a, b))
            engine = polyconv.plan(a, b).engine
            print(f"| 2^{lg} | {bits} | {t_pc / t_flint:.3f} | {engine} |", flush=True)


if __name__ == "__main__":
    main()
