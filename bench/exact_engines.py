"""Exact engines vs python-flint, interleaved, best of N, one process.

    python bench/exact_engines.py [--min-log2n 10] [--max-log2n 18] [--max-log2n-big 14]
        [--repeats 3]

For each case both sides start from numpy arrays: "flint e2e" converts to fmpz_poly / nmod_poly,
multiplies and converts the coefficients back to a numpy array; "flint mul" is the multiply alone.
Our engines take and return numpy arrays, so their time is end to end.  Printed ratios are
ours / flint (below 1: we are faster).  Not run by the tests.

The compiled engine (``ntt-compiled``: numba NTT, multi-prime + Garner) is a contender wherever
its primes suffice; its kernels are compiled or loaded before the table, and that one-off time is
printed apart (first line), never inside a ratio.
"""

from __future__ import annotations

import argparse
import random
import time

import flint
import numpy as np

from polyconv import bounds, jit
from polyconv.engines import exact_fft, kronecker, ntt
from polyconv.engines import ntt_compiled as nc

PRIME62 = 4611686018427387847  # 2^62 - 57, prime


def best_of(fn, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def operands(bits: int, n: int, rng: random.Random):
    if bits <= 62:
        gen = np.random.default_rng(rng.randrange(2**32))
        top = 2**bits
        return gen.integers(-top + 1, top, n), gen.integers(-top + 1, top, n)
    def one():
        return np.array([rng.getrandbits(bits) - 2**(bits - 1) for _ in range(n)], dtype=object)
    return one(), one()


def flint_int_sides(a, b):
    fa, fb = flint.fmpz_poly(a.tolist()), flint.fmpz_poly(b.tolist())

    def e2e():
        c = flint.fmpz_poly(a.tolist()) * flint.fmpz_poly(b.tolist())
        out = np.empty(a.shape[0] + b.shape[0] - 1, dtype=object)
        out[:] = [int(x) for x in c.coeffs()]
        return out
    return e2e, lambda: fa * fb


def flint_mod_sides(a, b, m):
    fa, fb = flint.nmod_poly(a.tolist(), m), flint.nmod_poly(b.tolist(), m)

    def e2e():
        c = flint.nmod_poly(a.tolist(), m) * flint.nmod_poly(b.tolist(), m)
        return np.array([int(x) for x in c.coeffs()], dtype=np.uint64)
    return e2e, lambda: fa * fb


def int_engines(a, b, bits):
    n1, n2 = a.shape[0], b.shape[0]
    fits = bounds.product_bound(a, b) < 2**63
    engines = {"kronecker": lambda: kronecker.convolve_kronecker(a, b, as_int64=fits)}
    n_fft = 1 << (n1 + n2 - 2).bit_length()
    if bits <= 64:
        primes = ntt.primes_needed(bounds.product_bound(a, b), n_fft)
        engines[f"ntt-crt({len(primes)}p)"] = lambda: ntt.convolve_ntt_crt(a, b, primes,
                                                                         as_int64=fits or None)
    bound = bounds.product_bound(a, b)
    if nc.prime_count(bound, n_fft):
        engines[f"ntt-compiled({nc.prime_count(bound, n_fft)}p)"] = (
            lambda: nc.convolve_exact(a, b, bound))
    choice = bounds.choose_limbs(bounds.max_abs(a), bounds.max_abs(b), n1, n2, n_fft)
    if choice is not None and bits <= 64:
        engines[f"limbs({choice[0]}b x{choice[1]})"] = (
            lambda: exact_fft.convolve_limbs(a, b, *choice, n_fft, as_int64=fits))
    return engines


def mod_engines(a, b, m):
    engines = {"kronecker-mod": lambda: kronecker.convolve_kronecker_mod(a, b, m)}
    if m in ntt.PRIMES:
        ua, ub = a.astype(np.uint64), b.astype(np.uint64)
        engines["ntt"] = lambda: ntt.convolve_ntt_mod_prime(ua, ub, m)
    sa, sb = a.astype(np.int64), b.astype(np.int64)  # residues below 2^63
    engines["ntt-compiled"] = lambda: nc.convolve_mod(sa, sb, m)
    return engines


def run_case(label, flint_e2e, flint_mul, engines, repeats):
    times = {"flint e2e": [], "flint mul": []} | {k: [] for k in engines}
    for _ in range(repeats):  # interleaved: one round of everything, repeated
        times["flint e2e"].append(best_of(flint_e2e, 1))
        times["flint mul"].append(best_of(flint_mul, 1))
        for name, fn in engines.items():
            times[name].append(best_of(fn, 1))
    best = {k: min(v) for k, v in times.items()}
    for name in engines:
        print(f"| {label} | {name} | {best[name] * 1e3:.2f} | {best['flint e2e'] * 1e3:.2f} | "
              f"{best['flint mul'] * 1e3:.2f} | {best[name] / best['flint e2e']:.2f} | "
              f"{best[name] / best['flint mul']:.2f} |", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--min-log2n", type=int, default=10)
    parser.add_argument("--max-log2n", type=int, default=18)
    parser.add_argument("--max-log2n-big", type=int, default=14)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    rng = random.Random(2026)
    start = time.perf_counter()
    how, _ = jit.ensure_compiled()
    print(f"compiled kernels {how} in {time.perf_counter() - start:.2f} s (not in any ratio)\n")
    print("| case | engine | ours ms | flint e2e ms | flint mul ms | ours/e2e | ours/mul |")
    print("|---|---|---|---|---|---|---|")
    for lg in range(args.min_log2n, args.max_log2n + 1, 2):
        n = 1 << lg
        for bits in (16, 63, 1000):
            if bits == 1000 and lg > args.max_log2n_big:
                continue
            a, b = operands(bits, n, rng)
            e2e, mul = flint_int_sides(a, b)
            run_case(f"{bits}-bit n=2^{lg}", e2e, mul, int_engines(a, b, bits), args.repeats)
        for m, name in ((998244353, "998244353"), (PRIME62, "62-bit prime")):
            gen = np.random.default_rng(lg)
            a = gen.integers(0, m, n, dtype=np.uint64)
            b = gen.integers(0, m, n, dtype=np.uint64)
            e2e, mul = flint_mod_sides(a, b, m)
            run_case(f"mod {name} n=2^{lg}", e2e, mul, mod_engines(a, b, m), args.repeats)


if __name__ == "__main__":
    main()
