"""Randomised campaign of the Lattice error model against high-precision references.

    python bench/risk_campaign.py [--seconds 600] [--seed 1] [--models 10000]

Draws random models: base pmfs (dyadic probabilities, so the float pmf *is* the exact model;
sometimes with their last points dropped as truncated mass, with or without a known first
moment), steps, origins, and one or two operations among ``+``, shift, ``nfold``, ``compound``
(Poisson, negative binomial and binomial counts; FFT route and Panjer recursion), ``layer``,
``all_of``, ``first_of`` and ``mixture``.  The same model is computed exactly in mpmath
(50 digits: convolutions, Panjer's recursion with ``g_0 = P_N(f_0)``, binomial compounds by
enumeration, products of cdfs) on the same
lattice, and every answer is checked:

(i)   every returned quantile satisfies the lattice's own ``cdf(q) >= p``;
(ii)  every certified range contains the reference: cdf and sf at every lattice point,
      ``quantile_bracket``, ``bounded("tvar")``, ``bounded("stop_loss")``, ``bounded("mean")``;
(iii) questions past the grid with truncated mass return nan.

It prints counts, failures (with a reproducer seed) and the bound / observed ratios: for cdf/sf
the per-model ratio ``max_k halfwidth_k / max_k |error_k|`` (over points with a reference), for
VaR brackets ``(width + step) / (|own - ref| + step)``, for TVaR ``halfwidth / |value - ref|``;
observed errors are floored at one unit roundoff of the reference value (a float answer cannot
be closer than that, and many computations here are exact in floats).
TVaR references sit at the lattice's own points ``origin + step k`` (exact in mpmath).
Stop-loss references use ``E[(S - d)+] = E[S] - d + E[(d - S)+]`` with ``E[S]`` exact (Wald's
identity for compounds), so a reference needs only the on-grid part.
"""

from __future__ import annotations

import argparse
import math
import random
import sys
import time
import warnings
from collections import Counter, defaultdict
from pathlib import Path

import mpmath as mp
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from polyconv.dist import Lattice  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from risk_models import Ref, draw  # noqa: E402

mp.mp.dps = 50
ULP = 2.0 ** -53  # observed errors are floored at one unit roundoff of the reference value
REF_SLACK = mp.mpf(10) ** -40  # rounding of the 50-digit reference
LEVELS = (0.5, 0.9, 0.99, 0.995, 0.999)


# ------------------------------------------------------------------------ checks
class Tally:
    def __init__(self):
        self.counts = Counter()
        self.failures = []
        self.ratios = {"cdf": [], "sf": [], "var": [], "tvar": []}
        self.by_op = defaultdict(list)

    def fail(self, what, seed, detail):
        self.counts["FAIL " + what] += 1
        if len(self.failures) < 20:
            self.failures.append(f"{what} (seed {seed}): {detail}")


def check(lat: Lattice, ref: Ref, op: str, seed: int, tally: Tally, rng: random.Random):
    h = lat.step
    base_idx = int(round(lat.origin / h))
    n = len(lat)
    br = lat._br()
    ks = np.arange(n)
    lo_c, hi_c = br.cdf_range(ks)
    lo_s, hi_s = br.sf_range(ks)
    cdf_own = br.cum
    sf_own = np.minimum(br.s[1:] + lat.truncated_mass, 1.0)
    worst = {"cdf": [0.0, 0.0], "sf": [0.0, 0.0]}
    for k in range(n):
        c = ref.cdf(base_idx + k)
        if c is None:
            continue
        s = 1 - c
        tally.counts["cdf/sf points"] += 1
        for name, val, lo, hi, own in (("cdf", c, lo_c[k], hi_c[k], cdf_own[k]),
                                       ("sf", s, lo_s[k], hi_s[k], sf_own[k])):
            if not (mp.mpf(lo) - REF_SLACK <= val <= mp.mpf(hi) + REF_SLACK):
                tally.fail(f"{name} range", seed, f"{op} k={k} ref={mp.nstr(val, 20)} "
                           f"range=[{lo!r}, {hi!r}]")
            err = max(float(abs(mp.mpf(own) - val)), ULP * float(val))
            half = max(hi - own, own - lo)
            worst[name][0] = max(worst[name][0], half)
            worst[name][1] = max(worst[name][1], err)
    for name in ("cdf", "sf"):
        half, err = worst[name]
        if err > 0:
            tally.ratios[name].append(half / err)
            tally.by_op[(name, op)].append(half / err)
    levels = list(LEVELS) + [rng.random() * 0.999 + 0.0005]
    for p in levels:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            q = lat.quantile(p)
            low, high = lat.quantile_bracket(p)
            tv = lat.bounded("tvar", p)
        tally.counts["quantiles"] += 1
        if not math.isnan(q):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                if not lat.cdf(q) >= p:
                    tally.fail("own quantile", seed, f"{op} p={p} q={q} cdf={lat.cdf(q)}")
        qi = ref.quantile(p)
        if qi is None:
            # the reference quantile lies beyond its known part: only high must allow it
            last_known = ref.off + ref.known - 1
            if high < (last_known + 1 - 1e-9) * h:
                tally.fail("bracket (beyond)", seed, f"{op} p={p} bracket=({low}, {high})")
            continue
        qv = qi * h
        tally.counts["brackets"] += 1
        if not (low <= qv + 1e-9 * h <= high + 2e-9 * h and qv - 1e-9 * h <= high):
            tally.fail("quantile bracket", seed, f"{op} p={p} ref={qv} bracket=({low}, {high})"
                       f" own={q}")
        if not math.isnan(q) and math.isfinite(high):
            tally.ratios["var"].append((high - low + h) / (abs(q - qv) + h))
        sl = ref.stop_loss(qi, h)
        if sl is not None:
            # at the lattice's own point origin + step (qi - base) (exact in mpmath; a shifted
            # origin is a float, rounded by the shift: the ledger is about these points)
            x_q = mp.mpf(lat.origin) + (qi - base_idx) * mp.mpf(h)
            tref = x_q + sl / (1 - mp.mpf(p))
            tally.counts["tvar checks"] += 1
            if not (mp.mpf(tv.low) - REF_SLACK * (1 + abs(tref)) <= tref
                    <= mp.mpf(tv.high) + REF_SLACK * (1 + abs(tref))):
                tally.fail("tvar range", seed, f"{op} p={p} ref={mp.nstr(tref, 17)} "
                           f"range=[{tv.low!r}, {tv.high!r}] value={tv.value!r}")
            if tv.refused:
                tally.counts["tvar refused"] += 1
            elif math.isfinite(tv.value):
                err = max(float(abs(mp.mpf(tv.value) - tref)), ULP * abs(float(tref)))
                if err > 0:
                    half = max(tv.high - tv.value, tv.value - tv.low)
                    tally.ratios["tvar"].append(half / err)
                    tally.by_op[("tvar", op)].append(half / err)
    # the lattice's own points are origin + step k (exact in mpmath), off the ideal index grid
    # by delta when the origin is a rounded float (a shift by c * step), and the retention
    # d_idx * step is a rounded float: E[(X_own - d)+] = SL_ideal(x_d) + (delta - eps) P(X > x_d)
    # + max(delta - eps, 0) P(X = x_d) (|delta - eps| far below one step)
    delta = mp.mpf(lat.origin) - base_idx * mp.mpf(h)
    for d_idx in (base_idx - 1, base_idx + n // 2, base_idx + n - 1):
        sl = ref.stop_loss(d_idx, h)
        c_at, c_below = ref.cdf(d_idx), ref.cdf(d_idx - 1)
        if sl is None or c_at is None or c_below is None:
            continue
        shift = delta - (mp.mpf(d_idx * h) - d_idx * mp.mpf(h))
        sl = sl + shift * (1 - c_at) + max(shift, 0) * (c_at - c_below)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            b = lat.bounded("stop_loss", d_idx * h)
        tally.counts["stop-loss checks"] += 1
        if not (mp.mpf(b.low) - REF_SLACK * (1 + abs(sl)) <= sl
                <= mp.mpf(b.high) + REF_SLACK * (1 + abs(sl))):
            tally.fail("stop-loss range", seed, f"{op} d={d_idx * h} ref={mp.nstr(sl, 17)} "
                       f"range=[{b.low!r}, {b.high!r}]")
    if ref.mean is not None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            b = lat.bounded("mean")
        m = ref.mean * h
        tally.counts["mean checks"] += 1
        if not (mp.mpf(b.low) - REF_SLACK * (1 + abs(m)) <= m
                <= mp.mpf(b.high) + REF_SLACK * (1 + abs(m))):
            tally.fail("mean range", seed, f"{op} ref={mp.nstr(m, 17)} "
                       f"range=[{b.low!r}, {b.high!r}]")
    if lat.truncated_mass > 0:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            v = lat.sf(lat.origin + h * (n + 2))
        tally.counts["beyond-grid questions"] += 1
        if not math.isnan(v):
            tally.fail("beyond grid", seed, f"{op} sf past the grid = {v!r}")


def summary(values, name):
    if not values:
        return f"{name}: no samples"
    a = np.array(values)
    q = np.percentile(a, [50, 90, 99])
    return (f"{name}: n={a.size} median {q[0]:.3g}, p90 {q[1]:.3g}, p99 {q[2]:.3g}, "
            f"max {a.max():.3g}; within goal {np.mean(a <= GOALS[name]) * 100:.1f}%")


GOALS = {"cdf": 100.0, "sf": 100.0, "var": 10.0, "tvar": 10.0}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=600.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--models", type=int, default=10_000)
    ap.add_argument("--by-op", action="store_true", help="ratios per operation")
    args = ap.parse_args(argv)
    tally = Tally()
    ops = Counter()
    t0 = time.monotonic()
    i = 0
    while i < args.models and time.monotonic() - t0 < args.seconds:
        seed = args.seed * 1_000_003 + i
        rng = random.Random(seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                lat, ref, op = draw(rng)
            except Exception as exc:  # a crash is a finding
                tally.fail("crash", seed, repr(exc))
                i += 1
                continue
        ops[op] += 1
        try:
            check(lat, ref, op, seed, tally, rng)
        except Exception as exc:
            tally.fail("crash in check", seed, f"{op}: {exc!r}")
        i += 1
    elapsed = time.monotonic() - t0
    print(f"models: {i} in {elapsed:.0f} s (seed {args.seed})")
    print("operations: " + ", ".join(f"{k} {v}" for k, v in sorted(ops.items())))
    for k, v in sorted(tally.counts.items()):
        print(f"  {k}: {v}")
    for name in ("cdf", "sf", "var", "tvar"):
        print("  ratio " + summary(tally.ratios[name], name))
    if args.by_op:
        for (name, op), vals in sorted(tally.by_op.items()):
            a = np.array(vals)
            print(f"    {name:5s} {op:20s} n={a.size:5d} median {np.median(a):9.3g} "
                  f"p90 {np.percentile(a, 90):9.3g} max {a.max():9.3g}")
    if tally.failures:
        print("FAILURES:")
        for f in tally.failures:
            print("  " + f)
        return 1
    print("no failures")
    return 0


if __name__ == "__main__":
    sys.exit(main())
