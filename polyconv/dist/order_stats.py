"""Order statistics of independent delays: the time the k-th of n stages finishes.

Quorums (wait for 2 of 3 replicas), k-out-of-n systems, fan-out to n shards where the caller
needs k answers.  With ``F_i(x) = P(D_i <= x)`` the number ``C(x)`` of stages finished by ``x``
is Poisson-binomial: its generating polynomial is ``prod_i ((1 - F_i(x)) + F_i(x) z)``, and

    P(T_k <= x) = P(C(x) >= k),        P(T_k > x) = P(C(x) < k).

(David & Nagaraja, *Order Statistics*, 3rd ed., 2003, section 5.2; k = n is the maximum, k = 1
the minimum.)  Identical stages with multiplicity ``m`` contribute the binomial factor
``((1 - F) + F z)^m``, so ``n`` copies of one stage cost one regularized incomplete beta per
point, ``P(Bin(n, F) >= k) = I_F(k, n - k + 1)``, not ``n`` products; several groups are
combined by the polynomial product of their count laws, capped at ``k`` terms (counts of
``k`` or more are lumped) and, when ``k > n/2``, taken over the *unfinished* stages instead
(``n - k + 1`` terms).  Both ``P(C >= k)`` and ``P(C < k)`` are built from non-negative terms
(the upper tail from the survival functions ``1 - F_i`` summed from the right), so neither
tail loses its digits to cancellation.

Error ledger: the law of ``T_k`` is a push-forward of the product measure of the inputs, so
``l1 <= sum_i l1_i prod_{j != i} (1 + l1_j)``; ``P(C >= k)`` is multilinear in ``(F_1, ...,
F_n)`` with partial derivatives ``P(exactly k - 1 of the others) in [0, 1]`` on the unit cube,
so the cdf errs by at most ``sum_i K_i`` (the inputs' cumulative bounds, DKW bands of sampled
stages included).  The grid stops at the lowest point where an input's truncated mass may lie
(each ``F_i`` is known below it); what lies beyond is truncated, with first moment at most
``sum_i E[D_i 1{D_i >= end}]`` (``T_k 1{T_k >= L} <= sum_i D_i 1{D_i >= L}`` for non-negative
delays).  scipy.special.betainc and the log-gamma binomial terms are taken to be accurate to
:data:`SPECIAL_REL` relative (an assumption, checked against mpmath in the tests).

Independence of the stages is an assumption (replicas behind one switch are not independent).
Model output, not advice: check against qualified engineering practice.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from ..numerics.budget import check_allocation
from .accuracy import UNIT_ROUNDOFF
from .delays import _check, _grid, _pmf_from, _represented, _rounding
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, untruncated

SPECIAL_REL = 1e-12
"""Assumed relative accuracy of scipy.special.betainc and of the log-gamma binomial terms."""

CHUNK_BYTES = 1 << 25
"""Working memory of one chunk of points in the multi-group product."""


def _groups(delays: list[Lattice], copies: int) -> tuple[list[Lattice], list[int]]:
    """Distinct input objects and how often each appears (times ``copies``)."""
    seen: dict[int, int] = {}
    uniq: list[Lattice] = []
    mult: list[int] = []
    for d in delays:
        key = id(d)
        if key in seen:
            mult[seen[key]] += copies
        else:
            seen[key] = len(uniq)
            uniq.append(d)
            mult.append(copies)
    return uniq, mult


def _binomial_terms(m: int, f: np.ndarray, s: np.ndarray, top: int) -> np.ndarray:
    """``P(Bin(m, F) = j)`` for ``j = 0..top`` (rows) at every point (columns), from logs of
    ``F`` and of ``S = 1 - F`` given separately (no ``1 - F`` rounding)."""
    j = np.arange(top + 1, dtype=float)[:, None]
    if m == 1:  # log C(1, j) = 0 (j = 0, 1), as gammaln gives it: no scipy import (0.3 s)
        logc = np.zeros_like(j)
    else:
        from scipy import special  # on first use (import cost: tests/test_import_light.py)

        logc = special.gammaln(m + 1.0) - special.gammaln(j + 1.0) - special.gammaln(m - j + 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        lf, ls = np.log(f)[None, :], np.log(s)[None, :]
        t = logc + np.where(j > 0, j * lf, 0.0) + np.where(m - j > 0, (m - j) * ls, 0.0)
    out = np.exp(t)
    return np.where(np.isnan(out), 0.0, out)


def _at_least(m: int, r: np.ndarray, f: np.ndarray) -> np.ndarray:
    """``P(Bin(m, F) >= r)`` (rows ``r``): ``I_F(r, m - r + 1)``; 1 for ``r <= 0``, 0 above m."""
    rr = r[:, None].astype(float)
    if m == 1:  # one stage: P(finished) itself (I_F(1, 1) = F, as betainc gives it bit for bit)
        val = np.broadcast_to(f[None, :], (rr.shape[0], f.size))
    else:
        from scipy import special  # on first use (import cost: tests/test_import_light.py)

        with np.errstate(invalid="ignore"):
            val = special.betainc(np.maximum(rr, 1.0), np.maximum(m - rr + 1.0, 1.0),
                                  f[None, :])
    return np.where(rr <= 0, 1.0, np.where(rr > m, 0.0, val))


def _count_tails(k: int, mult: list[int], fs: list[np.ndarray], ss: list[np.ndarray]
                 ) -> tuple[np.ndarray, np.ndarray]:
    """``(P(C >= k), P(C < k))`` at each point for groups of multiplicity ``mult`` with
    finished / unfinished probabilities ``fs`` / ``ss``."""
    n = sum(mult)
    if len(mult) == 1:
        from scipy import special  # on first use (import cost: tests/test_import_light.py)

        m, f, s = mult[0], fs[0], ss[0]
        with np.errstate(invalid="ignore"):
            ge = special.betainc(float(k), float(m - k + 1), f)
            lt = special.betainc(float(m - k + 1), float(k), s)
        return np.nan_to_num(ge), np.nan_to_num(lt)
    if k > (n + 1) // 2:  # count unfinished stages: C < k  <=>  n - C >= n - k + 1
        lt, ge = _count_tails(n - k + 1, mult, ss, fs)
        return ge, lt
    points = fs[0].size
    ge = np.zeros(points)
    lt = np.zeros(points)
    chunk = max(1, CHUNK_BYTES // (8 * 4 * (k + 1)))
    check_allocation(8 * 4 * (k + 1) * min(chunk, points), "order-statistic count table")
    for a in range(0, points, chunk):
        b = min(points, a + chunk)
        acc = np.zeros((k, b - a))  # P(C = t), t < k, over the groups so far
        acc[0] = 1.0
        lump = np.zeros(b - a)  # P(C >= k) so far
        for m, f, s in zip(mult, fs, ss, strict=True):
            fc, sc = f[a:b], s[a:b]
            top = min(m, k - 1)
            terms = _binomial_terms(m, fc, sc, top)
            need = _at_least(m, k - np.arange(k), fc)  # P(group >= k - t), t = 0..k-1
            lump = lump + np.sum(acc * need, axis=0)
            new = np.zeros_like(acc)
            for j in range(top + 1):
                new[j:] += terms[j] * acc[: k - j]
            acc = new
        ge[a:b] = lump
        lt[a:b] = np.sum(acc, axis=0)
    return ge, lt


def kth_of(k: int, *delays: Lattice, copies: int = 1) -> Lattice:
    """The time at which the ``k``-th of ``n`` independent stages finishes (module docstring).

    Parameters
    ----------
    k : int
        ``1 <= k <= n``: 1 is the first to finish (:func:`first_of`), ``n`` the last
        (:func:`all_of`); a 2-of-3 quorum is ``kth_of(2, a, b, c)``.
    *delays : Lattice
        The stages (one step, origins whole steps apart).  The same object given several times
        stands for that many independent copies (a fan-out), computed as one binomial factor.
    copies : int
        Independent copies of each given stage (``kth_of(990, shard, copies=1000)``).

    Returns
    -------
    Lattice
        Law of the k-th order statistic, with its error ledger.

    Notes
    -----
    A k-out-of-n system (works while at least ``k`` of ``n`` components work) fails at the
    ``(n - k + 1)``-th component failure: ``kth_of(n - k + 1, *lifetimes)``.
    """
    ds = _check(delays, "kth_of")
    if isinstance(copies, bool) or not isinstance(copies, numbers.Integral) or copies < 1:
        raise ValueError(f"copies must be a positive integer; got {copies!r}")
    uniq, mult = _groups(ds, int(copies))
    n = sum(mult)
    if isinstance(k, bool) or not isinstance(k, numbers.Integral) or not 1 <= k <= n:
        raise ValueError(f"k must be an integer in [1, {n}] (the number of stages); got {k!r}")
    k = int(k)
    h, base, offs, length = _grid(uniq)
    limit = known_limit(uniq, offs, length)
    check_allocation(8 * 6 * limit * len(uniq), "kth_of cdf tables")
    fs, ss = [], []
    for o, d in zip(offs, uniq, strict=True):
        c, tail, r = _represented(d, o, length)
        fs.append(np.clip(c[:limit], 0.0, 1.0))
        ss.append(np.clip(tail[:limit] + (1.0 - r), 0.0, 1.0))
    ge, lt = _count_tails(k, mult, fs, ss)
    ge, lt = np.clip(ge, 0.0, 1.0), np.clip(lt, 0.0, 1.0)
    pmf, clipped = _pmf_from(ge, lt)
    longest = max(len(d) for d in uniq)
    rel_in = UNIT_ROUNDOFF + longest * float(np.finfo(np.longdouble).eps) / 2
    rel = n * rel_in + (len(uniq) + 2) * SPECIAL_REL
    r_point, r_l1, r_cum = _rounding(ge, lt, rel, clipped)
    l1 = _grouped_l1(uniq, mult)
    cum = min(sum(m * cum_bound(d.errors) for d, m in zip(uniq, mult, strict=True)), 2.0)
    moment = _tail_moment(uniq, mult, offs, limit, h, base)
    ledger = ErrorLedger(min(l1 + r_point, 2.0), min(l1 + r_l1, 2.0), 0.0, limit, moment,
                         min(cum + r_cum, 2.0))
    return Lattice._make(pmf, h, base, ledger)


def known_limit(ds: list[Lattice], offs: list[int], length: int) -> int:
    """Grid points on which every input's cdf is known within its cumulative bound.

    Below an input's ``truncated_from`` its cdf is known; beyond it, the input's truncated mass
    may lie.  An input whose truncated part is empty in the point estimate (``truncated == 0``,
    e.g. sampled stages: the DKW band allows mass ``<= eps`` anywhere, at unknown places) has
    cdf 1 there with true cdf in ``[1 - K, 1]`` (``K`` its cumulative bound, which then also
    bounds the exact truncated mass), so it does not stop the grid."""
    limit = length
    for o, d in zip(offs, ds, strict=True):
        if not untruncated(d.errors) and d.errors.truncated > 0:
            limit = min(limit, o + d.errors.truncated_from)
    return max(limit, 1)


def _grouped_l1(uniq: list[Lattice], mult: list[int]) -> float:
    """``sum_i l1_i prod_{j != i} (1 + l1_j)`` with multiplicities, in logs."""
    log_grow = sum(m * math.log1p(d.errors.l1) for d, m in zip(uniq, mult, strict=True))
    if log_grow > 5:
        return 2.0
    grow = math.exp(log_grow)
    return min(sum(m * d.errors.l1 * grow / (1 + d.errors.l1)
                   for d, m in zip(uniq, mult, strict=True)), 2.0)


def _tail_moment(uniq, mult, offs, limit, h, base) -> float:
    """First-moment bound of the mass at or beyond the grid's end (module docstring)."""
    ends = [o + len(d) for o, d in zip(offs, uniq, strict=True)]
    if limit >= max(ends) and all(untruncated(d.errors) for d in uniq):
        return 0.0
    if base < 0:
        return math.inf
    total = 0.0
    for o, d, m in zip(offs, uniq, mult, strict=True):
        e = d.errors
        start = max(limit - o, 0)
        x = d.values
        part = float(np.dot(d.pmf[start:], x[start:])) if start < len(d) else 0.0
        total += m * (part * (1 + (len(d) + 2) * UNIT_ROUNDOFF)
                      + e.l1 * float(np.max(np.abs(x))) + e.truncated_moment)
    return max(total, 1e-300)
