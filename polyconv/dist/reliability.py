"""Reliability outputs of a lifetime on a lattice: R(t), hazard rate, MTTF.

* Reliability (survival) ``R(t) = P(T > t)`` at mission times, each with its certified range
  (:meth:`Lattice.bounded` with ``"sf"``; sampled lifetimes carry their DKW band).
* Hazard rate of the lattice law: ``h(x_k) = P(T = x_k) / P(T >= x_k)`` per point (the
  discrete failure rate), divided by the step for a rate per unit time (Barlow & Proschan,
  *Statistical Theory of Reliability and Life Testing*, 1975, ch. 1, discrete case).
* MTTF ``= E[T]`` with its certified range (refused when the tail beyond the grid has no known
  first moment, e.g. a sample without an upper limit).

Systems (independent components; DESIGN.md section 6: in reliability a "series system" fails at
the *minimum* of lifetimes):

* series system (all must work): :func:`polyconv.dist.first_of` of the lifetimes;
* parallel system (one suffices): :func:`polyconv.dist.all_of`;
* k-out-of-n system (works while ``k`` work): :func:`polyconv.dist.order_stats.kth_of` with
  ``n - k + 1``;
* cold standby (a spare switched in, perfectly and at once, when the unit fails, and not ageing
  while idle): the lifetimes *add*, :func:`polyconv.dist.series` (sum) of the lifetimes.

Model output, not advice: component independence, perfect switching and the lifetime laws are
assumptions; check against engineering codes, standards and qualified practice.
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np

from .lattice import Lattice
from .ledger import Bounded


class Reliability(NamedTuple):
    """R(t) at each mission time, and the MTTF, each with its certified range."""

    times: list[float]
    reliability: list[Bounded]
    mttf: Bounded


def _quiet(lat: Lattice, measure: str, arg=None) -> Bounded:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return lat.bounded(measure) if arg is None else lat.bounded(measure, arg)


def reliability(lifetime: Lattice, times) -> Reliability:
    """``R(t) = P(T > t)`` at each mission time and the MTTF (module docstring)."""
    if not isinstance(lifetime, Lattice):
        raise TypeError(f"lifetime must be a Lattice; got {type(lifetime).__name__}")
    ts = [float(t) for t in np.atleast_1d(np.asarray(times, dtype=float))]
    return Reliability(ts, [_quiet(lifetime, "sf", t) for t in ts], _quiet(lifetime, "mean"))


def hazard(lifetime: Lattice, *, per_unit_time: bool = True) -> np.ndarray:
    """Discrete hazard ``p_k / P(T >= x_k)`` at each lattice point (``nan`` where nothing is
    left), divided by the step when ``per_unit_time``.  ``P(T >= x_k)`` is summed from the
    right with the truncated mass included (no cancellation in the tail)."""
    if not isinstance(lifetime, Lattice):
        raise TypeError(f"lifetime must be a Lattice; got {type(lifetime).__name__}")
    p = np.asarray(lifetime.pmf, dtype=np.longdouble)
    at_risk = (np.cumsum(p[::-1])[::-1] + lifetime.truncated_mass).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(at_risk > 0, lifetime.pmf / at_risk, np.nan)
    return h / lifetime.step if per_unit_time else h
