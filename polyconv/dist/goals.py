"""Grids chosen from the goal: say what you want and how precisely, get the grid that delivers it.

A :class:`Goal` lists measures (``("var", 0.995)``, ``("tvar", 0.995)``, ``("quantile", 0.999)``,
``("stop_loss", 1e6)``, ``("sf", 400.0)``...) and a precision (relative ``rtol`` and/or absolute
``atol``).  It is met by a Lattice when, for every measure, the certified range of
:meth:`Lattice.bounded` is finite and no wider than ``max(atol, rtol |value|)``.

How far the grid must reach follows from the error model rather than from a fixed tail mass
(DESIGN.md section 6b): the mass beyond the grid and its first moment (the ledger's
``truncated`` and ``truncated_moment``; for a compound the exact mean ``E[N] E[X]`` gives the
latter) bound what lies off the grid, so a TVaR or a stop-loss premium only needs a grid long
enough that ``E[(S - b)+]`` beyond its end ``b`` is within the tolerance.  Heavy tails, whose
Chernoff bounds are useless, are sized by the split bound of
:func:`polyconv.dist.transform.log_split_tail`.

The search: a first size where the tail bound of ``P(S >= s)`` is below ``(1 - p) rtol`` for
the highest level asked (at least past any point or retention asked), then the real computation,
checked against the goal with its own bounds; the grid doubles while the goal is unmet and the
range is limited by truncation, up to ``max_points`` (memory budget), where it stops with a
warning naming the measures not met.  When asked to (``step=None`` in :func:`aggregate_for_goal`)
the step is chosen too: a pilot run on a coarse grid estimates the highest VaR asked, and the step
is ``rtol`` times that (rounded down to a round number), so the grid's own
resolution meets the goal (:mod:`polyconv.dist.goal_aggregate`).

Caution: the goal is about the computation on the lattice model; the discretisation of a
continuous law is a separate, modelling error, bracketed by :func:`polyconv.dist.law_bracket`.
"""

from __future__ import annotations

import math
import numbers
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import AccuracyWarning

GOAL_MEASURES = ("cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean")
"""Measures a :class:`Goal` may name (as :meth:`Lattice.bounded`)."""

LEVEL_MEASURES = ("quantile", "var", "tvar")
"""Measures whose argument is a probability level."""

MAX_POINTS = 1 << 22
"""Default memory budget of a goal grid (points)."""

MIN_POINTS = 64
"""Smallest grid tried."""

PILOT_POINTS = 1 << 14
"""Points of the pilot run that estimates the VaR when the step is chosen."""


@dataclass(frozen=True)
class Goal:
    """What to compute and how precisely.

    Parameters
    ----------
    measures : sequence of (str, float or None)
        ``(measure, arg)`` pairs, measure in :data:`GOAL_MEASURES`: a level in ``(0, 1)`` for
        quantile/var/tvar, a point for cdf/sf, a retention for stop_loss, None for mean.
    rtol : float
        Largest relative width of each certified range (default ``1e-4``).
    atol : float
        Largest absolute width (default 0); a range passes when within either.
    max_points : int
        Memory budget: the grid never exceeds this many points.

    Examples
    --------
    >>> Goal([("var", 0.995), ("tvar", 0.995)], rtol=1e-4).levels()
    [0.995, 0.995]
    """

    measures: tuple
    rtol: float = 1e-4
    atol: float = 0.0
    max_points: int = MAX_POINTS

    def __post_init__(self):
        try:
            pairs = tuple((m, a) for m, a in self.measures)
        except (TypeError, ValueError):
            raise TypeError("measures must be a sequence of (measure, arg) pairs, e.g. "
                            "[('var', 0.995), ('tvar', 0.995)]") from None
        if not pairs:
            raise ValueError("measures must name at least one (measure, arg) pair")
        for m, a in pairs:
            if m not in GOAL_MEASURES:
                raise ValueError(f"measures: {m!r} is not one of "
                                 f"{', '.join(map(repr, GOAL_MEASURES))}")
            if m in LEVEL_MEASURES and not (isinstance(a, numbers.Real) and 0 < a < 1):
                raise ValueError(f"measures: the level of {m!r} must lie in (0, 1); got {a!r}")
            if m in ("cdf", "sf", "stop_loss") and not (isinstance(a, numbers.Real)
                                                        and math.isfinite(a)):
                raise ValueError(f"measures: {m!r} needs a finite point; got {a!r}")
        object.__setattr__(self, "measures", pairs)
        for name in ("rtol", "atol"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, numbers.Real) or not v >= 0:
                raise ValueError(f"{name} must be a number >= 0; got {v!r}")
        if self.rtol == 0 and self.atol == 0:
            raise ValueError("rtol and atol cannot both be 0")
        mp = self.max_points
        if isinstance(mp, bool) or not isinstance(mp, numbers.Integral) or mp < MIN_POINTS:
            raise ValueError(f"max_points must be an integer >= {MIN_POINTS}; got {mp!r}")

    def levels(self) -> list[float]:
        """Probability levels asked (quantile, var, tvar)."""
        return [float(a) for m, a in self.measures if m in LEVEL_MEASURES]

    def points(self) -> list[float]:
        """Amounts asked about (cdf/sf points, stop-loss retentions)."""
        return [float(a) for m, a in self.measures if m in ("cdf", "sf", "stop_loss")]

    def tolerance(self, value: float) -> float:
        """Largest accepted width of a range around ``value``."""
        return max(self.atol, self.rtol * abs(value))

    def shortfalls(self, lattice) -> list[str]:
        """Measures whose certified range on ``lattice`` misses the goal (empty: goal met)."""
        out = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for m, a in self.measures:
                b = lattice.bounded(m, a)
                width = b.high - b.low
                if not (math.isfinite(b.low) and math.isfinite(b.high)) or \
                        width > self.tolerance(b.value if math.isfinite(b.value) else b.high):
                    out.append(f"{m}({a}) in [{b.low:.6g}, {b.high:.6g}]")
        return out


def first_size(transform_law, f: np.ndarray, step: float, goal: Goal) -> int:
    """Smallest grid whose tail bound of ``P(S >= s)`` is below ``(1 - p) rtol`` for the highest
    level asked (``rtol * 1e-3`` without levels), and past every point asked."""
    from .transform import size_for_tail

    levels = goal.levels()
    rtol = goal.rtol if goal.rtol > 0 else 1e-6
    tol = min((1 - p) * rtol for p in levels) if levels else rtol * 1e-3
    reach = max([0.0] + goal.points()) / step
    minimum = int(min(max(MIN_POINTS, math.ceil(reach) + 2), goal.max_points))
    return size_for_tail(transform_law, f, max(tol, 1e-300), minimum, goal.max_points)


def compound_for_goal(counts, severity, goal: Goal, build):
    """The compound of ``counts`` and the severity Lattice on the shortest grid meeting ``goal``
    (module docstring); used by ``compound(..., goal=...)``, which passes ``build(size)``, the
    compound on ``size`` points (so this module does not import the compound's)."""
    from .counts import classify

    if not isinstance(goal, Goal):
        raise TypeError(f"goal must be a polyconv.dist.Goal; got {type(goal).__name__}")
    law = classify(counts)
    f = np.asarray(severity.pmf)
    if severity.origin:
        f = np.concatenate([np.zeros(int(round(severity.origin / severity.step))), f])
    size = first_size(law.transform, f, severity.step, goal)
    return grow(build, size, goal)


def grow(build, size: int, goal: Goal):
    """Build at ``size``, doubling while the goal is unmet, up to ``goal.max_points``."""
    while True:
        lattice = build(size)
        missing = goal.shortfalls(lattice)
        if not missing:
            return lattice
        if size >= goal.max_points:
            warnings.warn(f"goal not met within {goal.max_points} points (max_points): "
                          f"{'; '.join(missing)}", AccuracyWarning, stacklevel=3)
            return lattice
        size = min(2 * size, goal.max_points)
