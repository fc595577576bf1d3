"""Timing and fitting for the calibration: best-of-several seconds per call, and non-negative
least squares on relative error (the cost formulas are linear in their constants).

Best-of timing: the minimum over repeats estimates the undisturbed cost (common practice, no
source); relative error weights short and long runs alike.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable

import numpy as np


def best_time(fn: Callable[[], object], budget: float = 0.05, repeats: int = 5) -> float:
    """Best-of-``repeats`` seconds per call of ``fn()``; each repeat loops ~``budget / repeats``."""
    fn()
    start = time.perf_counter()
    fn()
    one = max(time.perf_counter() - start, 1e-7)
    loops = max(1, int(budget / repeats / one))
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        for _ in range(loops):
            fn()
        best = min(best, (time.perf_counter() - start) / loops)
    return best


def fit_relative(rows: list[list[float]], times: list[float]) -> list[float]:
    """Non-negative least squares on relative error (columns dropped while a weight is negative)."""
    x = np.asarray(rows, dtype=float)
    t = np.asarray(times, dtype=float)
    active = list(range(x.shape[1]))
    coef = np.zeros(x.shape[1])
    while active:
        w = x[:, active] / t[:, None]
        sol, *_ = np.linalg.lstsq(w, np.ones_like(t), rcond=None)
        if (sol >= 0).all():
            coef[active] = sol
            break
        active.pop(int(np.argmin(sol)))
    return [float(c) for c in coef]
