"""Products over several axes (``axes=``) against scipy and python-flint (issue 17 item 1).

Float table: ``polyconv.convolve(a, b, axes=(0, 1))`` against ``scipy.signal.fftconvolve(a, b,
axes=(0, 1))`` (one worker, its default) on random float64 squares, timed interleaved in one
process, best of ``--repeats``; the ratio is polyconv / scipy (below 1: polyconv faster).  Goal
<= 0.7 at 1024^2 * 64^2 and 2048^2 * 2048^2.  polyconv uses the threads ``POLYCONV_THREADS``
allows (run with ``POLYCONV_THREADS=1`` for a like-for-like single-thread comparison).

Exact table: bivariate integer products from int64 numpy arrays to a numpy result, end to end
(conversion in and out included on both sides, as a numpy user pays):
``fmpz_mpoly`` (python-flint's multivariate product, built with ``from_dict`` and read back with
``to_dict``) and the Kronecker substitution by hand in python-flint (``fmpz_poly`` of the
flattened, padded array; ``nmod_poly`` mod p).  Columns ``mpoly*`` give the flint product alone
(no conversion) for reference.  Goal <= 0.5 of ``fmpz_mpoly``.

Run ``nice -n 10 python bench/nd_bench.py [--repeats 3] [--quick]``.  Nothing is asserted.
"""

from __future__ import annotations

import argparse
import time

import flint
import numpy as np
import scipy.signal as ss

import polyconv

P = 998244353
RNG = np.random.default_rng(17)


def once(fn, *args, **kwargs) -> float:
    """Seconds of one call ``fn(*args, **kwargs)``."""
    t = time.perf_counter()
    fn(*args, **kwargs)
    return time.perf_counter() - t


def float_rows(cases, repeats):
    print("| a | b | mode | polyconv engine | polyconv s | scipy fftconvolve s | ratio |")
    print("|---|---|---|---|---|---|---|")
    for sa, sb, mode in cases:
        a, b = RNG.standard_normal(sa), RNG.standard_normal(sb)
        plan = polyconv.plan(a, b, axes=(0, 1), mode=mode)
        err = np.max(np.abs(polyconv.convolve(a, b, axes=(0, 1), mode=mode)
                            - ss.fftconvolve(a, b, mode=mode, axes=(0, 1))))
        assert err <= plan.error_bound, (err, plan.error_bound)
        ours = theirs = float("inf")
        for _ in range(repeats):  # interleaved
            ours = min(ours, once(polyconv.convolve, a, b, axes=(0, 1), mode=mode))
            theirs = min(theirs, once(ss.fftconvolve, a, b, mode=mode, axes=(0, 1)))
        print(f"| {sa[0]}x{sa[1]} | {sb[0]}x{sb[1]} | {mode} | {plan.engine} "
              f"{'x'.join(map(str, plan.transform_shape or ()))} t={plan.threads} | "
              f"{ours:.4f} | {theirs:.4f} | {ours / theirs:.2f} |", flush=True)


def _mpoly_ctx(modulus):
    if modulus is None:
        return flint.fmpz_mpoly_ctx.get(("x", "y"), "lex")
    return flint.nmod_mpoly_ctx.get(("x", "y"), modulus=modulus)


def flint_mpoly(a, b, modulus):
    ctx = _mpoly_ctx(modulus)

    def poly(arr):
        return ctx.from_dict({(int(i), int(j)): int(arr[i, j])
                              for i, j in zip(*np.nonzero(arr), strict=True)})
    prod = poly(a) * poly(b)
    out = np.zeros((a.shape[0] + b.shape[0] - 1, a.shape[1] + b.shape[1] - 1), dtype=np.int64)
    for (i, j), c in prod.to_dict().items():
        out[i, j] = int(c)
    return out


def flint_kronecker(a, b, modulus):
    s = a.shape[1] + b.shape[1] - 1
    rows = a.shape[0] + b.shape[0] - 1

    def flat(arr):
        pad = np.zeros((arr.shape[0], s), dtype=np.int64)
        pad[:, : arr.shape[1]] = arr
        values = pad.ravel().tolist()
        return flint.fmpz_poly(values) if modulus is None else flint.nmod_poly(values, modulus)
    coeffs = [int(c) for c in (flat(a) * flat(b)).coeffs()]
    coeffs += [0] * (rows * s - len(coeffs))
    return np.array(coeffs[: rows * s], dtype=np.int64).reshape(rows, s)


def exact_rows(sizes, repeats):
    print("| a = b | setting | polyconv s | fmpz/nmod_mpoly s | ratio | Kronecker in flint s | "
          "ratio | mpoly* product only s | ratio* | polyconv 1-D engine |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for n in sizes:
        for modulus in (None, P):
            hi = 2**15 if modulus is None else P
            lo = -hi if modulus is None else 0
            a, b = RNG.integers(lo, hi, (n, n)), RNG.integers(lo, hi, (n, n))
            ref = flint_mpoly(a, b, modulus)
            out = polyconv.convolve(a, b, axes=(0, 1), modulus=modulus)
            assert np.array_equal(np.asarray(out, dtype=np.int64), ref)
            assert np.array_equal(flint_kronecker(a, b, modulus), ref)
            plan = polyconv.plan(a, b, axes=(0, 1), modulus=modulus)
            ctx = _mpoly_ctx(modulus)
            pa = ctx.from_dict({(i, j): int(a[i, j]) for i in range(n) for j in range(n)})
            pb = ctx.from_dict({(i, j): int(b[i, j]) for i in range(n) for j in range(n)})
            t = {"ours": float("inf"), "mpoly": float("inf"), "kron": float("inf"),
                 "only": float("inf")}
            for _ in range(repeats):
                t["ours"] = min(t["ours"], once(polyconv.convolve, a, b, axes=(0, 1),
                                                modulus=modulus))
                t["mpoly"] = min(t["mpoly"], once(flint_mpoly, a, b, modulus))
                t["kron"] = min(t["kron"], once(flint_kronecker, a, b, modulus))
                t["only"] = min(t["only"], once(pa.__mul__, pb))
            setting = "int16" if modulus is None else f"mod {P}"
            print(f"| {n}x{n} | {setting} | {t['ours']:.4f} | {t['mpoly']:.4f} | "
                  f"{t['ours'] / t['mpoly']:.2f} | {t['kron']:.4f} | "
                  f"{t['ours'] / t['kron']:.2f} | {t['only']:.4f} | {t['ours'] / t['only']:.2f} | "
                  f"{plan.flat.engine} |",
                  flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--quick", action="store_true", help="small sizes only")
    args = parser.parse_args()
    from polyconv.engines import jit_state  # steady state: kernels loaded before any timing
    try:
        how, seconds = jit_state.ensure_compiled()
        print(f"compiled kernels {how} in {seconds:.2f} s (not in any ratio)")
    except jit_state.JitUnavailableError as exc:
        print(f"compiled kernels unavailable ({exc})")
    if args.quick:
        float_cases = [((256, 256), (16, 16), "full"), ((512, 512), (512, 512), "full")]
        sizes = [32, 64]
    else:
        float_cases = [((1024, 1024), (64, 64), "full"), ((1024, 1024), (64, 64), "same"),
                       ((2048, 2048), (2048, 2048), "full")]
        sizes = [64, 128, 256]
    float_rows(float_cases, args.repeats)
    print()
    exact_rows(sizes, args.repeats)


if __name__ == "__main__":
    main()
