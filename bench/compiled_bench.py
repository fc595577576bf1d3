"""Compiled NTT engine vs python-flint and vs the numpy engines; JIT costs reported apart.

Run: python bench/compiled_bench.py [--quick | --division | --cold | --small | --algebra]
(markdown;
~4 minutes)

Ratios are polyconv / python-flint in the same process, best of several rounds (below 1:
polyconv faster).  "multiply alone" times flint's product of ready nmod_poly objects against
ntt_compiled.convolve_mod_prime on ready arrays; "end to end" times flint from Python lists
(fmpz_poly construction, product, coeffs) against polyconv.convolve on numpy arrays.  Compile
and warm-cache load times are measured in fresh processes and reported separately.

Batched tables (polyconv.engines.ntt_batch): ``r`` products of ``n x n`` rows in one call against
flint multiplying ``r`` ready ``nmod_poly`` / ``fmpz_poly`` pairs in a Python loop (per-product
time); the product of 1,000 linear factors mod 998244353 against flint's balanced tree of ``*``
from Python lists (end to end, as bench/algebra_bench.py); a single tiny ``convolve``.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

import numpy as np
from flint import fmpz_poly, nmod_poly

import polyconv
from polyconv.engines import jit_state as jit
from polyconv.engines import ntt_batch as nb
from polyconv.engines import ntt_compiled as nc
from polyconv.engines.ntt import convolve_ntt_mod_prime

P = 998244353


def best(fn, budget=0.2):
    fn()
    start = time.perf_counter()
    fn()
    one = max(time.perf_counter() - start, 1e-7)
    reps = max(3, min(50, int(budget / one)))
    out = one
    for _ in range(reps):
        start = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - start)
    return out


def cold_costs() -> tuple[float, float]:
    """(first compile, warm-cache load) in new processes, seconds of wall time."""
    code = ("import time; t = time.perf_counter(); "
            "from polyconv.engines import jit_state as jit; jit.kernels(); "
            "print(time.perf_counter() - t)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        run = [sys.executable, "-c", code]
        first = float(subprocess.run(run, env=env, capture_output=True, text=True,
                                     check=True).stdout)
        warm = float(subprocess.run(run, env=env, capture_output=True, text=True,
                                    check=True).stdout)
    return first, warm


def fresh_process_product() -> tuple[float, float]:
    """(a product of two 64-term int64 sequences in a new process, ``python -c "import numpy,
    scipy.fft"``): wall seconds, best of three each (the compiled kernels' cache is warm; the
    planner decides whether to load them)."""
    code = ("import numpy as np, polyconv; a = np.arange(64); "
            "polyconv.convolve(a, a[::-1].copy())")
    base = "import numpy, scipy.fft"

    def wall(text: str) -> float:
        start = time.perf_counter()
        subprocess.run([sys.executable, "-c", text], check=True, capture_output=True)
        return time.perf_counter() - start

    return min(wall(code) for _ in range(3)), min(wall(base) for _ in range(3))


def main() -> None:
    quick = "--quick" in sys.argv
    if "--cold" in sys.argv:  # the fresh-process lines alone
        product, base = fresh_process_product()
        print(f"fresh process, one 64 x 64 product: {product:.2f} s; "
              f"'import numpy, scipy.fft': {base:.2f} s (ratio {product / base:.2f})")
        return
    if "--division" in sys.argv:  # the division table alone
        division_table(np.random.default_rng(5))
        return
    if "--algebra" in sys.argv:  # power and inverse_series over Z at lengths 16-256 alone
        jit.kernels()
        algebra_table(np.random.default_rng(9))
        return
    if "--small" in sys.argv:  # batch axis, tiny products, products over Z alone
        jit.kernels()
        small_tables(np.random.default_rng(7))
        return
    first, warm = cold_costs()
    print(f"JIT: first compile {first:.2f} s, warm-cache load {warm:.2f} s (new processes)")
    product, base = fresh_process_product()
    print(f"fresh process, one 64 x 64 product: {product:.2f} s; "
          f"'import numpy, scipy.fft': {base:.2f} s (ratio {product / base:.2f})")
    jit.kernels()
    rng = np.random.default_rng(1)
    sizes = range(6, 17 if quick else 21, 2)
    print("\n| n | mod 998244353 multiply alone / flint | numpy NTT / flint |")
    print("|---|---|---|")
    for lg in sizes:
        n = 2**lg
        a, b = rng.integers(0, P, n), rng.integers(0, P, n)
        fa, fb = nmod_poly(a.tolist(), P), nmod_poly(b.tolist(), P)
        t_flint = best(lambda fa=fa, fb=fb: fa * fb)
        t_c = best(lambda a=a, b=b: nc.convolve_mod_prime(a, b, P))
        ua, ub = a.astype(np.uint64), b.astype(np.uint64)
        t_np = best(lambda ua=ua, ub=ub: convolve_ntt_mod_prime(ua, ub, P)) if lg <= 18 else None
        np_cell = f"{t_np / t_flint:.2f}" if t_np else "-"
        print(f"| 2^{lg} | {t_c / t_flint:.3f} | {np_cell} |", flush=True)
    print("\n| n | bits | end to end / flint (auto, kernels ready) | engine |")
    print("|---|---|---|---|")
    for bits in (16, 63):
        for lg in range(6, 17 if quick else 19, 4 if quick else 2):
            n = 2**lg
            a = rng.integers(-2**(bits - 1), 2**(bits - 1), n)
            b = rng.integers(-2**(bits - 1), 2**(bits - 1), n)

            def flint_e2e(a=a, b=b):
                return (fmpz_poly(a.tolist()) * fmpz_poly(b.tolist())).coeffs()

            t_flint = best(flint_e2e)
            t_pc = best(lambda a=a, b=b: polyconv.convolve(a, b))
            engine = polyconv.plan(a, b).engine
            print(f"| 2^{lg} | {bits} | {t_pc / t_flint:.3f} | {engine} |", flush=True)
    batched_tables(rng)
    small_tables(rng)
    division_table(rng)


def division_table(rng) -> None:
    """poly_divmod over Z with growing quotients (issue 12 item 5) vs flint's divmod, from Python
    ints: a random 100-bit dividend of length 2.5 d by a monic divisor with 100-bit coefficients
    (quotient coefficients reach ~100 (qlen - 1) bits)."""
    print("\n| dividend / divisor length | quotient bits | polyconv ms | flint ms | ratio |")
    print("|---|---|---|---|---|")
    for na, nd in ((300, 121), (600, 241), (1200, 481)):
        a = [int(v) << 38 | int(w) for v, w in
             zip(rng.integers(-2**62, 2**62, na), rng.integers(0, 2**38, na), strict=True)]
        b = [int(v) << 38 for v in rng.integers(-2**62, 2**62, nd - 1)] + [1]
        oa, ob = np.array(a, dtype=object), np.array(b, dtype=object)
        fa, fb = fmpz_poly(a), fmpz_poly(b)
        t_pc = best(lambda oa=oa, ob=ob: polyconv.poly_divmod(oa, ob), budget=1.0)
        t_fl = best(lambda fa=fa, fb=fb: [[int(v) for v in x.coeffs()] for x in divmod(fa, fb)],
                    budget=1.0)
        q, _ = polyconv.poly_divmod(oa, ob)
        bits = max(abs(int(v)) for v in q).bit_length()
        print(f"| {na} / {nd} | {bits} | {t_pc * 1e3:.1f} | {t_fl * 1e3:.1f} | "
              f"{t_pc / t_fl:.2f} |", flush=True)


def algebra_table(rng) -> None:
    """power and inverse_series over Z at lengths 16-256 (issue 12 goal <= 1.5x), end to end
    from int64 arrays to numpy arrays (as bench/algebra_bench.py), against flint's ``**`` and
    ``1 / fmpz_series`` from lists."""
    import flint

    print("\n| operation | length | bits | polyconv us | flint us | ratio |")
    print("|---|---|---|---|---|---|")
    cases = [("power a^4", n, 16) for n in (16, 64, 256)]
    cases += [("power a^50", 16, 64)]
    cases += [("inverse_series", n, 16) for n in (16, 64, 256)]
    cases += [("inverse_series", n, 64) for n in (16, 64, 256)]
    for op, n, bits in cases:
        top = 2**(bits - 1)
        a = rng.integers(-top, top, n)
        if op.startswith("power"):
            k = int(op.split("^")[1])

            def ours(a=a, k=k):
                return polyconv.power(a, k)

            def theirs(a=a, k=k):
                return _to_numpy((fmpz_poly(a.tolist()) ** k).coeffs())
        else:
            a[0] = 1

            def ours(a=a, n=n):
                return polyconv.inverse_series(a, n)

            def theirs(a=a, n=n):
                cap = flint.ctx.cap
                flint.ctx.cap = max(cap, n)
                try:
                    return _to_numpy((1 / flint.fmpz_series(a.tolist(), prec=n)).coeffs())
                finally:
                    flint.ctx.cap = cap
        assert [int(v) for v in ours()] == [int(v) for v in theirs()], (op, n, bits)
        t_pc, t_fl = best(ours, budget=0.5), best(theirs, budget=0.5)
        print(f"| {op} | {n} | {bits} | {t_pc * 1e6:.1f} | {t_fl * 1e6:.1f} | "
              f"{t_pc / t_fl:.2f} |", flush=True)


def _to_numpy(coeffs) -> np.ndarray:
    """flint coefficients as numpy does it in algebra_bench: int64 when they fit, else ints."""
    values = [int(c) for c in coeffs]
    try:
        return np.array(values, dtype=np.int64)
    except OverflowError:
        return np.array(values, dtype=object)


def batched_tables(rng) -> None:
    """Batched rows vs flint's per-product loop; 1,000 linear factors; one tiny convolve."""
    print("\n| rows x n | setting | batched us/product | flint us/product (ready operands) | "
          "ratio |")
    print("|---|---|---|---|---|")
    for rows, n in ((4096, 4), (2048, 16), (1024, 64), (256, 256)):
        for setting in ("mod 998244353", "16-bit exact", "63-bit exact"):
            if setting.startswith("mod"):
                a, b = rng.integers(0, P, (rows, n)), rng.integers(0, P, (rows, n))
                pairs = [(nmod_poly(x.tolist(), P), nmod_poly(y.tolist(), P))
                         for x, y in zip(a, b, strict=True)]

                def ours(a=a, b=b):
                    return nb.multiply_rows_mod_prime(a, b, P)
            else:
                bits = 16 if setting.startswith("16") else 63
                top = 2**(bits - 1)
                a, b = rng.integers(-top, top, (rows, n)), rng.integers(-top, top, (rows, n))
                pairs = [(fmpz_poly(x.tolist()), fmpz_poly(y.tolist()))
                         for x, y in zip(a, b, strict=True)]
                bound = n * top * top

                def ours(a=a, b=b, bound=bound):
                    return nb.multiply_rows_exact(a, b, bound)

            t_ours = best(ours) / rows
            t_flint = best(lambda pairs=pairs: [x * y for x, y in pairs]) / rows
            print(f"| {rows} x {n} | {setting} | {t_ours * 1e6:.3f} | {t_flint * 1e6:.3f} | "
                  f"{t_ours / t_flint:.2f} |", flush=True)
    factors = [rng.integers(0, P, 2) for _ in range(1000)]

    def flint_tree():
        polys = [nmod_poly(f.tolist(), P) for f in factors]
        while len(polys) > 1:
            nxt = [polys[i] * polys[i + 1] for i in range(0, len(polys) - 1, 2)]
            polys = nxt + ([polys[-1]] if len(polys) % 2 else [])
        return polys[0].coeffs()

    t_flint = best(flint_tree)
    t_batch = best(lambda: nb.product_mod(factors, P))
    t_api = best(lambda: polyconv.product(factors, modulus=P), budget=0.5)
    print(f"\nproduct of 1,000 linear factors mod {P}: flint {t_flint * 1e3:.3f} ms, "
          f"ntt_batch.product_mod {t_batch * 1e3:.3f} ms ({t_batch / t_flint:.2f}x), "
          f"polyconv.product {t_api * 1e3:.3f} ms ({t_api / t_flint:.2f}x)")
    a, b = rng.integers(0, P, 3), rng.integers(0, P, 2)
    t_flint = best(lambda: (nmod_poly(a.tolist(), P) * nmod_poly(b.tolist(), P)).coeffs())
    t_pc = best(lambda: polyconv.convolve(a, b, modulus=P))
    t_rows = best(lambda: nb.multiply_rows_mod_prime(a, b, P))
    print(f"one 3 x 2 product mod {P}: polyconv.convolve {t_pc * 1e6:.1f} us, "
          f"ntt_batch row call {t_rows * 1e6:.1f} us, flint end to end {t_flint * 1e6:.1f} us")


def _flint_rows(a, b, m=None):
    """flint's end-to-end product of each row pair (lists in, lists of ints out)."""
    if m is None:
        return [(fmpz_poly(x) * fmpz_poly(y)).coeffs() for x, y in zip(a, b, strict=True)]
    return [(nmod_poly(x, m) * nmod_poly(y, m)).coeffs() for x, y in zip(a, b, strict=True)]


def small_tables(rng) -> None:
    """The batch axis of convolve (2-D int64 operands, one product per row) and single tiny
    products, end to end against flint from lists; product over Z of 1,000 linear factors."""
    print("\n| convolve of rows x n (2-D, batch axis) | setting | polyconv us | flint us | ratio "
          "| engine |")
    print("|---|---|---|---|---|---|")
    for rows, n in ((1000, 4), (200, 16), (50, 64), (10, 256)):
        for setting, m, top in (("16-bit", None, 2**15), ("mod 998244353", P, None),
                                ("40-bit", None, 2**39), ("63-bit", None, 2**62)):
            lo = 0 if m else -top
            a = rng.integers(lo, m or top, (rows, n))
            b = rng.integers(lo, m or top, (rows, n))
            la, lb = a.tolist(), b.tolist()
            t_pc = best(lambda a=a, b=b, m=m: polyconv.convolve(a, b, modulus=m))
            t_fl = best(lambda la=la, lb=lb, m=m: _flint_rows(la, lb, m))
            engine = polyconv.plan(a, b, modulus=m).engine
            print(f"| {rows} x {n} | {setting} | {t_pc * 1e6:.1f} | {t_fl * 1e6:.1f} | "
                  f"{t_pc / t_fl:.2f} | {engine} |", flush=True)
    print("\n| one product n1 x n2 (1-D) | setting | polyconv us | flint us | ratio |")
    print("|---|---|---|---|---|")
    for n1, n2 in ((3, 2), (8, 8), (32, 32), (64, 64)):
        for setting, m, top in (("16-bit", None, 2**15), ("63-bit", None, 2**62),
                                ("mod 998244353", P, None), ("mod 2^61-1", 2**61 - 1, None)):
            lo = 0 if m else -top
            a, b = rng.integers(lo, m or top, n1), rng.integers(lo, m or top, n2)
            la, lb = a.tolist(), b.tolist()
            t_pc = best(lambda a=a, b=b, m=m: polyconv.convolve(a, b, modulus=m))
            if m is None or m < 2**62:
                t_fl = best(lambda la=la, lb=lb, m=m: _flint_rows([la], [lb], m))
            print(f"| {n1} x {n2} | {setting} | {t_pc * 1e6:.1f} | {t_fl * 1e6:.1f} | "
                  f"{t_pc / t_fl:.2f} |", flush=True)
    for bits in (8, 64):
        top = 2**(bits - 1)
        factors = [rng.integers(1, top, 2) * rng.choice([-1, 1], 2) for _ in range(1000)]

        def flint_tree(factors=factors):
            polys = [fmpz_poly(f.tolist()) for f in factors]
            while len(polys) > 1:
                nxt = [polys[i] * polys[i + 1] for i in range(0, len(polys) - 1, 2)]
                polys = nxt + ([polys[-1]] if len(polys) % 2 else [])
            return polys[0].coeffs()

        t_fl = best(flint_tree, budget=1.0)
        t_pc = best(lambda factors=factors: polyconv.product(factors), budget=1.0)
        print(f"\nproduct over Z of 1,000 linear {bits}-bit factors: polyconv "
              f"{t_pc * 1e3:.1f} ms, flint {t_fl * 1e3:.1f} ms ({t_pc / t_fl:.2f}x)")


if __name__ == "__main__":
    main()
