"""Planning a spliced grid: the fine step, the fine grid's end and the levels of the far tail.

:func:`polyconv.dist.tail_splice.spliced_aggregate` answers on a fine grid ``[0, b)`` and brackets
``E[(S - b)+]`` by coarse "down"/"up" compounds on levels ``[e_{i-1}, e_i)`` of steps ``H_i``.
The bracket of a level is at most ``H_i E[N 1{S > e_{i-1}}]`` wide (a coupling moves each claim
by less than ``H_i``), about ``H_i c P(S > e_{i-1})`` with ``c`` the size-biased claim count
``E[N^2] / E[N]`` (a path with a large claim has about that many claims).  Given the goal's width
``w`` (its tolerance times ``1 - p`` for a TVaR), this module chooses ``b``, the level ends
(ratio :data:`LEVEL_RATIO`) and the ``H_i`` (the share of ``w`` split in proportion to the square
root of each level's need, which minimises the total points) so that the planned cost
(:func:`_cost`) is smallest.  ``P(S > x)`` is read from uncertified pilot compounds
(:mod:`polyconv.dist.pilot`) on the safe side; the last level stops where the law's closed-form
tail moment (:mod:`polyconv.dist.law_moments`) times ``E[N]`` fits in the share.

Nothing here is certified: the answers are certified afterwards by the ledgers of the real
compounds (and the grids are refined when they miss the goal).

Caution: a model output, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from . import law_moments
from .accuracy import dot
from .goals import Goal
from .pilot import PILOT_POINTS, Pilot, pilot_compound

SPLIT_SHARE = 0.8
"""Share of the goal's width given to the coarse bracket of the far tail."""


def plan_grids(counts, law, h: float, goal: Goal, pilot=None):
    """``(n_fine, [(k_i, n_i)])``: the fine grid and the levels of the far tail (module
    docstring), from a pilot compound on a coarse step (:mod:`polyconv.dist.pilot`; estimates
    only: the answers are certified afterwards)."""
    levels = goal.levels() or [0.5]
    top_p = max(levels)
    n_mean = float(counts.mean())
    # claims on a path with a large claim: the size-biased count E[N^2] / E[N] (lambda + 1 for
    # a Poisson count)
    claims = (float(counts.var()) + n_mean ** 2) / n_mean if n_mean > 0 else 1.0
    if pilot is None:
        pilot = pilot_for(counts, law)
    var = pilot.var(top_p)
    tvar = pilot.tvar(top_p, n_mean * law_moments.tail_moment(law, pilot.far_end))
    if not math.isfinite(tvar):
        tvar = 4 * var
    width = goal.tolerance(tvar) * (1 - top_p)
    for m, a in goal.measures:
        if m == "stop_loss":
            width = min(width, goal.tolerance(pilot.stop_loss(a)))
    width = max(width, 1e-300)
    reach = _coarse_reach(law, n_mean, SPLIT_SHARE * width / 3)

    def sf(x):
        return max(SF_MARGIN * pilot.sf_high(x, claims), 1e-300)

    best = None
    end = max(2.0 * var, max([0.0] + goal.points()) + h, 64 * h)
    while end < reach and end / h <= goal.max_points:
        plan = _levels(sf, end, reach, claims, SPLIT_SHARE * width * 2 / 3, h)
        if plan is not None:
            cost = _cost(end / h) + 2 * sum(_cost(n) for _, n in plan)
            if best is None or cost < best[0]:
                best = (cost, int(math.ceil(end / h)), plan)
        end *= END_RATIO
    if best is None:
        return min(int(math.ceil(reach / h)) + 1, goal.max_points), []
    return best[1], best[2]


def _levels(sf, end: float, reach: float, claims: float, share: float, h: float):
    """Levels ``[(k_i, n_i)]`` from ``end`` to ``reach`` (ratio :data:`LEVEL_RATIO`), the goal's
    ``share`` split in proportion to the square root of each level's need (which minimises the
    total points ``sum e_i claims sf(e_{i-1}) / share_i``); None when a level would need a step
    below ``h``."""
    ends = [end]
    while ends[-1] < reach:
        ends.append(min(ends[-1] * LEVEL_RATIO, reach))
    need = [ends[i + 1] * claims * sf(ends[i]) for i in range(len(ends) - 1)]
    if not need:
        return []
    root = sum(math.sqrt(c) for c in need)
    out = []
    for i, c in enumerate(need):
        s_i = share * math.sqrt(c) / root
        big = s_i / (claims * sf(ends[i]))
        if big < h:
            return None
        k = int(big / h)
        out.append((k, int(math.ceil(ends[i + 1] / (k * h))) + 1))
    return out


LEVEL_RATIO = 8.0
"""Each level of the far tail reaches this many times further than the previous one."""

END_RATIO = 1.25
"""Candidate ends of the fine grid are this far apart (geometrically)."""

COMPOUND_OVERHEAD = 20_000
"""Cost of one compound beyond its points, in points (its fixed work: bounds, ledger)."""


def _cost(points: float) -> float:
    """Planning cost of a compound on ``points`` (transform ``n log n`` plus the fixed work)."""
    return points * math.log2(max(points, 2.0)) / 16 + COMPOUND_OVERHEAD


PILOT_REACH = 1e-12
"""A pilot reaches the severity's ``1 - PILOT_REACH`` quantile."""


def pilot_for(counts, law) -> PilotPair:
    """The pilot compounds (:mod:`polyconv.dist.pilot`) that size a spliced plan: one reaching
    the severity's ``1 - PILOT_REACH`` quantile on :data:`~polyconv.dist.pilot.PILOT_POINTS`
    points, and, when its VaR lies within a few of its steps (tails so heavy that reach and
    resolution conflict), a second one reaching a few times that VaR."""
    from .counts import classify

    transform_law = classify(counts).transform
    reach = float(law.isf(PILOT_REACH))
    far = pilot_compound(transform_law, law, reach / PILOT_POINTS)
    var_hi = far.var(1 - 1e-3)
    near = far
    if math.isfinite(var_hi) and var_hi < NEAR_STEPS * far.step:
        near = pilot_compound(transform_law, law, max(4 * var_hi, far.step) / NEAR_POINTS,
                              NEAR_POINTS)
    return PilotPair(far, near, law)


NEAR_STEPS = 1024
"""A second, finer pilot is run when the far pilot's 99.9% VaR is within this many steps."""

NEAR_POINTS = 1 << 13
"""Points of the finer pilot."""

SF_MARGIN = 1.0
"""The plan reads the pilot's survival function (already read on the safe side,
:meth:`PilotPair.sf_high`) times this; 1 measured 15-20 % faster than 2 on five heavy models,
with certified TVaR widths 4.7e-5 to 7.0e-5 against a goal of 1e-4 (2: 3e-5 to 5.5e-5)."""


class PilotPair(NamedTuple):
    """A far-reaching pilot and a finer one near the body (the same one when one suffices)."""

    far: Pilot
    near: Pilot
    law: object
    """The severity law (beyond the far pilot's end)."""

    @property
    def far_end(self) -> float:
        return self.far.step * len(self.far.pmf)

    @property
    def near_end(self) -> float:
        return self.near.step * len(self.near.pmf)

    def var(self, p: float) -> float:
        v = self.near.var(p)
        return v if math.isfinite(v) else self.far.var(p)

    def stop_loss(self, d: float) -> float:
        """Estimate of ``E[(S - d)+]`` on the pilots: the near one below its end, the far one
        beyond."""
        if self.near is self.far or d >= self.near_end:
            return _pilot_stop_loss(self.far, d)
        end = self.near_end
        return (_pilot_stop_loss(self.near, d) + _pilot_stop_loss(self.far, end)
                + (end - d) * self.far.sf(end))

    def tvar(self, p: float, tail_moment: float) -> float:
        v = self.var(p)
        if not math.isfinite(v):
            return math.inf
        return v + (self.stop_loss(v) + max(tail_moment, 0.0)) / (1 - p)

    def sf_high(self, x: float, claims: float) -> float:
        """``P(S > x)`` read further down by the pilot points' offset (half a pilot step per
        claim, ``claims`` plus four standard deviations of them): an estimate on the safe
        side."""
        if x >= self.far_end:  # a single large claim (subexponential tails), on the safe side
            return min(1.0, claims * float(self.law.sf(x / 2)))
        pilot = self.near if x < self.near_end else self.far
        slack = (claims + 4 * math.sqrt(claims)) * pilot.step
        return pilot.sf(max(x - slack, 0.0))


def _pilot_stop_loss(pilot: Pilot, d: float) -> float:
    x = np.arange(len(pilot.pmf)) * pilot.step
    return dot(pilot.pmf, np.maximum(x - d, 0.0))


def pilot_step(pilot: PilotPair, goal: Goal) -> float:
    """``rtol`` times the pilot's highest VaR asked (else its median), rounded down to a round
    number (``atol`` when that is larger): the fine grid's own resolution meets the goal."""
    from .step_check import _nice_floor

    levels = goal.levels()
    scale = pilot.var(max(levels) if levels else 0.5)
    if not (math.isfinite(scale) and scale > 0):
        scale = 16 * pilot.near.step
    step = goal.rtol * scale if goal.rtol > 0 else goal.atol
    if goal.atol > 0:
        step = max(step, goal.atol) if goal.rtol > 0 else goal.atol
    return _nice_floor(step)


def _coarse_reach(law, n_mean: float, share: float) -> float:
    """Smallest ``B`` (by bisection in ``log B``) with ``E[N] E[X 1{X > B}] <= share`` (closed
    forms of :mod:`polyconv.dist.law_moments`): where the last level may stop, its truncated
    part's first moment (about ``E[N]`` times that) being within the share."""
    def excess(x):
        return n_mean * law_moments.tail_moment(law, x)

    lo = max(float(law.median()), 1e-300)
    hi = lo
    while excess(hi) > share and hi < 1e300:
        hi *= 4.0
    for _ in range(24):  # hi / lo ends below 4^(2^-24): far finer than any plan needs
        mid = math.sqrt(lo * hi)
        if excess(mid) > share:
            lo = mid
        else:
            hi = mid
    return hi
