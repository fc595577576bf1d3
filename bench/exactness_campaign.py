"""Randomised exactness campaign: polyconv's integer products against python-flint.

    python bench/exactness_campaign.py [--products 100000] [--seconds 3600] [--seed 1]

Each draw picks lengths (mostly short, one in ten up to 2^12, one in fifty up to 2^15), an
adversarial magnitude pattern (random, all at the maximum, alternating signs, zeros, a single
huge value among small ones, values near 2^63, 2^64 or 2^1024, sparse), an operand form (numpy
int64 / uint64 / object arrays, or plain lists of Python ints) and a modulus class (none, small,
NTT primes, odd moduli between 2^31 and 2^52, powers of two, 2^62 - 57, huge primes, even
composites); it forces every exact engine ("direct-exact", "fft-exact", "limbs", "kronecker",
"ntt", and the compiled "ntt-compiled" in all its modes: one NTT prime, exact from one or
several primes with Garner CRT, any modulus reduced inside or after the recombination;
"ntt-batch", the batched engine, on its one-row path; "ntt-wide", the multi-modular engine with
the matrix-product CRT, where outputs need Python ints; an engine that refuses with a ValueError
is skipped) and "auto", and compares every coefficient with python-flint's fmpz_poly product
(reduced by the modulus). One draw in fifty also checks ``polyconv.product``,
``polyconv.power``, and over the integers ``inverse_series`` and ``poly_divmod``. Stops at the
first mismatch with a reproducer, or when ``--products`` products or ``--seconds`` are reached;
prints the tally per engine, per compiled-engine mode and per modulus class. The compiled
kernels are loaded (compiled or from the cache) before the clock starts, and the campaign
refuses to count a compiled product when they did not load (the engine would have fallen back to
numpy code). Long campaigns live here, not in the test suite.
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

ENGINES = ("auto", "direct-exact", "fft-exact", "limbs", "kronecker", "ntt", "ntt-compiled",
           "ntt-batch", "ntt-wide")
MODULUS_CLASSES = {
    "none": [None],
    "small": [2, 3, 7, 97, 65537, 2**20 + 7],
    "NTT primes": [998244353, 469762049, 167772161],
    "odd 2^31..2^52": [2**31 + 11, 2**32 - 1, 3**20, 2**40 + 15, 2**52 - 1, "random-odd"],
    "2^e": [2**16, 2**31, 2**36, 2**52, 2**62, 2**63, 2**64],
    "2^62-57": [2**62 - 57],
    "huge primes": [2**61 - 1, 2**89 - 1, 2**127 - 1, 2**521 - 1],
    "even composites": [6, 10**12, 3 * 2**31, 2**62 + 2, 2**64 - 2, 10**40 + 120],
}
STYLES = ("random", "max", "alternating", "zeros", "single-huge", "near-2^63", "near-2^64",
          "near-2^1024", "sparse", "residue-max")
COMPILED_MODES = ("mod NTT prime", "exact, one prime", "exact, multi-prime CRT",
                  "any modulus, one prime", "any modulus < 2^62, CRT", "any modulus >= 2^62, CRT")


def magnitude_values(rng: random.Random, n: int, bits: int, style: str,
                     modulus: int | None = None) -> list[int]:
    top = (1 << bits) - 1
    if style == "residue-max":  # the largest residues (m - 1, or -(m - 1)), else all at the top
        big = top if modulus is None else modulus - 1
        return [rng.choice([big, big, -big, big - 1]) for _ in range(n)]
    if style == "max":
        return [top] * n
    if style == "alternating":
        return [top if i % 2 == 0 else -top for i in range(n)]
    if style == "zeros":
        return [0] * n
    if style == "single-huge":
        values = [rng.randint(-3, 3) for _ in range(n)]
        values[rng.randrange(n)] = rng.choice([1, -1]) * (1 << rng.choice([63, 64, 200, 1100]))
        return values
    if style.startswith("near-"):
        base = 1 << int(style[7:])
        return [rng.choice([1, -1]) * (base + rng.randint(-4, 4)) if rng.random() < 0.7
                else rng.randint(-top, top) for _ in range(n)]
    if style == "sparse":
        return [rng.randint(-top, top) if rng.random() < 0.1 else 0 for _ in range(n)]
    return [rng.randint(-top, top) for _ in range(n)]


def as_operand(rng: random.Random, values: list[int]):
    """The values in one of the forms users pass: list, int64, uint64 or object array."""
    form = rng.choice(["list", "list", "array", "array"])
    if form == "list":
        return values
    if all(-2**63 <= v < 2**63 for v in values):
        return np.array(values, dtype=np.int64)
    if all(0 <= v < 2**64 for v in values):
        return np.array(values, dtype=np.uint64)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def reference(a: list[int], b: list[int], modulus) -> list[int]:
    c = [int(v) for v in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    c += [0] * (len(a) + len(b) - 1 - len(c))
    return c if modulus is None else [v % modulus for v in c]


def draw_lengths(rng: random.Random) -> tuple[int, int]:
    roll = rng.random()
    top = 15 if roll < 0.02 else 12 if roll < 0.12 else 6
    if rng.random() < 0.15:  # full lengths at a power-of-two transform boundary (2^k, 2^k + 1)
        k = rng.randint(1, top)
        n1 = rng.randint(1, 2**k)
        return n1, 2**k + rng.choice([0, 1]) + 1 - n1  # n1 + n2 - 1 = 2^k or 2^k + 1
    return tuple(max(1, int(2 ** rng.uniform(0, top))) for _ in range(2))


def compiled_mode(modulus: int | None, plan) -> str:
    """Which of the compiled engine's routes a forced product takes (from the public plan)."""
    if modulus is None:
        return "exact, one prime" if "one prime" in plan.reason else "exact, multi-prime CRT"
    if "one prime" in plan.reason:
        return "mod NTT prime" if modulus in MODULUS_CLASSES["NTT primes"] else \
            "any modulus, one prime"
    return "any modulus < 2^62, CRT" if modulus < 2**62 else "any modulus >= 2^62, CRT"


def jit_module():
    """polyconv's JIT-state module wherever the layout keeps it (it may move between packages)."""
    import importlib

    for name in ("polyconv.engines.jit_state", "polyconv.jit", "polyconv.numerics.jit",
                 "polyconv.tuning.jit",
                 "polyconv.engines.jit", "polyconv.pipeline.jit"):
        try:
            return importlib.import_module(name)
        except ImportError:
            continue
    raise SystemExit("cannot find polyconv's jit module")


def load_kernels() -> None:
    """Run one compiled product so the kernels are loaded before the clock starts."""
    polyconv.convolve([1, 2], [3], method="ntt-compiled")
    state = jit_module().state()
    if state != "compiled":
        raise SystemExit(f"compiled kernels not loaded (state {state!r}): "
                         f"{jit_module().reason()}")


def draw_modulus(rng: random.Random) -> tuple[str, int | None]:
    name = rng.choice(list(MODULUS_CLASSES))
    m = rng.choice(MODULUS_CLASSES[name])
    if m == "random-odd":
        m = rng.randrange(2**31 + 1, 2**52, 2)
    return name, m


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--products", type=int, default=100_000)
    parser.add_argument("--seconds", type=float, default=3600.0)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    load_kernels()
    modes: Counter = Counter()
    engines: Counter = Counter()
    classes: Counter = Counter()
    styles: Counter = Counter()
    start = time.monotonic()
    end = start + args.seconds
    draws = 0
    while time.monotonic() < end and sum(engines.values()) < args.products:
        draws += 1
        n1, n2 = draw_lengths(rng)
        bits = rng.choice([1, 2, 8, 15, 16, 18, 20, 26, 31, 32, 40, 53, 62, 63, 64, 100, 500,
                           1000, 2000, 3000])
        style = rng.choice(STYLES)
        if (bits > 64 or style in ("near-2^1024", "single-huge")) and n1 * n2 > 2**20:
            n1, n2 = min(n1, 2**10), min(n2, 2**10)
        cls, modulus = draw_modulus(rng)
        if style == "residue-max" and modulus is not None and modulus.bit_length() > 64 \
                and n1 * n2 > 2**20:
            n1, n2 = min(n1, 2**10), min(n2, 2**10)
        va = magnitude_values(rng, n1, bits, style, modulus)
        vb = magnitude_values(rng, n2, bits, rng.choice(["random", style]), modulus)
        want = reference(va, vb, modulus)
        a, b = as_operand(rng, va), as_operand(rng, vb)
        for engine in ENGINES:
            try:
                got = polyconv.convolve(a, b, method=engine, modulus=modulus)
            except ValueError:
                continue  # the engine refuses: it cannot certify this case
            if got.dtype.kind == "f" or [int(v) for v in got] != want:
                print(f"MISMATCH engine={engine} n1={n1} n2={n2} bits={bits} style={style} "
                      f"modulus={modulus} seed={args.seed} draw={draws}")
                return 1
            if engine in ("ntt-compiled", "ntt-wide") and jit_module().state() != "compiled":
                print("compiled kernels unloaded: the engine fell back; stopping")
                return 1
            if engine == "ntt-compiled":
                if jit_module().state() != "compiled":
                    print("compiled kernels unloaded: the engine fell back; stopping")
                    return 1
                mode = compiled_mode(modulus, polyconv.plan(a, b, method=engine, modulus=modulus))
                modes[mode] += 1
            engines[engine] += 1
            classes[cls] += 1
            styles[style] += 1
        if rng.random() < 0.02 and not check_chain(rng, engines, args.seed):
            return 1
    seconds = time.monotonic() - start
    print(f"{sum(engines.values())} exact products in {draws} draws ({seconds:.0f} s), "
          "0 mismatches against python-flint")
    print("per engine:")
    for engine in ENGINES + ("product", "power", "inverse_series", "poly_divmod"):
        print(f"  {engine:16s} {engines[engine]}")
    print("ntt-compiled per mode:")
    for mode in COMPILED_MODES:
        print(f"  {mode:24s} {modes[mode]}")
    print("per modulus class:")
    for cls in MODULUS_CLASSES:
        print(f"  {cls:16s} {classes[cls]}")
    print("per magnitude pattern (first operand):")
    for style in STYLES:
        print(f"  {style:16s} {styles[style]}")
    return 0


def check_chain(rng: random.Random, tally: Counter, seed: int) -> bool:
    """A product of 2..12 random factors and a power (polyconv.algebra: intermediates as int64
    or byte rows, Kronecker on rows, two threads when large) against flint."""
    count = rng.randint(2, 12)
    factors = [np.array(magnitude_values(rng, max(1, int(2 ** rng.uniform(0, 8))),
                                         rng.choice([1, 8, 16, 31, 62]),
                                         rng.choice(["random", "max", "alternating"])),
                        dtype=np.int64) for _ in range(count)]
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
    return check_division(rng, tally, seed, factors[-1])


def check_division(rng: random.Random, tally: Counter, seed: int, values: np.ndarray) -> bool:
    """inverse_series and poly_divmod over the integers (recurrence blocks, halving, short
    products beyond int64): ``a b = 1 mod x^n`` by flint's product, and flint's divmod."""
    n = rng.randint(1, 400)
    a = [rng.choice([1, -1])] + [int(v) for v in values[1:n]]
    b = [int(v) for v in polyconv.inverse_series(np.array(a, dtype=np.int64), n)]
    check = ([int(v) for v in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()] + [0] * n)[:n]
    if len(b) != n or check != [1] + [0] * (n - 1):
        print(f"MISMATCH inverse_series n={n} seed={seed}")
        return False
    tally["inverse_series"] += 1
    bits = rng.choice([8, 40, 100])
    na, nd = rng.randint(2, 700), rng.randint(2, 300)
    top = 2**bits
    dividend = [rng.randrange(-top, top) for _ in range(na)]
    divisor = [rng.randrange(-top, top) for _ in range(nd - 1)] + [rng.choice([1, -1])]
    q, r = polyconv.poly_divmod(np.array(dividend, dtype=object),
                                np.array(divisor, dtype=object))
    fq, fr = divmod(flint.fmpz_poly(dividend), flint.fmpz_poly(divisor))
    want_q = [int(v) for v in fq.coeffs()] or [0]
    want_r = [int(v) for v in fr.coeffs()] or [0]
    got_q, got_r = [int(v) for v in q], [int(v) for v in r]
    if (got_q + [0] * na)[:max(len(got_q), len(want_q))] != (
            want_q + [0] * na)[:max(len(got_q), len(want_q))] or (
            got_r + [0] * nd)[:nd] != (want_r + [0] * nd)[:nd]:
        print(f"MISMATCH poly_divmod na={na} nd={nd} bits={bits} seed={seed}")
        return False
    tally["poly_divmod"] += 1
    return True


if __name__ == "__main__":
    sys.exit(main())
