"""Where is the continuous model's answer?  One call: the "down" and "up" lattices bracket it.

The rule ``"down"`` of :meth:`Lattice.from_law` puts each cell's mass at its lower end, ``"up"`` at
its upper end, so ``X_down <= X <= X_up`` in the usual stochastic order (Klugman, Panjer &
Willmot, *Loss Models*, ch. 9).  The order is kept by every non-decreasing operation of
independent amounts: sums (``+``, ``nfold``), compounds of non-negative severities with a fixed
count law, maxima and minima (``all_of``, ``first_of``), layers ``min((X - d)+, l)`` (Shaked &
Shanthikumar, *Stochastic Orders* (2007), thm 1.A.3, from memory).  Measures that grow with the
stochastic order (sf, quantile/VaR, TVaR, stop-loss, mean) are then bracketed::

    measure(model(X_down)) <= measure(model(X)) <= measure(model(X_up))

and the cdf the other way round.  :func:`law_bracket` builds the model twice and combines each
side's own certified computation bounds (:meth:`Lattice.bounded`): the low end from the down
lattice's ``low``, the high end from the up lattice's ``high``.  So "p99 of the continuous model
lies in [a, b]" covers discretisation, rounding and truncation at once.  The standard deviation is
not monotone in the stochastic order and is not offered.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from typing import NamedTuple

from .errors import AccuracyWarning

GROWING = ("sf", "quantile", "var", "tvar", "stop_loss", "mean")
"""Measures that do not decrease when the model grows in the stochastic order."""

SHRINKING = ("cdf",)
"""Measures that do not increase."""


class Bracket(NamedTuple):
    """Certified range ``[low, high]`` of a measure of the continuous model."""

    low: float
    high: float


def law_bracket(build: Callable | None, law, *, step: float, measure: str,
                arg: float | None = None, size: int | None = None) -> Bracket:
    """Bracket a measure of the model built from a continuous law (module docstring).

    Parameters
    ----------
    build : callable or None
        ``build(severity_lattice) -> Lattice``: the model, a composition of non-decreasing
        operations of independent amounts (e.g. ``lambda x: compound(stats.poisson(10), x)``,
        ``lambda x: x.nfold(4)``).  None: the law itself.
    law : scipy.stats frozen continuous distribution or callable cdf
        The continuous law (see :meth:`Lattice.from_law`).
    step : float
        Lattice step of both discretisations.
    measure : {"cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean"}
        As in :meth:`Lattice.bounded`.
    arg : float, optional
        The measure's argument (point, level or retention).
    size : int, optional
        Points of both discretisations (default that of :meth:`Lattice.from_law`).

    Returns
    -------
    Bracket
        ``(low, high)``; an end that a side cannot certify is ``-inf``/``inf`` (with an
        :class:`AccuracyWarning` giving that side's reason).

    Examples
    --------
    >>> from scipy import stats
    >>> from polyconv.dist import law_bracket
    >>> lo, hi = law_bracket(lambda x: x.nfold(2), stats.expon(), step=0.01,
    ...                      measure="quantile", arg=0.99)
    >>> lo <= float(stats.gamma(2).ppf(0.99)) <= hi
    True
    """
    from .lattice import Lattice

    if measure not in GROWING + SHRINKING:
        hint = " (the standard deviation is not monotone in the stochastic order)" \
            if measure == "std" else ""
        raise ValueError(f"measure must be one of {', '.join(map(repr, GROWING + SHRINKING))}"
                         f"{hint}; got {measure!r}")
    if build is not None and not callable(build):
        raise TypeError(f"build must be a callable taking a Lattice (or None); got "
                        f"{type(build).__name__}")
    sides = []
    for rule in ("down", "up"):
        lattice = Lattice.from_law(law, step=step, size=size, rule=rule)
        model = lattice if build is None else build(lattice)
        if not isinstance(model, Lattice):
            raise TypeError(f"build must return a Lattice; got {type(model).__name__}")
        sides.append(model.bounded(measure, arg))
    down, up = sides
    low_side, high_side = (down, up) if measure in GROWING else (up, down)
    low = _end(low_side.low, low_side, "low", -math.inf)
    high = _end(high_side.high, high_side, "high", math.inf)
    return Bracket(low, high)


def _end(value: float, side, which: str, fallback: float) -> float:
    if math.isnan(value) or (side.refused and not math.isfinite(value)):
        warnings.warn(f"law_bracket: the {which} end is not certified ({side.reason or 'refused'})",
                      AccuracyWarning, stacklevel=3)
        return fallback
    return float(value)


class GoalBracket(NamedTuple):
    """Result of :func:`bracket_to_goal`."""

    low: float
    high: float
    step: float
    """The step that met the goal (or the last one tried)."""
    met: bool


def bracket_to_goal(make: Callable, measure: str, arg: float | None = None, *, step: float,
                    atol: float = 0.0, rtol: float = 0.0, halvings: int = 8) -> GoalBracket:
    """Bracket a measure of a continuous model to a stated precision, halving the step.

    "p99.9 to 0.1 ms" for a delay network, "VaR 99.5% to 1e-4 relative" for any model built
    from lattices: ``make(rule, step)`` builds the model from its continuous laws put on
    lattices of ``step`` by ``rule`` ("down" and "up", :meth:`Lattice.from_law`), and the
    bracket of the continuous model's measure is the low end of the "down" model and the high
    end of the "up" one (module docstring: the stochastic order).  The step is halved until
    ``high - low <= max(atol, rtol * max(|low|, |high|))``.

    Parameters
    ----------
    make : callable
        ``make(rule, step) -> Lattice``; a composition of non-decreasing operations of
        independent amounts (sums, compounds, maxima and minima, layers).
    measure, arg
        As in :func:`law_bracket`.
    step : float
        First step tried.
    atol, rtol : float
        Precision (one of them positive).
    halvings : int
        Most times the step is halved.

    Returns
    -------
    GoalBracket
        ``(low, high, step, met)``; ``met`` False (with an :class:`AccuracyWarning`) when the
        precision was not reached after ``halvings`` halvings.

    Examples
    --------
    >>> from scipy import stats
    >>> from polyconv.dist import Lattice, bracket_to_goal
    >>> law = stats.expon(scale=2.0)
    >>> def make(rule, step):
    ...     return Lattice.from_law(law, step=step, rule=rule).nfold(3)
    >>> b = bracket_to_goal(make, "quantile", 0.999, step=0.5, atol=0.1)
    >>> b.met and b.low <= float(stats.gamma(3, scale=2.0).ppf(0.999)) <= b.high
    True
    """
    if not callable(make):
        raise TypeError(f"make must be a callable (rule, step) -> Lattice; got "
                        f"{type(make).__name__}")
    if measure not in GROWING + SHRINKING:
        raise ValueError(f"measure must be one of {', '.join(map(repr, GROWING + SHRINKING))}; "
                         f"got {measure!r}")
    for name, v in (("atol", atol), ("rtol", rtol), ("step", step)):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not v >= 0 \
                or not math.isfinite(v):
            raise ValueError(f"{name} must be a finite number >= 0; got {v!r}")
    if not (atol > 0 or rtol > 0):
        raise ValueError("atol or rtol must be positive")
    if not step > 0:
        raise ValueError(f"step must be positive; got {step!r}")
    if isinstance(halvings, bool) or not isinstance(halvings, int) or halvings < 0:
        raise ValueError(f"halvings must be a non-negative integer; got {halvings!r}")
    from .lattice import Lattice

    h = float(step)
    low = high = math.nan
    for i in range(halvings + 1):
        sides = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # a refused side is an infinite end, judged below
            for rule in ("down", "up"):
                model = make(rule, h)
                if not isinstance(model, Lattice):
                    raise TypeError(f"make must return a Lattice; got {type(model).__name__}")
                sides.append(model.bounded(measure, arg))
        down, up = sides
        low_side, high_side = (down, up) if measure in GROWING else (up, down)
        low = low_side.low if math.isfinite(low_side.low) else -math.inf
        high = high_side.high if math.isfinite(high_side.high) else math.inf
        if high - low <= max(atol, rtol * max(abs(low), abs(high))):
            return GoalBracket(float(low), float(high), h, True)
        if i < halvings:
            h /= 2
    warnings.warn(f"bracket_to_goal: [{low:.6g}, {high:.6g}] at step {h:g} is wider than the goal "
                  f"(atol {atol:g}, rtol {rtol:g}) after {halvings} halvings", AccuracyWarning,
                  stacklevel=2)
    return GoalBracket(float(low), float(high), h, False)
