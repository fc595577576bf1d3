"""Random models of the risk-measure campaign (:mod:`risk_campaign`) and their exact references.

Each model is a Lattice built by one or two operations from random dyadic base pmfs, and the
same model computed exactly in mpmath (50 digits) on the same lattice: convolutions, Panjer's
recursion with ``g_0 = P_N(f_0)`` (Panjer, ASTIN Bulletin 12 (1981)) for Poisson and negative
binomial counts, enumeration ``sum_n P(N = n) f^{*n}`` for binomial ones (the recursion is
unstable there, even at 50 digits), products of cdfs for maxima and minima, weighted sums for
mixtures.
"""

from __future__ import annotations

import math
import random

import mpmath as mp
import numpy as np
from scipy import stats

from polyconv.dist import ErrorLedger, Lattice, all_of, compound, first_of, mixture

mp.mp.dps = 50
STEPS = (1.0, 0.5, 0.1, 2.5, 100.0)


class Ref:
    """Exact model on a lattice: probabilities ``g`` (mpf) at indices ``off + j``, exact for
    ``j < known``; total mass 1; ``mean`` exact or None."""

    def __init__(self, g, off: int, known: int, mean, full: bool):
        self.g, self.off, self.known, self.mean, self.full = list(g), off, known, mean, full
        self.cum = []
        acc = mp.mpf(0)
        for v in self.g[:known]:
            acc += v
            self.cum.append(acc)

    def cdf(self, i: int):
        """``F`` at absolute index ``i`` or None when unknown."""
        j = i - self.off
        if j < 0:
            return mp.mpf(0)
        if j < self.known:
            return self.cum[j]
        return mp.mpf(1) if self.full else None

    def quantile(self, p: float):
        """Smallest absolute index with ``F >= p``, or None when not within the known part."""
        pm = mp.mpf(p)
        for j, c in enumerate(self.cum):
            if c >= pm:
                return self.off + j
        return None

    def stop_loss(self, d_index: int, h: float):
        """``E[(X - x_d)+]`` in steps of ``h`` (``X`` in units of steps), or None."""
        if self.mean is None or d_index - self.off >= self.known:
            return None
        acc = mp.mpf(0)
        for j in range(0, max(d_index - self.off + 1, 0)):
            acc += (d_index - self.off - j) * self.g[j]
        return (self.mean - d_index + acc) * h


def conv(a, b):
    out = [mp.mpf(0)] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        if x == 0:
            continue
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def mean_of(g, off):
    return sum(((off + j) * v for j, v in enumerate(g)), mp.mpf(0))


def base(rng: random.Random, h: float, allow_trunc: bool = True):
    n = rng.randint(1, 20)
    parts = [rng.randint(0, 1 << 10) for _ in range(n)]
    parts[-1] += 1
    total = sum(parts)
    k = 1 << (total.bit_length() + 2)
    parts[0] += k - total  # dyadic: the float pmf is exact and sums to 1 exactly
    rng.shuffle(parts)
    if parts[-1] == 0:
        parts[-1] = 1
        parts[0] -= 1
    probs = [mp.mpf(v) / k for v in parts]
    off = rng.randint(0, 3)
    lat_pmf = np.array([v / k for v in parts])
    ref = Ref(probs, off, n, mean_of(probs, off), True)
    if allow_trunc and n > 3 and rng.random() < 0.3:
        drop = rng.randint(1, min(3, n - 1))
        kept = lat_pmf[:-drop]
        tail = probs[-drop:]
        t = float(sum(tail))
        if rng.random() < 0.5:
            lat = Lattice(kept, h, off * h)  # truncated moment unknown
        else:
            moment = float(sum(((off + n - drop + j) * v for j, v in enumerate(tail)),
                               mp.mpf(0)) * h) * (1 + 1e-15)
            lat = Lattice(kept, h, off * h, errors=ErrorLedger(0.0, 0.0, t, kept.size, moment))
        return lat, ref
    return Lattice(lat_pmf, h, off * h), ref


def counts_law(rng: random.Random):
    kind = rng.choice(["poisson", "poisson", "nbinom", "binom", "poisson0"])
    if kind == "poisson":
        lam = rng.choice([0.5, 1.0, 3.0, 7.5, 15.0])
        return stats.poisson(lam), ("poisson", lam)
    if kind == "poisson0":
        return stats.poisson(0.0), ("poisson", 0.0)
    if kind == "nbinom":
        r, p = rng.choice([1.0, 2.0, 4.5]), rng.choice([0.3, 0.5, 0.8])
        return stats.nbinom(r, p), ("nbinom", r, p)
    m, p = rng.randint(1, 12), rng.choice([0.1, 0.3, 0.6])
    return stats.binom(m, p), ("binom", m, p)


def panjer_ref(desc, f, size):
    kind = desc[0]
    f = [mp.mpf(v) for v in f]
    if kind == "poisson":
        lam = mp.mpf(desc[1])
        a, b = mp.mpf(0), lam
        g0 = mp.exp(-lam * (1 - f[0]))
        en = lam
    elif kind == "nbinom":
        r, p = mp.mpf(desc[1]), mp.mpf(desc[2])
        a, b = 1 - p, (r - 1) * (1 - p)
        g0 = (p / (1 - (1 - p) * f[0])) ** r
        en = r * (1 - p) / p
    else:
        # binomial: exact enumeration sum_n C(m, n) p^n (1-p)^(m-n) f^{*n} (all terms >= 0);
        # Panjer's recursion is unstable for a < 0 (even at 50 digits its noise grows ~|a|^x and
        # beyond the support n_max top, where the compound is exactly 0, it passed 1e-40)
        m, p = desc[1], mp.mpf(desc[2])
        g = [mp.mpf(0)] * size
        power = [mp.mpf(1)]
        for n in range(m + 1):
            w = mp.binomial(m, n) * p ** n * (1 - p) ** (m - n)
            for k, v in enumerate(power[:size]):
                g[k] += w * v
            power = conv(power, f)[:size]
        return g, m * p
    g = [g0]
    c = 1 / (1 - a * f[0])
    for x in range(1, size):
        acc = mp.mpf(0)
        for y in range(1, min(x, len(f) - 1) + 1):
            acc += (a + b * y / x) * f[y] * g[x - y]
        g.append(c * acc)
    return g, en


def draw(rng: random.Random):
    """One random model: (lattice, reference, description)."""
    h = rng.choice(STEPS)
    op = rng.choice(["+", "nfold", "compound-fft", "compound-recursion", "layer", "all_of",
                     "first_of", "mixture", "shift"])
    if op == "+":
        (x, rx), (y, ry) = base(rng, h), base(rng, h)
        lat = x + y
        g = conv(rx.g, ry.g)
        ref = Ref(g, rx.off + ry.off, len(g), mean_of(g, rx.off + ry.off), True)
    elif op == "shift":
        x, rx = base(rng, h)
        c = rng.randint(-5, 5)
        lat = x + c * h
        ref = Ref(rx.g, rx.off + c, rx.known, rx.mean + c, True)
    elif op == "nfold":
        x, rx = base(rng, h)
        n = rng.randint(0, 6)
        lat = x.nfold(n)
        g, off = [mp.mpf(1)], 0
        for _ in range(n):
            g, off = conv(g, rx.g), off + rx.off
        ref = Ref(g, off, len(g), mean_of(g, off), True)
    elif op.startswith("compound"):
        x, rx = base(rng, h, allow_trunc=rng.random() < 0.5)
        counts, desc = counts_law(rng)
        size = rng.randint(8, 240)
        method = op.split("-")[1]
        lat = compound(counts, x, method=method, size=size)
        f = [mp.mpf(0)] * rx.off + rx.g
        g, en = panjer_ref(desc, f, size)
        ref = Ref(g, 0, size, en * (rx.mean), False)
    elif op == "layer":
        x, rx = base(rng, h)
        n = len(x)
        d_idx = rng.randint(rx.off - 2, rx.off + n + 1)
        lim_steps = rng.choice([None, rng.randint(1, n + 3)])
        lat = x.layer(d_idx * h, math.inf if lim_steps is None else lim_steps * h)
        shift = d_idx - rx.off
        width = max(len(rx.g) - 1 - shift, 0) + 1 if lim_steps is None else lim_steps + 1
        g = [mp.mpf(0)] * width
        for j, v in enumerate(rx.g):
            g[min(max(j - shift, 0), width - 1)] += v
        ref = Ref(g, 0, width, mean_of(g, 0), True)
    elif op in ("all_of", "first_of"):
        k = rng.randint(2, 4)
        items = [base(rng, h) for _ in range(k)]
        fn = all_of if op == "all_of" else first_of
        lat = fn(*[it[0] for it in items])
        refs = [it[1] for it in items]
        lo = min(r.off for r in refs)
        hi = max(r.off + len(r.g) for r in refs)
        cdfs = []
        for i in range(lo, hi):
            vals = [r.cdf(i) for r in refs]
            if op == "all_of":
                cdfs.append(mp.fprod(vals))
            else:
                cdfs.append(1 - mp.fprod([1 - v for v in vals]))
        g = [cdfs[0]] + [cdfs[i] - cdfs[i - 1] for i in range(1, len(cdfs))]
        ref = Ref(g, lo, len(g), mean_of(g, lo), True)
    else:  # mixture
        k = rng.randint(2, 4)
        items = [base(rng, h) for _ in range(k)]
        w = [rng.randint(1, 7) for _ in range(k)]
        tot = 1 << (sum(w).bit_length() + 1)
        w[0] += tot - sum(w)
        weights = [v / tot for v in w]
        lat = mixture(weights, [it[0] for it in items])
        refs = [it[1] for it in items]
        lo = min(r.off for r in refs)
        hi = max(r.off + len(r.g) for r in refs)
        g = [mp.mpf(0)] * (hi - lo)
        for wi, r in zip(weights, refs, strict=True):
            for j, v in enumerate(r.g):
                g[r.off - lo + j] += mp.mpf(wi) * v
        ref = Ref(g, lo, len(g), sum((mp.mpf(wi) * r.mean for wi, r in zip(weights, refs,
                                                                         strict=True))), True)
    return lat, ref, op
