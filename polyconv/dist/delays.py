"""Delay networks on lattices: stages in sequence, fork-join, races, mixtures.

* :func:`series`: stages one after another: the total delay is the sum (convolution).
* :func:`all_of`: a join that waits for every branch: the maximum, ``F = prod F_i``.
* :func:`first_of`: a race or hedged request that takes the first answer: the minimum,
  ``1 - F = prod (1 - F_i)``.
* :func:`mixture`: one of several paths at random with given weights.

Independence is an assumption of every formula here (branches that share a queue, a host or a
network path are correlated and these results are then optimistic or pessimistic in unknown
ways).  Percentiles do not add: take them from the combined distribution with ``quantile``; a
deadline-miss probability is ``sf(deadline)``.  In reliability texts a "series system" fails at
the *minimum* of lifetimes: here ``series`` means stages in sequence (a sum).  (Common practice, no
source; DESIGN.md section 6.)  Model output, not advice: check against qualified engineering
practice before committing to deadlines or capacity.

All inputs must share one ``step`` and have origins that differ by whole steps.
"""

from __future__ import annotations

import math

import numpy as np

from . import exact_small
from .accuracy import UNIT_ROUNDOFF
from .enclosure import EnclosureSums
from .lattice import Lattice, same_step
from .ledger import ErrorLedger, cum_bound, untruncated
from .propagate import abs_moment, second_moment_high, truncated_from

WEIGHT_TOL = 1e-12
"""Tolerance of ``sum(weights) == 1`` in :func:`mixture`."""


def _check(delays, name: str) -> list[Lattice]:
    if len(delays) == 1 and not isinstance(delays[0], Lattice) and \
            isinstance(delays[0], (list, tuple)):
        delays = tuple(delays[0])
    if len(delays) == 0:
        raise ValueError(f"{name} needs at least one delay")
    for i, d in enumerate(delays):
        if not isinstance(d, Lattice):
            raise TypeError(f"{name}: delays[{i}] must be a Lattice; got {type(d).__name__}")
    first = delays[0]
    for i, d in enumerate(delays[1:], start=1):
        if not same_step(first, d):
            raise ValueError(f"{name}: delays[{i}] has step {d.step!r}, delays[0] has "
                             f"{first.step!r}; all must share one step")
        k = (d.origin - first.origin) / first.step
        if abs(k - round(k)) > 1e-9 * max(1.0, abs(k)):
            raise ValueError(f"{name}: delays[{i}] origin {d.origin!r} is not a whole number of "
                             f"steps from delays[0] origin {first.origin!r}")
    return list(delays)


def _grid(delays: list[Lattice]) -> tuple[float, float, list[int], int]:
    """Common grid: step, base origin, each input's index offset, the common length."""
    h = delays[0].step
    base = min(d.origin for d in delays)
    offs = [int(round((d.origin - base) / h)) for d in delays]
    length = max(o + len(d) for o, d in zip(offs, delays, strict=True))
    return h, base, offs, length


LONG_UNIT = float(np.finfo(np.longdouble).eps) / 2
"""Unit roundoff of numpy's longdouble (2^-64 on x86; equal to float64's elsewhere)."""


def _represented(d: Lattice, off: int, length: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Represented cdf ``F^(k) = sum_{j <= k} p^_j`` and tail ``R - F^(k)`` (summed from the
    right, no cancellation) of ``d`` on the common grid, and its mass ``R``.  Sums run in
    longdouble, so each value is within ``u + len(d) u_long`` (relative) of the exact sum
    (recursive summation, Higham section 4.2)."""
    pmf = np.zeros(length, dtype=np.longdouble)
    pmf[off : off + len(d)] = d.pmf
    cdf = np.cumsum(pmf)
    tail = np.zeros(length)
    tail[:-1] = np.cumsum(pmf[::-1])[::-1][1:]
    return cdf.astype(float), tail, float(cdf[-1])


def _value_rel(count: int, longest: int) -> float:
    """Relative error of one cdf or tail value of a max/min of ``count`` inputs: each input
    value ``u + longest u_long``, and a few roundings per input for the product, ``log1p`` and
    ``expm1`` (libm's ``log1p``/``expm1`` taken to err by at most one ulp: an assumption)."""
    return (5 * count + 8) * UNIT_ROUNDOFF + count * longest * LONG_UNIT


def _pmf_from(cdf: np.ndarray, tail: np.ndarray) -> tuple[np.ndarray, float]:
    """Point masses from ``F`` below the median and from the tail above it (no cancellation in
    either tail), and the total of negative differences set to zero."""
    total = float(cdf[-1] + tail[-1]) if cdf.size else 0.0
    prev_cdf = np.concatenate(([0.0], cdf[:-1]))
    prev_tail = np.concatenate(([total], tail[:-1]))
    raw = np.where(prev_cdf >= 0.5 * total, prev_tail - tail, cdf - prev_cdf)
    return np.maximum(raw, 0.0), float(-np.sum(raw[raw < 0]))


def _rounding(cdf: np.ndarray, tail: np.ndarray, rel: float, clipped: float
              ) -> tuple[float, float, float]:
    """``(point, l1, cumulative)`` rounding of a pmf formed as differences of ``cdf`` / ``tail``
    values each within relative ``rel`` of the exact ones: a point errs by at most ``rel``
    times the two values it is the difference of (plus one rounding of the difference); a
    cumulative sum of the differences telescopes back to one value (``cdf`` side) or to the
    mass minus one tail value (tail side), so it errs by at most ``3 rel`` plus the roundings
    of the differences and the negative differences set to zero."""
    v = np.minimum(cdf, tail)
    pair = v + np.concatenate(([0.0], v[:-1]))
    u = UNIT_ROUNDOFF
    point = (rel + u) * float(np.max(pair, initial=0.0)) + clipped + u
    l1 = (rel + u) * float(np.sum(pair)) + clipped + u
    return point, l1, min(3 * rel + 2 * u + clipped, l1)


def _telescoped_l1(l1s: list[float]) -> float:
    """``sum_i l1_i prod_{j != i} (1 + l1_j)``: L1 change of a product measure (telescoping)."""
    total = 0.0
    grow = math.prod(1 + v for v in l1s)
    for v in l1s:
        total += v * grow / (1 + v)
    return total


def series(*delays: Lattice) -> Lattice:
    """Total delay of stages run one after another: ``D = D_1 + ... + D_k``.

    Assumes the stage delays independent.  Percentiles do not add; read them off the result.
    """
    ds = _check(delays, "series")
    out = ds[0]
    for d in ds[1:]:
        out = out + d
    return out


def all_of(*delays: Lattice) -> Lattice:
    """Delay of a join that waits for all branches: ``max(D_1, ..., D_k)``, ``F = prod F_i``.

    Assumes the branches independent.  The represented part is the law of the maximum of the
    inputs' computed pmfs: ``F = prod F^_i`` below the median, its tail
    ``R (1 - prod(1 - T^_i / R_i))`` (as ``-expm1(sum log1p(-T^_i / R_i))``, so upper-tail
    probabilities keep their digits) above it.

    Error ledger (:mod:`polyconv.dist.ledger`): the law of a maximum is the push-forward of the
    product measure, so ``l1 <= sum_i l1_i prod_{j != i} (1 + l1_j)`` plus rounding, and
    ``|prod F^_i - prod F_i| <= sum_i K_i prod_{j != i} (1 + K_j)`` for the cumulative bound
    ``K`` (all cdfs in ``[0, 1 + K]``); truncated
    mass of any input lies at or above its own ``truncated_from`` (a maximum is at least each
    branch), with first moment at most ``sum_i M_i + sum_i T_i sum_{j != i} E|D_j|``
    (``|max| <= sum |D_j|``).
    """
    ds = _check(delays, "all_of")
    h, base, offs, length = _grid(ds)
    log_rest = np.zeros(length)
    product = np.ones(length)
    mass = 1.0
    for o, d in zip(offs, ds, strict=True):
        c, tail, r = _represented(d, o, length)
        mass *= r
        if r == 0:
            product[:] = 0.0
            continue
        product *= c
        with np.errstate(divide="ignore"):
            log_rest += np.log1p(-np.minimum(tail / r, 1.0))
    tail_max = mass * -np.expm1(log_rest)
    pmf, clipped = _pmf_from(product, tail_max)
    rel = _value_rel(len(ds), max(len(d) for d in ds))
    r_point, r_l1, r_cum = _rounding(product, tail_max, rel, clipped)
    l1 = _telescoped_l1([d.errors.l1 for d in ds])
    cum = _telescoped_l1([cum_bound(d.errors) for d in ds])
    ledger = ErrorLedger(min(l1 + r_point, 2.0), l1 + r_l1, 0.0,
                         truncated_from([(d.errors, o) for d, o in zip(ds, offs, strict=True)],
                                        length), _max_moment(ds), cum + r_cum)
    ledger = ledger._replace(truncated_moment2=_order_moment2(ds, pmf, h, base, ledger, sum))
    return _exact_or(pmf, h, base, ledger, exact_small.enclosure("max", ds, offs, length))


def _order_moment2(ds, pmf, h, base, ledger, combine) -> float:
    """Truncated second moment of a max or a min of independent delays: the truncated part lies
    on paths where some ``D_i`` is in its own truncated part ``T_i``.  A max (``combine=sum``):
    ``max^2 <= sum_j D_j^2``, so ``E[max^2 1{T_i}] <= m2_i + t_i sum_{j != i} E[D_j^2]``; a min
    (``combine=min``): ``min^2 <= D_i^2``, so ``E[min^2 1{T_i}] <= m2_i`` (non-negative delays;
    ``m2``, ``t`` the ledgers' bounds)."""
    if untruncated(ledger):
        return 0.0
    if base < 0 or any(d.origin < 0 for d in ds):
        return math.inf
    parts = [(d.errors.truncated_moment2, min(1.0, d.errors.truncated + d.errors.l1))
             for d in ds if not untruncated(d.errors)]
    if not all(math.isfinite(m2) for m2, _ in parts):
        return math.inf
    total = sum(m2 for m2, _ in parts)
    if combine is sum:
        seconds = [second_moment_high(d) for d in ds]
        total += sum(t for _, t in parts) * sum(seconds)
    return total * (1 + 8 * UNIT_ROUNDOFF)


def _max_moment(ds: list[Lattice]) -> float:
    if all(untruncated(d.errors) for d in ds):
        return 0.0
    abs_means = [abs_moment(d.pmf, d.step, d.origin, d.errors) + d.errors.truncated_moment
                 for d in ds]
    total = 0.0
    whole = sum(abs_means)
    for d, a in zip(ds, abs_means, strict=True):
        e = d.errors
        if untruncated(e):
            continue
        t_high = min(1.0, e.truncated + e.l1)
        total += e.truncated_moment + (t_high * (whole - a) if whole - a > 0 else 0.0)
    return total


def first_of(*delays: Lattice) -> Lattice:
    """Delay of a race or hedged request: ``min(D_1, ..., D_k)``, ``1 - F = prod (1 - F_i)``.

    Assumes the competitors independent (hedged requests to one overloaded service are not).
    The grid stops at the first point where some input's law is not known: its last point, or
    the lowest point at which its truncated mass may lie.  Below that, each input's survival
    function is known (truncated mass lies above), so ``S = prod S_i`` there.

    Error ledger: ``S_i(k)`` errs by at most the cumulative error of the points up to ``k``
    (the truncated total is ``1 - sum`` of the represented part), and the law restricted to the
    grid is a push-forward of the product of the inputs' laws coarsened above the grid:
    ``l1 <= sum_i 2 l1_i prod_{j != i} (1 + 2 l1_j)`` plus rounding; each ``S_i(k)`` errs by at
    most the input's cumulative bound ``K_i``, so the cumulative bound is that of all_of.  The
    mass at or above the grid's end is truncated, with first moment at most
    ``min_j E[D_j 1{D_j >= end}]`` (``min <= D_j``; non-negative delays).
    """
    ds = _check(delays, "first_of")
    h, base, offs, length = _grid(ds)
    limit = min(o + len(d) for o, d in zip(offs, ds, strict=True))
    for o, d in zip(offs, ds, strict=True):
        if not untruncated(d.errors):
            limit = min(limit, o + d.errors.truncated_from)
    limit = max(limit, 1)
    product = np.ones(limit)
    log_rest = np.zeros(limit)
    for o, d in zip(offs, ds, strict=True):
        c, tail, r = _represented(d, o, length)
        s = np.minimum(tail[:limit] + (1.0 - r), 1.0)  # survival incl. mass above the lattice
        product *= s
        with np.errstate(divide="ignore"):
            log_rest += np.log1p(-np.minimum(c[:limit], 1.0))
    cdf_min = -np.expm1(log_rest)
    pmf, clipped = _pmf_from(cdf_min, product)
    rel = _value_rel(len(ds), max(len(d) for d in ds))
    r_point, r_l1, r_cum = _rounding(cdf_min, product, rel, clipped)
    l1 = _telescoped_l1([2 * d.errors.l1 for d in ds])
    cum = _telescoped_l1([cum_bound(d.errors) for d in ds])
    moment = _min_moment(ds, offs, limit, h, base)
    ledger = ErrorLedger(min(l1 + r_point, 2.0), l1 + r_l1, 0.0, limit, moment, cum + r_cum)
    ledger = ledger._replace(truncated_moment2=_order_moment2(ds, pmf, h, base, ledger, min))
    return _exact_or(pmf, h, base, ledger, exact_small.enclosure("min", ds, offs, limit))


def _min_moment(ds: list[Lattice], offs: list[int], limit: int, h: float, base: float) -> float:
    if base + h * limit < 0:
        return math.inf
    best = math.inf
    for o, d in zip(offs, ds, strict=True):
        e = d.errors
        start = max(limit - o, 0)
        x = d.values
        part = float(np.dot(d.pmf[start:], x[start:])) if start < len(d) else 0.0
        bound = part * (1 + (len(d) + 2) * UNIT_ROUNDOFF) + e.l1 * float(np.max(np.abs(x))) \
            + e.truncated_moment
        best = min(best, bound)
    return max(best, 1e-300)


def mixture(weights, delays) -> Lattice:
    """One path chosen at random: ``P(D = x) = sum_i w_i P(D_i = x)``.

    Parameters
    ----------
    weights : sequence of float
        Non-negative, summing to 1 (within ``WEIGHT_TOL``); not renormalised (the excess, if
        any, is counted in the L1 error bound).
    delays : sequence of Lattice
        One per weight, same step, origins whole steps apart.

    Assumes the choice of path independent of the path delays.  Error ledger: the weighted sums
    of the inputs' bounds, plus the rounding of a ``k``-term sum (``(k + 1) u`` relative).
    """
    ds = _check(tuple(delays), "mixture")
    try:
        w = np.asarray(weights, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise TypeError("weights must be a sequence of real numbers") from None
    if w.ndim != 1 or w.size != len(ds):
        raise ValueError(f"weights must have one entry per delay ({len(ds)}); got shape {w.shape}")
    if not np.all(np.isfinite(w)) or np.any(w < 0) or \
            abs(math.fsum(w.tolist()) - 1) > WEIGHT_TOL:
        raise ValueError(f"weights must be non-negative and sum to 1 (within {WEIGHT_TOL:g}); "
                         f"got {weights!r}")
    h, base, offs, length = _grid(ds)
    pmf = np.zeros(length)
    for wi, o, d in zip(w, offs, ds, strict=True):
        pmf[o : o + len(d)] += wi * np.asarray(d.pmf)
    rel = (len(ds) + 1) * UNIT_ROUNDOFF
    point = float(sum(wi * d.errors.point for wi, d in zip(w, ds, strict=True)))
    l1 = float(sum(wi * d.errors.l1 for wi, d in zip(w, ds, strict=True)))
    moment = float(sum(0.0 if untruncated(d.errors) else wi * d.errors.truncated_moment
                       for wi, d in zip(w, ds, strict=True)))
    tf = truncated_from([(d.errors, o) for d, o in zip(ds, offs, strict=True)], length)
    cum = float(sum(wi * cum_bound(d.errors) for wi, d in zip(w, ds, strict=True)))
    moment2 = float(sum(0.0 if untruncated(d.errors) else wi * d.errors.truncated_moment2
                        for wi, d in zip(w, ds, strict=True))) * (1 + rel)
    ledger = ErrorLedger(point + rel * float(np.max(pmf)), l1 + rel * float(np.sum(pmf)), 0.0,
                         tf, moment, cum + rel * float(np.sum(pmf)), moment2)
    return _exact_or(pmf, h, base, ledger, exact_small.enclosure("mix", ds, offs, length, w))


def _exact_or(pmf: np.ndarray, h: float, base: float, ledger: ErrorLedger, enc) -> Lattice:
    """The result, or with an exact enclosure (:mod:`polyconv.dist.exact_small`) its exact
    values rounded to float64 and the ledger's error bounds from the enclosure (they are about
    the new pmf)."""
    if enc is None:
        return Lattice._make(pmf, h, base, ledger)
    pmf = np.clip(enc.center, 0, 1).astype(float)
    point, l1, cum = EnclosureSums(pmf, enc).ledger_numbers()
    ledger = ledger._replace(point=point, l1=l1, cumulative=cum)
    return Lattice._make(pmf, h, base, ledger, enclosure=enc)
