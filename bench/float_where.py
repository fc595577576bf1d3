"""Where the time of one float product goes, before (an earlier tree) and after (this one).

Usage::

    git archive <commit> polyconv | tar -x -C /tmp/base      # the "before" tree
    POLYCONV_THREADS=1 python bench/float_where.py --base /tmp/base/polyconv 12 14 15 16

For each ``n`` (log2) times, interleaved round by round (CPU time, best of 11): the lean
scipy.fft recipe, the earlier tree's ``convolve`` and its ducc0 ``convolve_axis`` call alone,
this tree's ``convolve`` and each step of :func:`polyconv.numerics.negacyclic.real_product`
alone on warm caches ("rest" = the whole call minus the steps).  Prints a markdown table.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np
import scipy.fft as sfft

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import ducc0  # noqa: E402
from float_ab import load_before  # noqa: E402

import polyconv  # noqa: E402
from polyconv.numerics import negacyclic as ng  # noqa: E402
from polyconv.numerics import transforms as tf  # noqa: E402


def best_of(fns: dict, rounds: int = 11, min_seconds: float = 0.02) -> dict:
    """Best-of-``rounds`` microseconds per call, every function once per round."""
    best = {k: math.inf for k in fns}
    for _ in range(rounds):
        for k, f in fns.items():
            f()
            loops, start = 0, time.process_time()
            while True:
                f()
                loops += 1
                spent = time.process_time() - start
                if spent >= min_seconds:
                    break
            best[k] = min(best[k], spent / loops * 1e6)
    return best


def steps(a: np.ndarray, b: np.ndarray, t) -> dict:
    """The steps of the negacyclic product, each alone (arrays made once)."""
    m, n, rows, cols = t.m, a.shape[0], t.rows, t.cols
    u = ng._twisted(a, t, np.empty(m, complex))
    v, w, out = u.copy(), np.empty(m, complex), np.empty(2 * n - 1)
    grid = u.reshape(rows, cols)

    def transform():
        if rows == 1:
            tf.c2c_inplace(u, 0, True)
        else:
            tf.c2c_inplace(grid, 0, True)
            tf.c2c_inplace(grid, 1, True)

    untwist = t.untwist if rows == 1 else t.untwist[:, None]
    return {"twist": lambda: ng._twisted(a, t, w), "transform": transform,
            "twiddle": (lambda: np.multiply(grid, t.forward, out=grid)) if rows > 1 else None,
            "prod": lambda: np.multiply(w, v, out=w),
            "untwist": lambda: np.multiply(grid, untwist, out=grid) if rows > 1 else
            np.multiply(u, untwist, out=w),
            "copies": lambda: (np.copyto(out[:m], u.real), np.copyto(out[m:], u.imag[:n - 1]))}


def wholes(before, a: np.ndarray, b: np.ndarray) -> dict:
    """The lean recipe, both trees' ``convolve`` and the earlier tree's ducc0 call alone."""
    n = a.shape[0]
    lean = sfft.next_fast_len(2 * n - 1, real=True)
    kernel, buffer = np.zeros(2 * n), np.zeros(2 * n)
    kernel[:n] = b
    return {"lean": lambda: sfft.irfft(sfft.rfft(a, lean) * sfft.rfft(b, lean), lean),
            "before": lambda: before.convolve(a, b),
            "fused": lambda: ducc0.fft.convolve_axis(buffer, buffer, 0, kernel, 1),
            "after": lambda: polyconv.convolve(a, b)}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--base", type=Path, required=True, help="the earlier polyconv folder")
    parser.add_argument("sizes", type=int, nargs="+", help="log2 n of the n x n products")
    args = parser.parse_args()
    before = load_before(args.base.resolve())
    rng = np.random.default_rng(0)
    print("| n | lean | before | of it: ducc0 convolve_axis | of it: padding, Python | after | "
          "twists (2) | transforms (3, or 6 calls split) | twiddle products (3) | pointwise "
          "product | untwist | output copies | rest |\n" + "|---" * 13 + "|")
    for e in args.sizes:
        n = 2**e
        a, b = rng.standard_normal(n), rng.standard_normal(n)
        t = ng.tables(n)
        fns = wholes(before, a, b)
        fns.update({k: f for k, f in steps(a, b, t).items() if f is not None})
        with np.errstate(all="ignore"):  # repeated unscaled transforms reach inf: x86 runs
            us = best_of(fns)  # inf and NaN at full speed (only subnormals are slow)
        twiddle = 3 * us.get("twiddle", 0.0)
        parts = (2 * us["twist"] + 3 * us["transform"] + twiddle + us["prod"] + us["untwist"]
                 + us["copies"])
        print(f"| 2^{e} (N 2^{e + 1}, {t.rows} x {t.cols}) | {us['lean']:.0f} | "
              f"{us['before']:.0f} | {us['fused']:.0f} | {us['before'] - us['fused']:.0f} | "
              f"{us['after']:.0f} | {2 * us['twist']:.0f} | {3 * us['transform']:.0f} | "
              f"{twiddle:.0f} | {us['prod']:.0f} | {us['untwist']:.0f} | {us['copies']:.0f} | "
              f"{us['after'] - parts:.0f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
