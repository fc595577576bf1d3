"""Issue 12's small-size grid: polyconv.convolve / python-flint end to end, every setting x n.

Run: python bench/small_grid.py [--log2n 6,8,10,12,14,16,18] [--second 0] [--rounds 2]
(markdown; ~2-4 minutes)

Settings: signed 8, 16, 32, 63, 128 and 1000-bit coefficients, residues modulo 998244353,
2^61 - 1 and a 200-bit prime.  ``--second 0``: n x n products; ``--second 16``: n x 16.  Operands
are numpy arrays (int64 where the values fit, else object arrays of Python ints); flint from
Python lists (``fmpz_poly``, ``nmod_poly`` below 2^63, ``fmpz_mod_poly`` above) with its
coefficients turned into Python ints.  Ratios are polyconv / flint, the best of ``--rounds``
interleaved rounds; below 1: polyconv faster.  The compiled kernels are loaded first (their
one-off time is in no ratio).
"""

from __future__ import annotations

import argparse
import random
import time

import flint
import numpy as np

import polyconv
from polyconv.engines import jit_state

#: sympy.nextprime(2**199 + 12345) (tests/pipeline/test_plain_object_pair.py checks it)
P200 = 803469022129495137770981046170581301261101496891396417663059
SETTINGS = [("8-bit", 8, None), ("16-bit", 16, None), ("32-bit", 32, None),
            ("63-bit", 63, None), ("128-bit", 128, None), ("1000-bit", 1000, None),
            ("mod 998244353", 0, 998244353), ("mod 2^61-1", 0, 2**61 - 1),
            ("mod 200-bit prime", 0, P200)]


def best(fn, budget: float = 0.15) -> float:
    fn()
    start = time.perf_counter()
    fn()
    one = max(time.perf_counter() - start, 1e-7)
    out = one
    for _ in range(max(3, min(200, int(budget / one)))):
        start = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - start)
    return out


def operand(gen: random.Random, n: int, bits: int, m: int | None):
    values = ([gen.randrange(m) for _ in range(n)] if m else
              [gen.getrandbits(bits) - (1 << (bits - 1)) for _ in range(n)])
    if (m and m < 2**63) or (not m and bits <= 63):
        return np.array(values, dtype=np.int64), values
    out = np.empty(n, dtype=object)
    out[:] = values
    return out, values


def flint_side(la: list, lb: list, m: int | None):
    if m is None:
        return lambda: [int(c) for c in (flint.fmpz_poly(la) * flint.fmpz_poly(lb)).coeffs()]
    if m < 2**63:
        return lambda: [int(c) for c in (flint.nmod_poly(la, m) * flint.nmod_poly(lb, m)).coeffs()]
    ctx = flint.fmpz_mod_poly_ctx(m)
    return lambda: [int(c) for c in (ctx(la) * ctx(lb)).coeffs()]


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--log2n", default="6,8,10,12,14,16,18")
    parser.add_argument("--second", type=int, default=0, help="0: n x n, else n x this")
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args()
    jit_state.kernels()
    lgs = [int(v) for v in args.log2n.split(",")]
    gen = random.Random(4)
    shape = "n x n" if not args.second else f"n x {args.second}"
    print(f"| {shape} | " + " | ".join(f"2^{lg}" for lg in lgs) + " |")
    print("|---|" + "---|" * len(lgs))
    for name, bits, m in SETTINGS:
        row = []
        for lg in lgs:
            n = 1 << lg
            if bits == 1000 and lg > (14 if args.second else 12):  # (minutes of flint alone)
                row.append("-")
                continue
            (a, la), (b, lb) = operand(gen, n, bits, m), operand(gen, args.second or n, bits, m)
            theirs = flint_side(la, lb, m)
            ratio = min(best(lambda a=a, b=b, m=m: polyconv.convolve(a, b, modulus=m))
                        / best(theirs)
                        for _ in range(args.rounds))
            row.append(f"{ratio:.2f}")
        print(f"| {name} | " + " | ".join(row) + " |", flush=True)


if __name__ == "__main__":
    main()
