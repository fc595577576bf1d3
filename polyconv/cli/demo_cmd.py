"""``polyconv demo``: short scenarios on invented data, printed to the terminal.

All names and numbers here are invented for the demo (a fictional parcel pipeline, a fictional
sensor); nothing is real data.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

from .. import api

CAUTION = (
    "Model output, not advice: independence of stages is assumed and delays are rounded to a\n"
    "1 ms grid. Check against qualified engineering practice before relying on a deadline."
)

EXAMPLE = """example:
  polyconv demo
  polyconv demo --json
"""


def register(sub) -> None:
    p = sub.add_parser(
        "demo",
        help="run short scenarios on bundled invented data",
        description="Multiply exact integer polynomials, add the delays of a fictional "
        "order pipeline and smooth a long invented sensor trace, showing which engine polyconv "
        "chose each time and why.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--json", action="store_true", help="print a machine-readable summary")
    p.set_defaults(run=run)


def dice_counts() -> dict:
    """Ways to roll each total with three six-sided dice: coefficients of (x + ... + x^6)^3."""
    die = np.array([0, 1, 1, 1, 1, 1, 1])
    two = api.convolve(die, die)
    three = api.convolve(two, die)
    return {int(total): int(ways) for total, ways in enumerate(three) if ways}


def pipeline_latency() -> dict:
    """End-to-end latency of the invented 'Larkspur Parcel' order pipeline, 1 ms grid."""
    ms = np.arange(80)
    stages = {
        "accept order": np.exp(-0.5 * ((ms - 3) / 1.0) ** 2),
        "reserve stock": np.where(ms >= 2, np.exp(-(ms - 2) / 6.0), 0.0),
        "charge card": np.exp(-0.5 * ((ms - 12) / 3.0) ** 2) + 0.05 * (ms >= 30) * (ms < 60),
    }
    pmfs = {name: p / p.sum() for name, p in stages.items()}
    total = np.array([1.0])
    for p in pmfs.values():
        total = api.convolve(total, p)
    cdf = np.cumsum(total)
    def percentile(q: float) -> int:
        return int(np.searchsorted(cdf, q - 1e-12))
    return {
        "stages": list(pmfs),
        "mean_ms": float(np.dot(np.arange(total.size), total)),
        "p50_ms": percentile(0.50),
        "p99_ms": percentile(0.99),
        "miss_probability_60ms": float(max(0.0, 1.0 - cdf[60])),
    }


def smooth_trace() -> dict:
    """Smooth an invented 2^20-sample sensor trace with a 129-tap window; report the plan."""
    rng = np.random.default_rng(7)
    trace = np.cumsum(rng.standard_normal(2**20))
    window = np.hanning(129)
    window /= window.sum()
    the_plan = api.plan(trace, window, mode="same")
    start = time.perf_counter()
    smoothed = api.convolve(trace, window, mode="same")
    seconds = time.perf_counter() - start
    return {"samples": int(trace.size), "taps": int(window.size), "engine": the_plan.engine,
            "reason": the_plan.reason, "seconds": seconds, "output_length": int(smoothed.size)}


def run(args) -> int:
    dice = dice_counts()
    latency = pipeline_latency()
    smooth = smooth_trace()
    if args.json:
        print(json.dumps({"dice": dice, "pipeline": latency, "smoothing": smooth}, indent=2))
        return 0
    print("polyconv demo (invented data)\n")
    print("1. Three six-sided dice: ways to roll each total, (x + ... + x^6)^3, exact integers")
    print("   " + "  ".join(f"{t}:{w}" for t, w in dice.items()))
    print(f"   total {sum(dice.values())} = 6^3\n")
    print("2. Fictional 'Larkspur Parcel' order pipeline: " + " -> ".join(latency["stages"]))
    print(f"   end-to-end mean {latency['mean_ms']:.1f} ms, p50 {latency['p50_ms']} ms, "
          f"p99 {latency['p99_ms']} ms, P(> 60 ms) = {latency['miss_probability_60ms']:.2e}")
    for line in CAUTION.splitlines():
        print("   " + line)
    print()
    print(f"3. Smoothing an invented sensor trace: {smooth['samples']} samples x "
          f"{smooth['taps']} taps")
    print(f"   engine {smooth['engine']}: {smooth['reason']}")
    print(f"   took {smooth['seconds'] * 1e3:.1f} ms")
    return 0
