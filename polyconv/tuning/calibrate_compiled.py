"""Measure the compiled NTT engine and fit its constants (``exact.ntt_compiled``, ``exact.jit``).

Formula of :func:`polyconv.engines.ntt_compiled_plan.option`; constants fitted to timings of
the engine itself:

* ``overhead``, ``per_nlogn``, ``per_point``: one-prime products, ``c0 + c N lg N + c_pt N``;
* ``per_crt``, ``per_residue``, ``per_digit``: Garner to int64 over ``k`` primes, fitted to
  ``c_crt + c_res k C + c_digit k^2 C`` for ``C`` output coefficients;
* ``per_object_out``, ``per_object_digit``: Garner to Python ints beyond the int64 route, per
  coefficient and per ``k^2`` and coefficient;
* ``per_object_in``, ``per_input_step``: Python-int operands, per value (marshal stream and its
  check) and per value, prime and 30-bit word (their residues);
* ``ntt_batch`` (:mod:`polyconv.engines.ntt_batch_plan`): ``overhead`` and ``per_row`` of one
  batched call, ``per_mac_wrap`` (exact int64 schoolbook rows) and ``per_mac_mod`` (schoolbook
  rows modulo a prime), fitted to ``c0 + r (c_row + c_mac n^2)`` over rows and lengths, and
  ``per_mac_128`` (128-bit sums) from long rows less their Python-int outputs;
* ``ntt_wide``: :mod:`polyconv.tuning.calibrate_wide`;
* ``jit``: the time this process took to make the kernels ready (compiling them ahead of time if
  the cache was cold); a cold compile is recorded as ``compile_seconds``, a warm load as
  ``load_seconds``.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..engines import jit_state, ntt_stream
from ..engines import ntt_batch as nb
from ..engines import ntt_compiled as nc
from .calibrate_wide import measure_wide


def measure_compiled(quick: bool, best_time: Callable, fit: Callable,
                     say: Callable[[str], None]) -> dict:
    """``{"ntt_compiled": {...}, "jit": {...}}``, or ``{}`` when the kernels cannot run here."""
    if jit_state.state() == "unavailable":
        say(f"compiled kernels skipped: {jit_state.reason()}")
        return {}
    say("compiled NTT kernels (compiling them ahead of time if needed)")
    try:
        how, seconds = jit_state.ensure_compiled()
    except jit_state.JitUnavailableError as exc:
        say(f"compiled kernels skipped: {exc}")
        return {}
    timing = {"compile_seconds" if how == "compiled" else "load_seconds": seconds}
    rng = np.random.default_rng(12)
    budget = 0.02 if quick else 0.05
    p = nc.PRIMES[0][0]
    rows, times = [], []
    for k in range(4, 15 if quick else 19, 2):
        a = rng.integers(0, p, 2**(k - 1))
        times.append(best_time(lambda a=a: nc.convolve_mod_prime(a, a[::-1].copy(), p), budget))
        rows.append([1.0, 2**k * k, 2**k])
    c0, c_nlogn, c_pt = fit(rows, times)
    out = {"overhead": c0, "per_nlogn": c_nlogn, "per_point": c_pt}

    digit_rows, digit_times, extra_rows, extra = [], [], [], []
    for k in (1, 2, 3, 5, 8, 17):
        primes = tuple(q for q, _, _ in nc.PRIMES[:k])
        for count in (127, 2047, 2**14):
            res = np.stack([rng.integers(0, q, count) for q in primes])
            t64 = best_time(lambda r=res, q=primes: nc.recombine(r, q, True), budget)
            if k < 17:  # (17 primes: past any int64 product)
                digit_times.append(t64)
                digit_rows.append([1.0, k * count, k * k * count])
            if count == 2047 and k > 1:
                t_obj = best_time(lambda r=res, q=primes: nc.recombine(r, q, False), budget)
                extra.append(max(t_obj - t64, 1e-9))
                extra_rows.append([float(count), float(k * k * count)])
    out["per_crt"], out["per_residue"], out["per_digit"] = fit(digit_rows, digit_times)
    out["per_object_out"], out["per_object_digit"] = fit(extra_rows, extra)

    count = 1024  # operands beyond int64: the stream check per value, Horner steps per word
    wide = np.array([int(v) << 440 for v in rng.integers(-2**40, 2**40, count)], dtype=object)
    primes = nc.primes_for(2**1000, 2 * count)
    t = best_time(lambda: nc._residue_rows(wide, primes), budget)
    out["per_input_step"] = t / (count * len(primes) * 16)  # 480-bit values: 16 30-bit words
    t = best_time(lambda: ntt_stream.streams(wide, wide), budget)
    out["per_object_in"] = t / (2 * count)
    batch = _measure_batch(rng, budget, best_time, fit, out["per_object_out"])
    return {"ntt_compiled": out, "ntt_batch": batch, "jit": timing,
            **measure_wide(quick, best_time, fit)}


def _measure_batch(rng, budget: float, best_time: Callable, fit: Callable,
                   per_object_out: float) -> dict:
    """``exact.ntt_batch``: batched schoolbook rows, exact int64 (64- and 128-bit sums) and
    modulo a prime."""
    p = nc.PRIMES[1][0]
    out = {}
    for key, top in (("per_mac_wrap", 2**15), ("per_mac_mod", p), ("per_mac_128", 2**50)):
        rows, times = [], []
        sizes = ((1, 4), (64, 4), (1024, 4), (16, 32), (256, 32), (8, 96), (64, 96))
        for r, n in sizes if key != "per_mac_128" else ((1, 128), (4, 128), (2, 256), (8, 256)):
            a = rng.integers(0, top, (r, n))
            if key != "per_mac_mod":  # bound below 2^63 (wrapped) or 2^127 (128-bit sums)
                def run(a=a, bound=n * top * top):
                    return nb.multiply_rows_exact(a, a, bound)
            else:
                def run(a=a):
                    return nb.multiply_rows_mod_prime(a, a, p)
            t = best_time(run, budget)
            if key == "per_mac_128":  # the Python ints out are priced by per_object_out
                t = max(t - r * (2 * n - 1) * per_object_out, 0.1 * t)
            times.append(t)
            rows.append([1.0, float(r), float(r * n * n)])
        c0, c_row, c_mac = fit(rows, times)
        out[key] = c_mac
        out.setdefault("overhead", c0)
        out.setdefault("per_row", c_row)
    return out
