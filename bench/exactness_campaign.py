"""Randomised exactness campaign: polyconv's integer products against python-flint.

    python bench/exactness_campaign.py [--seconds 120] [--seed 1]

Draws random shapes and magnitudes (lengths 1..2^15, coefficients from 1 to 2000 bits, signs
random or adversarial, moduli small, NTT primes, near 2^62/2^63/2^64 and huge), forces every
applicable exact engine as well as "auto", and compares every coefficient with python-flint's
fmpz_poly product (reduced by the modulus); one draw in five also checks an exact
``polyconv.product`` of 2..12 factors (optionally truncated) and a ``polyconv.power``.  Prints a
tally per engine and stops at the first mismatch with a reproducer.  Long campaigns live here,
not in the test suite.
"""

from __future__ import annotations

import argparse
import random
import sys
import time
from collections import Counter
from pathlib import Path

import flint
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import polyconv  # noqa: E402

ENGINES = ("auto", "direct-exact", "fft-exact", "limbs", "kronecker", "ntt")
MODULI = [None] * 6 + [2, 3, 97, 2**20, 998244353, 469762049, 2**31 - 1, 2**36, 2**61 - 1,
                       2**62 - 57, 2**62, 2**63, 2**64 - 1, 2**64, 10**40 + 121]


def operand(rng: random.Random, n: int, bits: int, style: str) -> np.ndarray:
    top = (1 << bits) - 1
    if style == "max":
        values = [top] * n
    elif style == "alternating":
        values = [top if i % 2 == 0 else -top for i in range(n)]
    elif style == "sparse":
        values = [rng.randint(-top, top) if rng.random() < 0.05 else 0 for _ in range(n)]
    else:
        values = [rng.randint(-top, top) for _ in range(n)]
    if bits <= 62:
        return np.array(values, dtype=np.int64)
    out = np.empty(n, dtype=object)
    out[:] = values
    return out


def reference(a, b, modulus) -> list[int]:
    c = [int(v) for v in (flint.fmpz_poly([int(v) for v in a])
                          * flint.fmpz_poly([int(v) for v in b])).coeffs()]
    c += [0] * (len(a) + len(b) - 1 - len(c))
    return c if modulus is None else [v % modulus for v in c]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=120.0)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    tally: Counter = Counter()
    end = time.monotonic() + args.seconds
    while time.monotonic() < end:
        n1, n2 = (max(1, int(2 ** rng.uniform(0, 15))) for _ in range(2))
        bits = rng.choice([1, 2, 8, 15, 16, 20, 31, 40, 53, 62, 63, 64, 100, 500, 2000])
        if bits > 62 and n1 * n2 > 2**22:
            n1, n2 = min(n1, 2**11), min(n2, 2**11)
        style = rng.choice(["random", "random", "max", "alternating", "sparse"])
        a, b = operand(rng, n1, bits, style), operand(rng, n2, bits, "random")
        modulus = rng.choice(MODULI)
        want = reference(a, b, modulus)
        for engine in ENGINES:
            try:
                got = polyconv.convolve(a, b, method=engine, modulus=modulus)
            except ValueError:
                continue  # the engine refuses: it cannot certify this case
            if [int(v) for v in got] != want:
                print(f"MISMATCH engine={engine} n1={n1} n2={n2} bits={bits} style={style} "
                      f"modulus={modulus} seed={args.seed}")
                return 1
            tally[engine] += 1
        if rng.random() < 0.2 and not check_chain(rng, tally, args.seed):
            return 1
    print(f"{sum(tally.values())} exact products, all equal to python-flint:")
    for engine in ENGINES + ("product", "power"):
        print(f"  {engine:13s} {tally[engine]}")
    return 0


def check_chain(rng: random.Random, tally: Counter, seed: int) -> bool:
    """A product of 2..12 random factors and a power (polyconv.algebra: intermediates as int64
    or byte rows, Kronecker on rows, two threads when large) against flint."""
    count = rng.randint(2, 12)
    factors = [operand(rng, max(1, int(2 ** rng.uniform(0, 9))),
                       rng.choice([1, 8, 16, 31, 62, 100, 300]), rng.choice(["random", "max",
                                                                          "alternating"]))
               for _ in range(count)]
    length = rng.choice([None, rng.randint(1, 3000)])
    want = flint.fmpz_poly([1])
    for f in factors:
        want *= flint.fmpz_poly([int(v) for v in f])
    full = sum(len(f) - 1 for f in factors) + 1
    coeffs = [int(v) for v in want.coeffs()] + [0] * full
    expected = coeffs[:full] if length is None else (coeffs + [0] * length)[:length]
    got = polyconv.product(factors, length=length)
    if [int(v) for v in got] != expected:
        print(f"MISMATCH product count={count} length={length} seed={seed}")
        return False
    tally["product"] += 1
    base, k = factors[0], rng.randint(2, 9)
    want = flint.fmpz_poly([int(v) for v in base]) ** k
    full = k * (len(base) - 1) + 1
    expected = ([int(v) for v in want.coeffs()] + [0] * full)[:full]
    if [int(v) for v in polyconv.power(base, k)] != expected:
        print(f"MISMATCH power k={k} n={len(base)} seed={seed}")
        return False
    tally["power"] += 1
    return True


if __name__ == "__main__":
    sys.exit(main())
