"""A compound of a count law and a continuous severity law on the grid (and step) a goal asks.

:func:`aggregate_for_goal` puts the severity on the lattice (:meth:`Lattice.from_law`), sizes the
grid by :func:`polyconv.dist.goals.first_size` and grows it until the :class:`Goal` is met
(:func:`polyconv.dist.goals.grow`); with ``step=None`` the step comes from a pilot run
(:func:`choose_step`, method in :mod:`polyconv.dist.goals`).

Caution: a model output, not advice; defer to local regulation and licensed actuarial practice.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from .compound import compound
from .counts import classify
from .goals import MIN_POINTS, PILOT_POINTS, Goal, first_size, grow
from .lattice import Lattice
from .step_check import CoarseStepWarning, _nice_floor, warn_if_coarse

__all__ = ["aggregate_for_goal", "choose_step"]


def aggregate_for_goal(counts, law, *, goal: Goal, step: float | None = None,
                       rule: str = "nearest", method: str = "auto"):
    """Compound of ``counts`` and a continuous severity law, grid (and step) chosen for ``goal``.

    Parameters
    ----------
    counts : scipy.stats frozen discrete distribution
        Law of the claim count.
    law : scipy.stats frozen continuous distribution
        Severity law, put on the lattice by :meth:`Lattice.from_law` with ``rule`` on as many
        points as the compound grid (a claim beyond it lands beyond the grid anyway).
    goal : Goal
        Measures and precision.
    step : float, optional
        Lattice step; None: chosen from a pilot run (module docstring).
    rule : {"nearest", "down", "up", "moments"}
    method : {"auto", "fft", "recursion"}

    Returns
    -------
    Lattice
        Meeting the goal, or the ``max_points`` grid with an :class:`AccuracyWarning` naming the
        measures not met.  A model output, not advice (see :mod:`polyconv.dist`).
    """

    if not isinstance(goal, Goal):
        raise TypeError(f"goal must be a polyconv.dist.Goal; got {type(goal).__name__}")
    transform_law = classify(counts).transform
    if step is None:
        step = choose_step(counts, law, goal, rule=rule)
    pilot = Lattice.from_law(law, step=step, size=PILOT_POINTS, rule=rule)
    size = max(first_size(transform_law, np.asarray(pilot.pmf), step, goal), MIN_POINTS)

    def build(s):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", CoarseStepWarning)  # checked once, below
            severity = Lattice.from_law(law, step=step, size=s, rule=rule)
        return compound(counts, severity, method=method, size=s)

    warn_if_coarse(law, pilot, rule)
    return grow(build, size, goal)


def choose_step(counts, law, goal: Goal, *, rule: str = "nearest") -> float:
    """``rtol`` times a pilot estimate of the highest VaR asked (else of the mean), rounded down
    to a round number; ``atol`` when that is larger."""

    levels = goal.levels()
    n_mean = float(counts.mean())
    top_p = max(levels) if levels else 0.5
    # a claim level that the aggregate's top level reaches (single big claim heuristic), and
    # the mean of the aggregate: the pilot grid covers both
    reach = max(float(law.isf(max((1 - top_p) / max(n_mean, 1.0), 1e-15))) * 4,
                4 * n_mean * float(law.mean()))
    coarse = reach / (PILOT_POINTS / 4)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        severity = Lattice.from_law(law, step=coarse, size=PILOT_POINTS, rule=rule)
        pilot = compound(counts, severity, size=PILOT_POINTS)
        scale = pilot.value_at_risk(top_p) if levels else pilot.mean()
    if not (math.isfinite(scale) and scale > 0):
        scale = coarse * 16
    rel = goal.rtol if goal.rtol > 0 else math.inf
    step = min(rel * scale, max(goal.atol, 0.0) or math.inf)
    if goal.atol > 0 and goal.rtol > 0:
        step = max(rel * scale, goal.atol)
    return _nice_floor(step)
