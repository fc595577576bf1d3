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
