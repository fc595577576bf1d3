"""Measure this machine and fit the cost model's constants.

``polyconv calibrate`` calls :func:`measure` and saves the table with
:func:`polyconv.tuning.costs.save_user_costs`.  Every constant is fitted from timings of the engines
themselves (best of several runs), so the chooser compares like with like:

* ``direct``: ``t = c0 + c_mac n1 n2 + c_out (n1 + n2)`` by least squares on relative error over a
  grid of 1-D sizes;
* ``direct_batch``: ``t = c0 + m (c_step + c_elem B n)`` likewise on batched shapes;
* ``fft``: the fixed cost ``c0`` from the smallest transforms, then ``rate_by_log2n[k]`` =
  ``(t - c0) / (N log2 N)`` for one real 1-D product at ``N = 2**k`` on one thread by separate
  transform calls, and ``fused_overhead`` / ``fused_rate_by_log2n`` likewise by the library's
  fused circular product where it has one;
* ``threads``: the smallest ``N`` at which two threads beat one, and the speed-ups at large ``N``
  (against separate transform calls on one thread: the speed-up scales ``rate_by_log2n``);
* ``overlap_add``: ``c0`` and ``c_pt`` fitted to what overlap-add costs beyond its transforms
  (and ``fused_*`` for its fused variant).
"""

from __future__ import annotations

import math
import platform
import time
from collections.abc import Callable

import numpy as np

from ..engines._common import LARGE_ARRAY, fft_rate
from ..engines.direct import convolve_direct
from ..engines.fft import convolve_fft
from ..engines.overlap_add import convolve_overlap_add
from ..numerics import negacyclic as ng
from ..numerics import transforms as tf
from .calibrate_exact import measure_exact
from .costs import default_costs
from .threads import configured_threads
from .timing import best_time, fit_relative


def measure(quick: bool = False, progress: Callable[[str], None] | None = None) -> dict:
    """Time the engines on this machine and return a cost table (see module docstring).

    Parameters
    ----------
    quick : bool
        Fewer sizes and shorter timing budgets (about ten seconds instead of about a minute);
        the FFT table then stops at ``N = 2**18`` and extrapolates beyond.
    progress : callable, optional
        Called with a short message before each group of measurements.
    """
    say = progress or (lambda msg: None)
    rng = np.random.default_rng(20261201)
    budget = 0.02 if quick else 0.08
    table = default_costs()
    table["machine"] = f"{platform.node()} ({platform.machine()}, {platform.processor() or '?'})"
    table["measured"] = time.strftime("%Y-%m-%d %H:%M:%S")

    say("direct engine, 1-D")
    rows, times = [], []
    sizes = [(8, 8), (32, 32), (64, 64), (128, 128), (256, 256), (512, 512), (1024, 1024),
             (4096, 8), (4096, 32), (16384, 64), (65536, 16), (65536, 128), (2000, 300),
             (2**19, 16), (2**20, 128), (2**22, 16), (2**22, 64)]
    large = []
    for n1, n2 in sizes[: 9 if quick else None]:
        x, y = rng.standard_normal(n1), rng.standard_normal(n2)
        t = best_time(lambda x=x, y=y: convolve_direct(x, y), budget)
        if n1 + n2 >= LARGE_ARRAY:
            large.append((n1, n2, t))
            continue
        times.append(t)
        rows.append([1.0, n1 * n2, n1 + n2])
    c0, cmac, cout = fit_relative(rows, times)
    # large arrays: same multiply-add cost, a per-output cost fitted on them alone
    per_large = [max(t - c0 - cmac * n1 * n2, 0.0) / (n1 + n2) for n1, n2, t in large]
    table["direct"] = {"overhead": c0, "per_mac": cmac, "per_output": cout,
                       "per_output_large": float(np.median(per_large)) if per_large else cout}

    say("direct engine, batched")
    rows, times = [], []
    for batch, n, m in [(4, 64, 8), (16, 256, 16), (64, 1024, 4), (8, 4096, 32), (256, 64, 64),
                        (32, 512, 128)]:
        x, y = rng.standard_normal((batch, n)), rng.standard_normal((batch, m))
        times.append(best_time(lambda x=x, y=y: convolve_direct(x, y), budget))
        rows.append([1.0, m, m * batch * n])
    c0, cstep, celem = fit_relative(rows, times)
    table["direct_batch"] = {"overhead": c0, "per_step": cstep, "per_element": celem}

    say("fft engine")
    top = 18 if quick else 22
    measure_fft(table, rng, budget, top)
    say("threads")
    threads = configured_threads()
    thread_table = {"min_points": 2**62, "speedup_1d": 1.0, "speedup_batch": 1.0}
    if threads >= 2:
        for k in range(12, top + 1):
            n_fft = 2**k
            x, y = rng.standard_normal(n_fft // 2), rng.standard_normal(n_fft // 2)
            one = best_time(lambda x=x, y=y, n=n_fft: convolve_fft(x, y, n, n - 1, 1,
                                                                    fused=False), budget)
            two = best_time(lambda x=x, y=y, n=n_fft: convolve_fft(x, y, n, n - 1, threads), budget)
            if two < 0.95 * one:
                thread_table["min_points"] = min(thread_table["min_points"], n_fft)
                thread_table["speedup_1d"] = one / two
        xb, yb = rng.standard_normal((8, 2**(top - 4))), rng.standard_normal((8, 2**(top - 4)))
        n_fft = 2**(top - 3)
        one = best_time(lambda: convolve_fft(xb, yb, n_fft, n_fft - 1, 1), budget)
        two = best_time(lambda: convolve_fft(xb, yb, n_fft, n_fft - 1, threads), budget)
        thread_table["speedup_batch"] = max(1.0, one / two)
    table["threads"] = thread_table

    say("overlap-add engine")
    measure_overlap_add(table, rng, budget, quick)
    table["exact"] = measure_exact(table, quick, best_time, fit_relative, say)
    say("done")
    return table


def measure_fft(table: dict, rng: np.random.Generator, budget: float, top: int) -> None:
    """``table["fft"]``: the fixed cost and ``rate_by_log2n`` for ``N = 2^4 .. 2^top`` (one
    1-D real product of two ``N/2``-point operands, one thread, separate transform calls), and
    where the library has the fused circular product, ``fused_overhead`` and
    ``fused_rate_by_log2n`` likewise for it, and ``negacyclic_rate_by_log2n`` for the
    negacyclic real product at the lengths it takes (each size timed every way back to back)."""
    variants = ["separate", "fused"] if tf.FUSED else ["separate"]
    rates: dict = {v: {} for v in variants + ["negacyclic"]}
    fixed: dict = {}
    for k in range(4, top + 1):
        n_fft = 2**k
        n = n_fft // 2
        x, y = rng.standard_normal(n), rng.standard_normal(n)
        for v in variants + (["negacyclic"] if ng.eligible(n_fft) else []):
            t = best_time(lambda x=x, y=y, n_fft=n_fft, v=v: convolve_fft(
                x, y, n_fft, n_fft - 1, 1, fused=v != "separate", negacyclic=v == "negacyclic"),
                budget)
            base = fixed.setdefault("fused" if v == "negacyclic" else v, 0.8 * t)
            rates[v][str(k)] = max(t - base, 1e-12) / (n_fft * k)
    table["fft"] = {"overhead": fixed["separate"], "rate_by_log2n": rates["separate"]}
    if tf.FUSED:
        table["fft"].update(fused_overhead=fixed["fused"], fused_rate_by_log2n=rates["fused"])
    if rates["negacyclic"]:
        table["fft"]["negacyclic_rate_by_log2n"] = rates["negacyclic"]


def measure_overlap_add(table: dict, rng: np.random.Generator, budget: float, quick: bool) -> None:
    """``table["overlap_add"]``: what overlap-add costs beyond its transforms (read from
    ``table["fft"]``, so measure that first); with the fused circular product, the same
    constants for it as ``fused_overhead``, ``fused_per_point``, ``fused_per_sample_large``."""
    configs = [(2**12, 16, 128), (2**16, 16, 128), (2**16, 64, 512), (2**14, 128, 1024),
               (2**18, 128, 1024), (2**16, 256, 2048), (2**16, 512, 4096), (2**18, 64, 8192),
               (2**16, 1024, 16384), (2**19, 64, 1024)]
    if not quick:
        configs += [(2**20, 32, 256), (2**20, 256, 4096), (2**20, 2048, 16384),
                    (2**22, 16, 1024), (2**22, 32, 512), (2**22, 128, 1024), (2**22, 512, 4096),
                    (2**22, 2048, 16384)]
    variants = (False, True) if tf.FUSED else (False,)
    fits: dict = {v: ([], [], []) for v in variants}  # rows, times, large; sizes timed both ways
    for n_long, m, n_fft in configs:
        x, y = rng.standard_normal(n_long), rng.standard_normal(m)
        blocks = -(-n_long // (n_fft - m + 1))
        for v in variants:
            t = best_time(lambda x=x, y=y, n=n_fft, v=v: convolve_overlap_add(
                x, y, n, 1, fused=v), budget)
            transforms = (fft_rate(table, n_fft, v) * n_fft * math.log2(n_fft)
                          * (2 * blocks + 1) / 3)
            rest = max(t - transforms, 0.05 * t)
            rows, times, large = fits[v]
            if n_long >= LARGE_ARRAY:
                large.append((n_long, blocks * n_fft, rest))
                continue
            times.append(rest)
            rows.append([1.0, blocks * n_fft])
    section = {}
    for v, (rows, times, large) in fits.items():
        c0, cpt = fit_relative(rows, times)
        # large arrays: what the in-cache model leaves unexplained, per sample (memory traffic)
        per_large = [max(r - c0 - cpt * points, 0.0) / n for n, points, r in large]
        pre = "fused_" if v else ""
        section.update({pre + "overhead": c0, pre + "per_point": cpt,
                        pre + "per_sample_large": float(np.median(per_large)) if per_large
                        else 0.0})
    table["overlap_add"] = section
