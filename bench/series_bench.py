"""Power series exp/log/sqrt mod 998244353 (polyconv.algebra.series_functions) vs python-flint.

Both sides start from an int64 numpy array and end with one (conversion in and out included, as a
numpy user pays it).  python-flint 0.9 exposes no exp or log for ``nmod_poly``/``nmod_series``
(``nmod_series`` has only ``coeffs``; ``fmpq_series.exp/log`` work over the rationals, far slower),
so the references are the closest python-flint offers:

* exp: Newton iteration written with python-flint's native ``nmod_poly`` operations, in two
  forms, the faster of which is the reference: "textbook" ``f <- f (1 + a - log f)`` with
  ``log f = integral(f' inverse_series_trunc(f))``, and "coupled" (the inverse of ``f`` carried
  along at half precision, the same iteration as ours, middle products as ``mul_low`` + shift);
* log: ``integral(a'.mul_low(a.inverse_series_trunc(n)))`` (FLINT's own formula for
  ``nmod_poly_log_series``, here from python-flint's primitives);
* sqrt: ``fmpz_mod_poly.sqrt_trunc`` (FLINT's native series square root; needs ``a[0] = 1``).

A second table gives the products our functions use: convolve calls and their transform work in
``U(n)`` (one full ``n x n`` product), from :func:`polyconv.algebra.counting_products`.

Run ``python bench/series_bench.py [--min-log 12] [--max-log 20] [--rounds 3]``; with
``POLYCONV_JIT=0`` the compiled NTT is off (numpy engines only).  Nothing is asserted.
"""

from __future__ import annotations

import argparse
import os
import time
from functools import partial

import flint
import numpy as np

from polyconv.algebra import counting_products
from polyconv.algebra.series_functions import exp_series, log_series, sqrt_series

P = 998244353
RNG = np.random.default_rng(2026)
CTX = flint.fmpz_mod_poly_ctx(P)


def to_numpy(coeffs, n: int) -> np.ndarray:
    out = np.zeros(n, dtype=np.int64)
    values = [int(c) for c in coeffs][:n]
    out[: len(values)] = values
    return out


def flint_log_poly(f, n: int):
    return f.derivative().mul_low(f.inverse_series_trunc(n), n - 1).integral()


def flint_exp_textbook(a: np.ndarray, n: int) -> np.ndarray:
    ap = flint.nmod_poly(a.tolist(), P)
    f, m = flint.nmod_poly([1], P), 1
    while m < n:
        m = min(2 * m, n)
        f = f.mul_low(1 + ap.truncate(m) - flint_log_poly(f, m), m)
    return to_numpy(f.coeffs(), n)


def flint_exp_coupled(a: np.ndarray, n: int) -> np.ndarray:
    ap = flint.nmod_poly(a.tolist(), P)
    da = ap.derivative()
    f, g, g_prec, m = flint.nmod_poly([1], P), flint.nmod_poly([1], P), 1, 1
    while m < n:
        target = min(2 * m, n)
        h = target - m
        while g_prec < h:
            k = min(h, 2 * g_prec)
            g = g.mul_low(2 - f.mul_low(g, k), k)
            g_prec = k
        s = da.truncate(target - 1).mul_low(f, target - 1).right_shift(m - 1)
        u = g.mul_low(s, h)
        w = u.left_shift(m - 1).integral().right_shift(m)   # u_j / (m + j)
        f = f + f.mul_low(w, h).left_shift(m)
        m = target
    return to_numpy(f.coeffs(), n)


def flint_log(a: np.ndarray, n: int) -> np.ndarray:
    return to_numpy(flint_log_poly(flint.nmod_poly(a.tolist(), P), n).coeffs(), n)


def flint_sqrt(a: np.ndarray, n: int) -> np.ndarray:
    return to_numpy(CTX(a.tolist()).sqrt_trunc(n).coeffs(), n)


def best(fn, rounds: int) -> tuple[float, np.ndarray]:
    t, out = float("inf"), None
    for _ in range(rounds):
        start = time.perf_counter()
        out = fn()
        t = min(t, time.perf_counter() - start)
    return t, out


def work_units(log: list, n: int) -> float:
    points = 0
    for n1, n2, mode, length in log:
        full = n1 + n2 - 1
        points += max(n1, n2) if mode == "valid" else (full if length is None
                                                       else min(full, 2 * length))
    return points / (2 * n)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--min-log", type=int, default=12)
    parser.add_argument("--max-log", type=int, default=20)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    if os.environ.get("POLYCONV_JIT", "1") != "0":
        from polyconv.engines import jit_state as jit
        start = time.perf_counter()
        how, _ = jit.ensure_compiled()
        print(f"compiled kernels: {how} in {time.perf_counter() - start:.2f} s (not in the table)")
    else:
        print("compiled kernels: off (POLYCONV_JIT=0)")
    print(f"{'op':<5} {'n':>5} {'ours s':>9} {'flint s':>9} {'ours/flint':>10}  agree  reference")
    counts = []
    for lg in range(args.min_log, args.max_log + 1):
        n = 2**lg
        a = RNG.integers(0, P, n)
        a0, a1 = a.copy(), a.copy()
        a0[0], a1[0] = 0, 1
        cases = (
            ("exp", partial(exp_series, a0, n, modulus=P),
             [("flint Newton textbook", partial(flint_exp_textbook, a0, n)),
              ("flint Newton coupled", partial(flint_exp_coupled, a0, n))]),
            ("log", partial(log_series, a1, n, modulus=P),
             [("flint integral(a' inv(a))", partial(flint_log, a1, n))]),
            ("sqrt", partial(sqrt_series, a1, n, modulus=P),
             [("flint sqrt_trunc", partial(flint_sqrt, a1, n))]),
        )
        for op, ours, refs in cases:
            ours()  # warm (plans, inverse tables)
            t_ours, r_ours = best(ours, args.rounds)
            timed = [(best(fn, args.rounds), name) for name, fn in refs]
            (t_ref, r_ref), name = min(timed, key=lambda item: item[0][0])
            agree = np.array_equal(r_ours, r_ref) or (
                op == "sqrt" and np.array_equal(r_ours, (P - r_ref) % P))
            others = "; ".join(f"{nm} {t:.4f}" for (t, _), nm in timed if nm != name)
            print(f"{op:<5} {'2^' + str(lg):>5} {t_ours:9.4f} {t_ref:9.4f} {t_ours / t_ref:10.2f}"
                  f"  {'yes' if agree else 'NO':<5}  {name}{'; ' + others if others else ''}",
                  flush=True)
            with counting_products() as log:
                ours()
            counts.append((op, lg, len(log), work_units(log, n)))
    print()
    print("products used: convolve calls and their transform work in U(n)")
    print(f"{'op':<5} {'n':>5} {'calls':>6} {'U(n)':>6}")
    for op, lg, calls, units in counts:
        print(f"{op:<5} {'2^' + str(lg):>5} {calls:>6} {units:>6.2f}")


if __name__ == "__main__":
    main()
