"""Is the step fine enough for the law?  Lattice against law, on quantities known exactly.

A lattice put on a step far too coarse for its law (e.g. a lognormal of median 1000 on a step of
100000) has almost all its mass on the first point and a mean that is a small fraction of the
law's.  The check compares, on the part of the line the lattice covers, quantities the law gives in
closed form (:mod:`polyconv.dist.law_moments`, from scipy.stats):

* the mean, ``sum_j x_j f_j`` against ``E[X 1{X <= b}]`` (``b`` the upper edge of the last cell;
  not for ``"moments"``, which keeps the mean by construction);
* the limited expected value at the law's median ``m``, ``E[min(X, m)]``;
* on request, a layer's expected value ``E[min((X - d)+, l)]`` (limited expected values at
  ``d + l`` and ``d``).

A relative gap above ``rtol`` (default :data:`STEP_RTOL`) warns with a :class:`CoarseStepWarning`
and suggests a step: the largest of ``h / 2, h / 4, ...`` (rounded down to a round number,
:data:`NICE_MANTISSAS`) whose lattice passes with a margin of 2.  The gap shrinks like ``h^2``
for ``"nearest"`` and like ``h`` for ``"down"``/``"up"`` on smooth densities (common practice,
no source).
"""

from __future__ import annotations

import math
import sys
import warnings
from typing import NamedTuple

import numpy as np

from . import law_moments
from .accuracy import dot
from .errors import AccuracyWarning
from .from_law import (
    LawAccess,
    check_rule,
    check_step_value,
    lattice_origin,
    law_grid,
    rule_pmf,
    truncated_moment,
)

STEP_RTOL = 1e-2
"""Default tolerance of the relative gap between lattice and law (1%)."""

SUGGEST_MAX_POINTS = 1 << 20
"""Largest trial lattice when searching for a suggested step."""


class CoarseStepWarning(AccuracyWarning):
    """The step is too coarse for the law: the lattice's mean (or limited expected value) is
    off the law's exact one by more than the tolerance."""


class StepCheck(NamedTuple):
    """Outcome of :func:`check_step` for the worst of the compared quantities."""

    measure: str
    """What was compared, e.g. ``"mean"``, ``"E[min(X, 1000)]"``."""
    lattice_value: float
    law_value: float
    relative_gap: float
    """``|lattice - law| / |law|``."""
    ok: bool
    """``relative_gap <= rtol``."""
    suggested_step: float
    """A step that passes (``nan`` when ``ok``; the current step divided by up to 2^40 else)."""


def _comparisons(frozen, pmf: np.ndarray, h: float, origin: float, truncated: float,
                 moment: float, rule: str, layer):
    """``[(name, lattice value, law value)]`` for the lattice ``pmf`` of ``rule``."""
    x = origin + h * np.arange(pmf.size)
    out = []
    mean = law_moments.law_mean(frozen)
    if rule != "moments" and math.isfinite(mean) and origin >= 0:
        edge = {"nearest": 0.5, "down": 1.0, "up": 0.0}[rule]
        b = max(origin + (pmf.size - 1 + edge) * h, 0.0)
        out.append(("mean", dot(pmf, x), mean - law_moments.tail_moment(frozen, b)))
    if origin >= 0:
        m = float(frozen.median())
        out.append((f"E[min(X, {m:.6g})]", dot(pmf, np.minimum(x, m)) + m * truncated,
                    law_moments.limited_mean(frozen, m)))
    if layer is not None:
        d, lim = layer
        pay = np.minimum(np.maximum(x - d, 0.0), lim)
        top = origin + (pmf.size - 1) * h
        beyond = lim * truncated if math.isfinite(lim) else moment - d * truncated
        if math.isfinite(lim) and top < d + lim:
            beyond = 0.0  # the trial grid ends inside the layer: compare on the grid only
            hi_law = law_moments.limited_mean(frozen, top) - law_moments.limited_mean(frozen, d)
        else:
            hi = law_moments.limited_mean(frozen, d + lim) if math.isfinite(lim) else mean
            hi_law = hi - law_moments.limited_mean(frozen, d)
        out.append((f"layer E[min((X - {d:g})+, {lim:g})]", dot(pmf, pay) + beyond,
                    hi_law))
    return out


def _worst(comparisons) -> tuple[str, float, float, float]:
    worst = ("", math.nan, math.nan, 0.0)
    for name, lat, law in comparisons:
        if not (math.isfinite(lat) and math.isfinite(law)) or law == 0:
            continue
        gap = abs(lat - law) / abs(law)
        if gap > worst[3]:
            worst = (name, lat, law, gap)
    return worst


NICE_MANTISSAS = (8.0, 6.0, 5.0, 4.0, 3.0, 2.5, 2.0, 1.5, 1.0)
"""Suggested steps are one of these times a power of ten."""


def _nice_floor(x: float) -> float:
    """Largest of :data:`NICE_MANTISSAS` times a power of ten not above ``x``."""
    e = math.floor(math.log10(x))
    for m in NICE_MANTISSAS:
        if m * 10.0 ** e <= x * (1 + 1e-12):
            return m * 10.0 ** e
    return 10.0 ** e


def _suggest(access: LawAccess, h: float, rule: str, rtol: float, layer, reach: float) -> float:
    """First of ``h / 2^k`` whose trial lattice passes with margin 2 (rounded to a nice step);
    NaN when none does before the trial lattice reaches :data:`SUGGEST_MAX_POINTS` points or
    when halving stops shrinking the gap (then the lattice's size, not its step, is at fault:
    it truncates the law)."""
    frozen = access.frozen
    far = min(reach, float(frozen.isf(1e-9)))
    if layer is not None:
        far = max(far, layer[0] + (layer[1] if math.isfinite(layer[1]) else 0.0))
    trial = h
    span = far - lattice_origin(access, h)  # a step beyond the span is pointless to halve
    gaps: list[float] = []
    for _ in range(40):
        trial = span / 2.0 if span > 0 and trial > span else trial / 2.0
        if not trial >= sys.float_info.min:  # halving ran into underflow: no step to suggest
            break
        origin = lattice_origin(access, trial)
        size = int(min(max((far - origin) / trial + 2, 2), SUGGEST_MAX_POINTS))
        pmf, _, _, truncated = rule_pmf(access, origin, trial, size, rule)
        moment = truncated_moment(access, origin, trial, size, rule, truncated)
        gap = _worst(_comparisons(frozen, pmf, trial, origin, truncated, moment, rule, layer))[3]
        if gap <= rtol / 2:
            return _nice_floor(trial)
        gaps.append(gap)
        # the trial lattice truncates the law and three halvings kept the gap: the size is
        # at fault, no step will pass
        stalled = truncated > rtol and len(gaps) >= 4 and not gap < 0.9 * gaps[-4]
        if size >= SUGGEST_MAX_POINTS or stalled:
            break
    return math.nan


def check_step(law, *, step: float, rule: str = "nearest", rtol: float = STEP_RTOL,
               deductible: float | None = None, limit: float | None = None,
               size: int | None = None, warn: bool = True) -> StepCheck:
    """Compare the lattice of ``law`` on ``step`` with the law (see the module docstring).

    Parameters
    ----------
    law : scipy.stats frozen continuous distribution on ``[0, inf)``
    step : float
        Lattice step.
    rule : {"nearest", "down", "up", "moments"}
        Discretisation rule (:func:`polyconv.dist.law_lattice.lattice_from_law`).
    rtol : float
        Largest relative gap accepted (default :data:`STEP_RTOL`).
    deductible, limit : float, optional
        Also compare the layer ``min((X - deductible)+, limit)`` (``limit`` default infinite).
    size : int, optional
        Points of the lattice (default that of ``Lattice.from_law``).
    warn : bool
        Issue a :class:`CoarseStepWarning` when the gap exceeds ``rtol``.

    Returns
    -------
    StepCheck
        The worst comparison and, when it fails, a suggested step.
    """
    access = LawAccess(law)
    if access.frozen is None:
        raise TypeError("law must be a frozen scipy.stats continuous law (a callable cdf has "
                        "no exact moments to compare with)")
    h = check_step_value(step)
    rule = check_rule(rule)
    if not (isinstance(rtol, (int, float)) and rtol > 0):
        raise ValueError(f"rtol must be a positive number; got {rtol!r}")
    layer = _layer(deductible, limit)
    grid = law_grid(law, step=h, size=size, rule=rule)  # the masses Lattice.from_law holds
    return _check(access, grid, rule, rtol, layer, warn, stacklevel=2)


def _layer(deductible, limit):
    if deductible is None and limit is None:
        return None
    d = 0.0 if deductible is None else float(deductible)
    lim = math.inf if limit is None else float(limit)
    if not (math.isfinite(d) and d >= 0):
        raise ValueError(f"deductible must be a finite number >= 0; got {deductible!r}")
    if not lim > 0:
        raise ValueError(f"limit must be positive; got {limit!r}")
    return d, lim


def _check(access: LawAccess, lattice, rule: str, rtol: float, layer, warn: bool,
           stacklevel: int) -> StepCheck:
    h, origin = lattice.step, lattice.origin
    pmf = np.asarray(lattice.pmf)
    truncated = lattice.truncated_mass
    moment = truncated_moment(access, origin, h, pmf.size, rule, truncated)
    name, lat, law_value, gap = _worst(_comparisons(access.frozen, pmf, h, origin, truncated,
                                                    moment, rule, layer))
    if gap <= rtol:
        return StepCheck(name, lat, law_value, gap, True, math.nan)
    reach = origin + h * pmf.size
    suggested = _suggest(access, h, rule, rtol, layer, reach)
    if warn:
        if math.isfinite(suggested):
            advice = f"try step={suggested:g}"
        elif float(access.sf(np.array([reach]))[0]) > rtol:
            advice = "no smaller step helps: the lattice's size truncates the law (raise size)"
        else:
            advice = "no smaller step found that passes"
        warnings.warn(f"step {h:g} is too coarse for this law ({rule!r} rule): the lattice's "
                      f"{name} is {lat:.6g} against the law's {law_value:.6g} (relative gap "
                      f"{gap:.2g} > {rtol:g}); {advice}", CoarseStepWarning,
                      stacklevel=stacklevel + 1)
    return StepCheck(name, lat, law_value, gap, False, suggested)


def warn_if_coarse(frozen, lattice, rule: str, rtol: float = STEP_RTOL) -> None:
    """The check run by ``Lattice.from_law`` on the lattice it built (mean and limited mean)."""
    if float(frozen.support()[0]) < 0:
        return
    _check(LawAccess(frozen), lattice, rule, rtol, None, True, stacklevel=4)
