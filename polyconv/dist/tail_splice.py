"""Two resolutions for heavy tails: a fine grid for the body, a coarse bracket for the far tail.

A TVaR or stop-loss premium of a heavy-tailed aggregate depends on mass far beyond its quantiles
(Poisson(10) x lognormal(sigma 2): ``E[(S - b)+]`` is still 1e-4 of TVaR(99.5%) at ``b`` ~ 300
times the VaR).  One fine grid reaching that far costs millions of points.  Instead, for the
lattice model ``M`` (severity put on step ``h`` by a rule of :meth:`Lattice.from_law`, compound
``S``) and a grid end ``b = n h``::

    E[(S - d)+] = E[(min(S, b) - d)+] + E[(S - b)+]        (d <= b)

* ``min(S, b)`` is exact on the fine grid: its ``n`` computed points plus the truncated mass at
  ``b`` (the compound on ``[0, b)`` needs only severity points below ``b``), with the fine
  lattice's ledger (the mass at ``b`` is known up to its L1 error).
* ``E[(S - b)+]`` is bracketed by two coarse compounds on step ``H = k h``: each severity point of
  ``M`` moved down (resp. up) to a multiple of ``H`` gives ``S_down <= S <= S_up`` in the
  stochastic order (sums keep it: Shaked & Shanthikumar, *Stochastic Orders* (2007), thm 1.A.3,
  from memory), hence ``E[(S_down - b)+] <= E[(S - b)+] <= E[(S_up - b)+]``.  Both coarse
  severities come straight from the law: moving the cells of ``M`` to coarse ends is the rule
  "down" (or "up") on step ``H`` with the cell edges shifted by the fine rule's offset.  Their own
  certified ranges (:meth:`Lattice.bounded`, the low end of the down side and the high end of the
  up side) carry rounding and truncation.

The coarse bracket is ``H E[N 1{S > b}]`` wide at most (a coupling moves each claim by less than
``H``), so the split point ``b`` and ``H`` are chosen together: ``P(S >= b)`` from the heavy-tail
bound of :func:`polyconv.dist.transform.log_tail_bound` on a pilot severity, ``H`` as large as the
goal's share allows, the coarse reach from the law's closed-form stop-loss
(:mod:`polyconv.dist.law_moments`), minimising the total number of points.  Quantiles come from
the fine grid alone.  TVaR is ``min_x {x + E[(S - x)+] / (1 - p)}`` (Rockafellar & Uryasev,
J. Banking & Finance 26 (2002)): its high end is the value at the lattice's own VaR with the high
stop-loss, its low end the smallest value over the certified quantile bracket with the low one.

Caution: a model output, not advice; the ranges are those of the lattice model ``M``, whose
discretisation of the law is bracketed separately (:func:`polyconv.dist.law_bracket`).
"""

from __future__ import annotations

import math
import warnings
from typing import NamedTuple

import numpy as np

from . import law_moments
from .accuracy import UNIT_ROUNDOFF
from .enclosure import Enclosure
from .errors import AccuracyWarning
from .from_law import _OFFSET, LawAccess, check_rule, rule_pmf
from .goals import Goal
from .lattice import Lattice
from .law_lattice import lattice_from_law, make_lattice
from .ledger import Bounded, ErrorLedger, cum_bound
from .splice_plan import pilot_for, pilot_step, plan_grids

REBALANCE_RTOL = 1e-8
"""Goals at least this loose skip the transforms' re-tilted second run (rounding bounds of a
few 1e-13 are far inside them)."""

REFINE_GAIN = 1.5
"""A refinement round that narrows the widest missed range by less than this factor ends the
refinements (the range is then bounded by rounding or truncation, not by the coarse steps)."""

RETRIES = 3
"""Times the grids are refined (fine reach doubled, coarse step halved) when the goal is unmet."""


FSUM_MAX = 1 << 15
"""Lattices up to this many points have their truncated mass appended correctly rounded
(:func:`capped`, ``math.fsum``); longer ones by one longdouble sum (``fsum`` costs ~0.1 us a
point)."""

_UL = float(np.finfo(np.longdouble).eps) / 2


class SplicedAnswers(NamedTuple):
    """Result of :func:`spliced_aggregate`."""

    answers: dict
    """``(measure, arg) -> Bounded`` for every measure of the goal."""
    step: float
    """Fine step ``h``."""
    fine_points: int
    levels: tuple
    """``(step, points)`` of each level of the far tail (steps are multiples of ``h``)."""
    lattice: object
    """The fine compound (a Lattice on ``[0, b)``)."""


def coarse_pair(law, rule: str, h: float, k: int, size: int):
    """Severity lattices on step ``H = k h`` below and above the lattice model of ``rule`` on
    step ``h`` (module docstring): ``(down, up)``, ``size`` points each."""
    access = LawAccess(law)
    if rule not in _OFFSET:
        raise ValueError(f"rule must be 'nearest', 'down' or 'up' for a spliced grid; got {rule!r}")
    big = k * h
    lift = (1.0 - _OFFSET[rule]) * h  # a point of the model lies at most this above its amount
    out = []
    for side, shift in (("down", -lift), ("up", _OFFSET[rule] * h)):
        pmf, point, l1, truncated = rule_pmf(access, 0.0, big, size, side, shift=shift)
        last_edge = shift + (size - 1 + _OFFSET[side]) * big
        extra = lift + (big if side == "up" else 0.0)
        tm = law_moments.tail_moment(law, max(last_edge, 0.0))
        moment = tm * (1 + 4 * UNIT_ROUNDOFF) + extra * truncated
        out.append(make_lattice(pmf, big, 0.0, point=point, l1=l1, moment=moment, cls=Lattice))
    return tuple(out)


def capped(lattice):
    """The law of ``min(S, b)`` for a Lattice on ``[0, b)`` whose truncated mass lies at or
    beyond ``b``: its points plus the truncated mass at ``b`` (known up to the L1 error)."""
    from .lattice import Lattice

    led = lattice.errors
    n = len(lattice)
    if led.truncated_from < n:
        raise ValueError("the truncated mass may lie on the grid (truncated_from < len); "
                         "a spliced answer needs it beyond the grid's end")
    # the appended mass 1 - sum(pmf) errs by the cumulative bound K of the represented part plus
    # its own rounding: correctly rounded (math.fsum of 1 and the negated pmf, u of itself) on
    # short lattices, a longdouble sum ((n + 2) u_L, Higham section 4.2) and two roundings on
    # long ones; per point at most that, in L1 l1 + that, in Euclidean norm l2 + that
    p = np.asarray(lattice.pmf)
    if n <= FSUM_MAX:
        t = max(math.fsum([1.0, *(-p).tolist()]), 0.0)
        rnd = 2 * UNIT_ROUNDOFF * t
    else:
        s = np.sum(p.astype(np.longdouble))
        t = max(float(1 - s), 0.0)
        rnd = (n + 2) * _UL * float(s) + 2 * UNIT_ROUNDOFF * (t + float(s))
    pmf = np.append(p, t)
    k = cum_bound(led) + rnd + 1e-300
    ledger = ErrorLedger(min(max(led.point, k), 1.0), min(led.l1 + k, 2.0), 0.0, n + 1, 0.0,
                         min(cum_bound(led) + k, 2.0))
    cache = lattice._cache
    profile = None if "profile" not in cache else np.append(cache["profile"], k)
    l2 = None if "l2" not in cache else (cache["l2"] + k) * (1 + 4 * UNIT_ROUNDOFF)
    enc = cache.get("enclosure")
    if enc is not None:  # the appended mass: its computed value, radius k as above
        enc = Enclosure(np.append(enc.center, np.longdouble(t)),
                        np.append(enc.radius, k))
    return Lattice._make(pmf, lattice.step, lattice.origin, ledger, profile, l2, enc)


def _quiet(lattice, measure, arg) -> Bounded:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return lattice.bounded(measure, arg)


def _tail_excess(levels, ends, d: float) -> tuple[float, float, float]:
    """``(value, low, high)`` of ``E[(S - d)+]`` for ``d >= ends[0]`` summed over the levels:
    level ``i`` brackets ``E[(min(S, e_i) - e_{i-1})+]`` (the last one is not capped)."""
    value = low = high = 0.0
    for i, (down, up) in enumerate(levels):
        start = max(ends[i], d)
        if i + 1 < len(levels) and start >= ends[i + 1]:
            continue
        lo_b, hi_b = _quiet(down, "stop_loss", start), _quiet(up, "stop_loss", start)
        # the middle of the certified range (the coarse lattices' own values leave out their
        # truncated parts, so they may lie below it)
        value += 0.5 * (lo_b.low + hi_b.high)
        low += lo_b.low
        high += hi_b.high
    return value, low, high


def _stop_loss(cap, levels, ends, d: float) -> tuple[float, float, float]:
    """``(value, low, high)`` of ``E[(S - d)+]`` (module docstring)."""
    b = ends[0]
    if d >= b:
        return _tail_excess(levels, ends, d)
    body = _quiet(cap, "stop_loss", d)
    v, lo, hi = _tail_excess(levels, ends, b)
    return body.value + v, body.low + lo, body.high + hi


def _answer(measure, arg, fine, cap, levels, ends, goal: Goal) -> Bounded:
    if not levels:  # one grid reaches far enough: its own ledger bounds the rest
        return _judge(_quiet(fine, measure, arg), goal)
    b = ends[0]
    if measure in ("quantile", "var"):
        return _judge(_quiet(fine, measure, arg), goal)
    if measure in ("cdf", "sf") and arg < b:
        return _judge(_quiet(cap, measure, arg), goal)
    if measure in ("cdf", "sf"):
        i = max(j for j in range(len(levels)) if ends[j] <= arg)
        lo, hi = _quiet(levels[i][0], "sf", arg), _quiet(levels[i][1], "sf", arg)
        value = 0.5 * (lo.value + hi.value)
        if measure == "sf":
            return _judge(Bounded(value, lo.low, hi.high, False, ""), goal)
        return _judge(Bounded(1 - value, 1 - hi.high, 1 - lo.low, False, ""), goal)
    if measure == "mean":
        return _judge(Bounded(*_stop_loss(cap, levels, ends, 0.0), False, ""), goal)
    if measure == "stop_loss":
        return _judge(Bounded(*_stop_loss(cap, levels, ends, float(arg)), False, ""), goal)
    p = float(arg)  # tvar
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        q_lo, q_hi = fine.quantile_bracket(p)
    if not q_hi < b:
        return Bounded(math.nan, q_lo, math.inf, True, f"the {p} quantile may lie beyond the "
                       "fine grid")
    h = fine.step
    xs = np.arange(round(q_lo / h), round(q_hi / h) + 1) * h
    lows, highs, values = [], [], []
    for x in xs:
        v, lo, hi = _stop_loss(cap, levels, ends, float(x))
        values.append(x + v / (1 - p))
        lows.append(x + lo / (1 - p))
        highs.append(x + hi / (1 - p))
    k_own = min(int(np.searchsorted(xs, _own_var(fine, p) - h / 2)), len(xs) - 1)
    return _judge(Bounded(values[k_own], min(lows), min(highs), False, ""), goal)


def _excess(answers: dict, goal: Goal) -> float:
    """Largest ratio of a refused answer's certified width to the goal's tolerance."""
    out = 0.0
    for b in answers.values():
        if b.refused:
            width = b.high - b.low
            tol = goal.tolerance(b.high if math.isfinite(b.high) else b.low)
            out = max(out, width / tol if tol > 0 and math.isfinite(width) else math.inf)
    return out


def _own_var(fine, p: float) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(fine.value_at_risk(p))


def _judge(b: Bounded, goal: Goal) -> Bounded:
    if b.refused and not (math.isfinite(b.low) and math.isfinite(b.high)):
        return b
    value = b.value
    width = b.high - b.low
    ref = value if math.isfinite(value) else b.high
    if not (math.isfinite(width) and width <= goal.tolerance(ref)):
        return Bounded(math.nan, b.low, b.high, True, f"certified range [{b.low:.6g}, "
                       f"{b.high:.6g}] is wider than the goal (rtol {goal.rtol:g}, atol "
                       f"{goal.atol:g})")
    return Bounded(value, b.low, b.high, False, "")


def spliced_aggregate(counts, law, *, goal: Goal, step: float | None = None,
                      rule: str = "nearest", method: str = "auto") -> SplicedAnswers:
    """Answers of ``goal`` for a compound with a continuous severity, on two grids.

    Parameters
    ----------
    counts : scipy.stats frozen discrete distribution
        Law of the claim count.
    law : scipy.stats frozen continuous distribution on ``[0, inf)``
        Severity law (with closed-form tail moments: see :mod:`polyconv.dist.law_moments`).
    goal : Goal
        Measures and precision.
    step : float, optional
        Fine step ``h``; None: from a pilot VaR (:func:`pilot_step`).
    rule : {"nearest", "down", "up"}
        Rule of the lattice model.
    method : {"auto", "fft", "recursion"}
        Route of the three compounds.

    Returns
    -------
    SplicedAnswers
        A :class:`~polyconv.dist.Bounded` per measure of the goal (refused with a reason when
        its range misses the goal after :data:`RETRIES` refinements), the grids used and the
        fine compound.  Model output, not advice (see :mod:`polyconv.dist`).
    """
    from .compound import compound_lattice
    from .counts import classify

    if not isinstance(goal, Goal):
        raise TypeError(f"goal must be a polyconv.dist.Goal; got {type(goal).__name__}")
    check_rule(rule)
    if rule == "moments":
        raise ValueError("rule must be 'nearest', 'down' or 'up' for a spliced grid; got "
                         "'moments'")
    if method not in ("auto", "fft", "recursion"):
        raise ValueError(f"method must be 'auto', 'fft' or 'recursion'; got {method!r}")
    count_law = classify(counts)

    def compound(sev, size):  # no std is asked; a tolerance far above the rounding
        return compound_lattice(counts, count_law, sev, method, size, second_moment=False,
                                rebalance=not goal.rtol >= REBALANCE_RTOL)

    pilot = pilot_for(counts, law)
    if step is None:
        step = pilot_step(pilot, goal)
    h = float(step)
    n_f, plan = plan_grids(counts, law, h, goal, pilot)
    if not plan:  # a light enough tail: one grid, sized by the goal (polyconv.dist.goals)
        from .goal_aggregate import aggregate_for_goal
        fine = aggregate_for_goal(counts, law, goal=goal, step=h, rule=rule, method=method)
        answers = {(m, a): _judge(_quiet(fine, m, a), goal) for m, a in goal.measures}
        return SplicedAnswers(answers, h, len(fine), (), fine)
    sev = lattice_from_law(law, step=h, size=n_f, rule=rule, cls=Lattice)
    fine = compound(sev, n_f)  # refinements change the far-tail levels only
    cap = capped(fine)
    previous = math.inf
    for attempt in range(RETRIES + 1):
        levels, ends = [], [h * n_f]
        for i, (k, n) in enumerate(plan):
            down_sev, up_sev = coarse_pair(law, rule, h, k, n)
            pair = [compound(x, n) for x in (down_sev, up_sev)]
            if i + 1 < len(plan):
                pair = [capped(x) for x in pair]
            levels.append(tuple(pair))
            ends.append(n * k * h)
        answers = {(m, a): _answer(m, a, fine, cap, levels, ends, goal)
                   for m, a in goal.measures}
        missed = [f"{m}({a}): {r.reason}" for (m, a), r in answers.items() if r.refused]
        excess = _excess(answers, goal)
        if not missed or attempt == RETRIES or excess > previous / REFINE_GAIN:
            break  # met, out of rounds, or the last refinement did not help (rounding-bound)
        previous = excess
        plan = [(max(1, k // 2), min(2 * n, goal.max_points)) for k, n in plan]
    if missed:
        warnings.warn("goal not met: " + "; ".join(missed), AccuracyWarning, stacklevel=2)
    return SplicedAnswers(answers, h, n_f, tuple((k * h, n) for k, n in plan), fine)
