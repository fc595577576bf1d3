"""Measure the exact engines and fit the ``exact`` section of the cost table.

Formulas are the option functions of the exact engines; each engine's constants are fitted
(least
squares on relative error, non-negative) to timings of the engine itself:

* ``direct_int64`` / ``direct_object``: ``c0 + c_mac n1 n2`` (objects: times
  :func:`polyconv.engines.exact_direct.object_mac_factor`);
* ``rounded``: ``c0 + s F(N) + c_pt N`` with ``F`` the float FFT model of
  :func:`polyconv.engines._common.fft_rate`;
* ``limbs``: ``c0 + s F(N) T / 3 + c_pt N (ka + kb)`` for ``T`` transforms;
* ``kronecker``: a table of GMP multiplication rates per ``log2`` bit size, then
  ``c0 + c_byte bytes + c_obj n_out`` for packing, unpacking and Python-int creation;
* ``ntt``: ``c0 + c N log2 N``; ``check_per_point``: the random-evaluation check per coefficient.
"""

from __future__ import annotations

from collections.abc import Callable

import gmpy2
import numpy as np

from ..engines._common import fft_rate
from ..engines.exact_direct import convolve_exact_direct, object_mac_factor
from ..engines.exact_fft import convolve_limbs, convolve_limbs_mod, convolve_rounded
from ..engines.kronecker import convolve_kronecker, kronecker_seconds
from ..engines.ntt import convolve_ntt_mod_prime
from ..numerics import bounds
from ..numerics.checks import random_evaluation_check
from ..numerics.limits import max_abs
from .calibrate_compiled import measure_compiled


def measure_exact(table: dict, quick: bool, best_time: Callable, fit: Callable,
                  say: Callable[[str], None]) -> dict:
    """Return the ``exact`` section for ``table`` (whose float sections are already measured)."""
    rng = np.random.default_rng(7)
    budget = 0.02 if quick else 0.06
    exact: dict = {}

    say("exact direct summation")
    # 26-bit values: the bound n 2^50 is past float64's 2^53 but inside int64
    exact["direct_int64"] = measure_direct(rng, 25, quick, best_time, fit)
    exact["direct_float"] = measure_direct(rng, 15, quick, best_time, fit)
    rows, times = [], []
    for n, bits in [(8, 100), (32, 100), (64, 300), (96, 1000)]:
        a = np.array([int(v) << (bits - 40) for v in rng.integers(-2**40, 2**40, n)],
                     dtype=object)
        times.append(best_time(lambda a=a: convolve_exact_direct(a, a), budget))
        words = -(-(2 * bits + 8) // 64)
        rows.append([1.0, n * n * object_mac_factor(words)])
    c0, cmac = fit(rows, times)
    exact["direct_object"] = {"overhead": c0, "per_mac": cmac}

    say("exact float FFT with rounding, and limbs")
    rows, times = [], []
    limb_rows, limb_times = [], []
    for k in range(6, 15 if quick else 17, 2):
        n_fft = 2**k
        a = rng.integers(-2**10, 2**10, n_fft // 2)
        times.append(best_time(lambda a=a, n=n_fft: convolve_rounded(a, a, n), budget))
        flops = fft_rate(table, n_fft) * n_fft * k
        rows.append([1.0, flops, n_fft])
        big = rng.integers(-2**40, 2**40, n_fft // 2)
        params = bounds.choose_limbs(2**40, 2**40, n_fft // 2, n_fft // 2, n_fft)
        if params is not None:
            bits, ka, kb = params
            limb_times.append(best_time(
                lambda x=big, n=n_fft, p=params: convolve_limbs(x, x, p[0], p[1], p[2], n),
                budget))
            limb_rows.append([1.0, flops * (2 * (ka + kb) - 1) / 3, n_fft * (ka + kb)])
    c0, scale, cpt = fit(rows, times)
    exact["rounded"] = {"overhead": c0, "scale": scale, "per_point": cpt}
    c0, scale, cpt = fit(limb_rows, limb_times)
    exact["limbs"] = {"overhead": c0, "scale": scale, "per_point": cpt}
    # modular limbs, two regimes: int64 recombination (m < 2^31), Montgomery (odd m < 2^62)
    for key, modulus in (("limbs_mod", 998244353), ("limbs_mod_wide", 2**62 - 57)):
        rows, times = [], []
        for k in range(8, 15 if quick else 19, 2):  # up to 2^18: out of cache, passes cost more
            n_fft = 2**k
            x = rng.integers(0, modulus, n_fft // 2)
            params = bounds.choose_limbs(modulus // 2 + 1, modulus // 2 + 1, n_fft // 2,
                                         n_fft // 2, n_fft)
            bits, ka, kb = params
            times.append(best_time(lambda x=x, n=n_fft, p=params, m=modulus: convolve_limbs_mod(
                x, x, m, p[0], p[1], p[2], n), budget))
            flops = fft_rate(table, n_fft) * n_fft * k
            rows.append([1.0, flops * (2 * (ka + kb) - 1) / 3, n_fft * (ka + kb)])
        c0, scale, cpt = fit(rows, times)
        exact[key] = {"overhead": c0, "scale": scale, "per_point": cpt}

    say("GMP multiplication and Kronecker packing")
    rates = {}
    for lg in range(10, 23 if quick else 25):
        bits = 2**lg
        x = gmpy2.mpz(int.from_bytes(rng.bytes(bits // 8), "little"))
        y = gmpy2.mpz(int.from_bytes(rng.bytes(bits // 8), "little"))
        rates[str(lg)] = best_time(lambda x=x, y=y: x * y, budget) / (bits * lg)
    kron = {"overhead": 0.0, "per_byte": 0.0, "per_object_out": 0.0,
            "mul_rate_by_log2bits": rates}
    rows, times = [], []
    for n, bits, as_int64 in [(256, 16, True), (4096, 16, True), (2**14, 20, True),
                              (1024, 62, False), (4096, 62, False), (512, 500, False)]:
        a = _random_ints(rng, n, bits)
        t = best_time(lambda a=a, f=as_int64: convolve_kronecker(a, a, as_int64=f), budget)
        bound = n * max_abs(a) ** 2
        slot = 8 * -(-((bound + 1).bit_length() + 1) // 8)
        mul = kronecker_seconds(kron, n, n, slot, True)
        times.append(max(t - mul, 0.1 * t))
        rows.append([1.0, (4 * n - 1) * slot / 8, 0.0 if as_int64 else 2 * n - 1])
    c0, cbyte, cobj = fit(rows, times)
    kron.update(overhead=c0, per_byte=cbyte, per_object_out=cobj)
    exact["kronecker"] = kron

    say("number-theoretic transform")
    rows, times = [], []
    p = 998244353
    for k in range(6, 15 if quick else 18, 2):
        a = rng.integers(0, p, 2**(k - 1))
        times.append(best_time(lambda a=a: convolve_ntt_mod_prime(a, a, p), budget))
        rows.append([1.0, 2**k * k])
    c0, c = fit(rows, times)
    exact["ntt"] = {"overhead": c0, "per_nlogn": c}

    say("random-evaluation check")
    n = 2**16
    a = rng.integers(-2**15, 2**15, n)
    c = convolve_rounded(a, a, 2 * n)
    exact["check_per_point"] = best_time(lambda: random_evaluation_check(a, a, c),
                                         budget) / (4 * n)
    exact.update(measure_compiled(quick, best_time, fit, say))
    return exact


def measure_direct(rng: np.random.Generator, bits: int, quick: bool, best_time: Callable,
                   fit: Callable) -> dict:
    """Schoolbook products of ``bits``-bit operands: overhead and seconds per multiply-add.

    15-bit operands keep every sum below 2^53 (the float64 path of
    :func:`polyconv.engines.exact_direct.convolve_exact_direct`), 25-bit ones go past it (int64).
    """
    budget = 0.02 if quick else 0.06
    rows, times = [], []
    for n in (16, 64, 128, 256, 512) if quick else (16, 32, 64, 128, 256, 512, 1024):
        a, b = rng.integers(-2**bits, 2**bits, n), rng.integers(-2**bits, 2**bits, n)
        times.append(best_time(lambda a=a, b=b: convolve_exact_direct(a, b), budget))
        rows.append([1.0, n * n])
    c0, cmac = fit(rows, times)
    return {"overhead": c0, "per_mac": cmac}


def _random_ints(rng: np.random.Generator, n: int, bits: int) -> np.ndarray:
    """``n`` random signed integers of about ``bits`` bits: int64 when they fit, else objects."""
    if bits <= 62:
        return rng.integers(-2**bits, 2**bits, n)
    raw = [int.from_bytes(rng.bytes(bits // 8), "little") - (1 << (bits - 1)) for _ in range(n)]
    out = np.empty(n, dtype=object)
    out[:] = raw
    return out

