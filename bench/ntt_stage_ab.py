"""Interleaved A/B timing of the NTT forward/inverse kernels against another version of
``polyconv/engines/_kernels_ntt.py`` (for checking that a kernel edit costs no speed).

Run: git show REV:polyconv/engines/_kernels_ntt.py > /tmp/kernels_a.py
     PYTHONPATH=. nice -n 10 python bench/ntt_stage_ab.py /tmp/kernels_a.py [ROUNDS]

A is the given file (loaded as a sibling module, so its relative imports resolve: it uses the
working tree's ``_kernels_simd``, ``_kernels_arith``, ``_kernels_crt``), B the
working tree's; both run in one process, alternating, best of ROUNDS (default 15); outputs are
checked equal modulo p.  Ratios B/A below 1: B faster.
"""

from __future__ import annotations

import importlib.util
import sys
import time

import numpy as np

from polyconv.engines import jit_state
from polyconv.engines import ntt_compiled as nc

B = jit_state.kernels("_kernels_ntt")
spec = importlib.util.spec_from_file_location("polyconv.engines._kernels_ntt_a", sys.argv[1])
A = importlib.util.module_from_spec(spec)
sys.modules[spec.name] = A
spec.loader.exec_module(A)
ROUNDS = int(sys.argv[2]) if len(sys.argv) > 2 else 15
P = 998244353
SIZES = (8, 10, 12, 13, 14, 16, 18, 20)


def main() -> None:
    rng = np.random.default_rng(1)
    print("| n | forward A us | forward B us | B/A | inverse A us | inverse B us | B/A |")
    print("|---|---|---|---|---|---|---|")
    for logn in SIZES:
        n = 1 << logn
        tw, twq, itw, itwq, _ = nc.tables(P, n)
        x0 = rng.integers(0, P, n).astype(np.uint32)
        xa, xb = x0.copy(), x0.copy()
        A.forward(xa, P, tw, twq)
        B.forward(xb, P, tw, twq)
        A.inverse(xa, P, itw, itwq)
        B.inverse(xb, P, itw, itwq)
        # lazy reductions may differ between versions: equal modulo p is the contract
        assert (xa % P == xb % P).all(), "the two versions disagree"
        reps = max(3, int(3e6 // (n * logn)))
        best: dict = {}
        for _ in range(ROUNDS):
            for lab, k in (("A", A), ("B", B)):
                for name, (a, b) in (("forward", (tw, twq)), ("inverse", (itw, itwq))):
                    f = getattr(k, name)
                    x = x0.copy()
                    t = time.perf_counter()
                    for _ in range(reps):
                        f(x, P, a, b)
                    dt = (time.perf_counter() - t) / reps
                    best[lab, name] = min(best.get((lab, name), 1e9), dt)
        cells = []
        for name in ("forward", "inverse"):
            ta, tb = best["A", name], best["B", name]
            cells += [f"{ta * 1e6:.1f}", f"{tb * 1e6:.1f}", f"{tb / ta:.3f}"]
        print(f"| 2^{logn} | " + " | ".join(cells) + " |", flush=True)


if __name__ == "__main__":
    main()
