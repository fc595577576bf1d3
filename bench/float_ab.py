"""Float products on one thread: an earlier polyconv tree against this one and the lean recipe.

Usage::

    git archive <commit> polyconv | tar -x -C /tmp/base      # the "before" tree
    POLYCONV_THREADS=1 python bench/float_ab.py --base /tmp/base/polyconv [--clock cpu]

Both versions run in one process (the earlier one imported under the name ``polyconv_before``;
it reads the cost table shipped with this tree, whose keys it knows), interleaved round by round
with issue #12's lean scipy.fft recipe (``irfft(rfft(a, L) * rfft(b, L), L)`` at
``L = scipy.fft.next_fast_len(n1 + n2 - 1, real=True)``, one worker); best of the rounds.
Prints a markdown table; the last column is the largest difference between the two results.
"""

from __future__ import annotations

import argparse
import importlib.util
import math
import sys
import time
from pathlib import Path

import numpy as np
import scipy.fft as sfft

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import polyconv  # noqa: E402

CASES = [(2**e, 2**e) for e in range(6, 23)] + [(2**22, m) for m in (16, 64, 256, 1024, 4096)]


def load_before(path: Path):
    """The polyconv package at ``path`` as the module ``polyconv_before``."""
    spec = importlib.util.spec_from_file_location(
        "polyconv_before", path / "__init__.py", submodule_search_locations=[str(path)])
    module = importlib.util.module_from_spec(spec)
    sys.modules["polyconv_before"] = module
    spec.loader.exec_module(module)
    return module


def best_of(contenders: dict, rounds: int, min_seconds: float, clock) -> dict:
    """Best-of-``rounds`` seconds per call, each round timing every contender once."""
    for fn in contenders.values():
        fn()
    best = {name: math.inf for name in contenders}
    for _ in range(rounds):
        for name, fn in contenders.items():
            loops, start = 0, clock()
            while True:
                fn()
                loops += 1
                spent = clock() - start
                if spent >= min_seconds:
                    break
            best[name] = min(best[name], spent / loops)
    return best


def contenders(before, x: np.ndarray, y: np.ndarray) -> dict:
    """The lean recipe, the earlier polyconv and this one on one pair."""
    full = x.shape[0] + y.shape[0] - 1
    size = sfft.next_fast_len(full, real=True)
    return {"lean": lambda: sfft.irfft(sfft.rfft(x, size) * sfft.rfft(y, size), size)[:full],
            "before": lambda: before.convolve(x, y), "after": lambda: polyconv.convolve(x, y)}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--base", type=Path, required=True, help="the earlier polyconv folder")
    parser.add_argument("--clock", choices=["wall", "cpu"], default="wall")
    parser.add_argument("--sizes", default="6-22",
                        help="log2 n of the equal-length rows, e.g. 12-16 (default 6-22)")
    parser.add_argument("--no-long-short", action="store_true", help="skip the 2^22 x m rows")
    parser.add_argument("--kernels", action="store_true",
                        help="load this tree's compiled kernels first (the compiled passes)")
    args = parser.parse_args()
    before = load_before(args.base.resolve())
    if args.kernels:
        from polyconv.engines import fft, jit_state

        jit_state.kernels()
        ok = fft.negacyclic_kernels() is not None
        print(f"kernels {jit_state.state()}, compiled passes {ok}")
    clock = time.process_time if args.clock == "cpu" else time.perf_counter
    rng = np.random.default_rng(1)
    print("| sizes | lean ms | before ms | after ms | before / lean | after / lean | "
          "after / before | engine | max difference |\n|---|---|---|---|---|---|---|---|---|")
    low, _, high = args.sizes.partition("-")
    cases = [(2**e, 2**e) for e in range(int(low), int(high or low) + 1)]
    cases += [] if args.no_long_short else CASES[-5:]
    for n1, n2 in cases:
        x, y = rng.standard_normal(n1), rng.standard_normal(n2)
        c = contenders(before, x, y)
        big = n1 >= 2**19
        t = best_of(c, 3 if big else 7, 0.3 if big else 0.05, clock)
        diff = float(np.max(np.abs(c["after"]() - c["before"]())))
        label = f"2^{n1.bit_length() - 1} x " + (
            f"2^{n2.bit_length() - 1}" if n1 == n2 else str(n2))
        print(f"| {label} | {t['lean'] * 1e3:.4g} | {t['before'] * 1e3:.4g} | "
              f"{t['after'] * 1e3:.4g} | {t['before'] / t['lean']:.2f} | "
              f"{t['after'] / t['lean']:.2f} | {t['after'] / t['before']:.2f} | "
              f"{polyconv.plan(x, y).engine} | {diff:.1e} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
