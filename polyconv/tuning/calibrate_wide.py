"""Measure the wide multi-modular engine and fit its constants (``exact.ntt_wide``).

Formula of :func:`polyconv.engines.ntt_wide_plan.seconds`; constants fitted (non-negative least
squares on relative error) to timings of :func:`polyconv.engines.ntt_wide.convolve_wide` over
coefficient sizes and lengths; ``overhead`` adds the measured Python of a ``convolve`` call
around it (``PIPELINE_SECONDS``, the difference seen on the development machine: ~30 us).
"""

from __future__ import annotations

import math
import random
from collections.abc import Callable

import numpy as np

from ..engines import ntt_wide as nw

#: Python of ``convolve`` around the engine (classification, facts, planning), not in the fit.
PIPELINE_SECONDS = 3e-5


def features(n1: int, n2: int, k: int, d: int, digits_out: int) -> list[float]:
    """The fit's columns for one product (the terms of ``ntt_wide_plan.seconds``)."""
    n = nw.transform_length(n1, n2)
    count = n1 + n2 - 1
    direct = nw.uses_direct(n1, n2)
    return [1.0, 0.0 if direct else float(k), 0.0 if direct else k * n * max(1, math.log2(n)),
            float(k * d * (n1 + n2) + (k + 1) * digits_out * count),
            float(d * (n1 + n2) + digits_out * count),
            float(nw.lanes(k) * n1 * n2) if direct else 0.0]


def measure_wide(quick: bool, best_time: Callable, fit: Callable) -> dict:
    """``{"ntt_wide": {...}}`` (the kernels must be ready: the caller checked)."""
    gen = random.Random(12)
    budget = 0.02 if quick else 0.05
    rows, times = [], []
    for bits in ((200, 1000) if quick else (100, 300, 1000, 2000)):
        for n in ((16, 64, 256, 1024) if quick else (4, 16, 32, 64, 90, 256, 1024, 4096)):
            a, b = ([gen.getrandbits(bits) - (1 << (bits - 1)) for _ in range(n)]
                    for _ in range(2))
            bound = n * max(map(abs, a)) * max(map(abs, b))
            primes = nw.primes_for(bound, nw.transform_length(n, n))
            if primes is None:
                continue
            d = -(-max(map(abs, a + b)).bit_length() // 15)
            digits_out = -(-math.prod(primes).bit_length() // 15) + 1
            x, y = np.array(a, dtype=object), np.array(b, dtype=object)
            times.append(best_time(lambda x=x, y=y, bound=bound: nw.convolve_wide(x, y, bound),
                                   budget))
            rows.append(features(n, n, len(primes), d, digits_out))
    c0, c_prime, c_nlogn, c_mac, c_digit, c_lane = fit(rows, times)
    return {"ntt_wide": {"overhead": c0 + PIPELINE_SECONDS, "per_prime": c_prime,
                         "per_nlogn": c_nlogn, "per_mac": c_mac, "per_digit": c_digit,
                         "per_lane_term": c_lane}}
