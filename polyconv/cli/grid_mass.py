"""Refusing a run whose grid holds (almost) none of the probability.

When every claim amount is beyond the severity grid (a step far too small, e.g. 1e-300), when
the total is far beyond the aggregate grid (a Poisson mean of 1e9 on a few million points), or
when a table's weights overflow (``counts = [1e308, 1e308]`` sums to inf, so every probability is
0), the lattice holds no probability: its mean and sd would print as 0 and every quantile would
be refused.  Such a run is refused as a spec error naming the key to change (exit status 2,
nothing written), before any report file is made.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..dist import Lattice
from .report import fmt
from .spec import Section


def held_mass(lat: Lattice) -> float:
    """Probability on the grid: ``sum(pmf)`` (0 when everything lies beyond it or was lost)."""
    return float(np.sum(lat.pmf))


def grid_text(lat: Lattice, unit: str) -> str:
    """``"the grid of 20,000 points of step 100 (up to 1,999,900 EUR)"``."""
    end = lat.origin + lat.step * (len(lat) - 1)
    return f"the grid of {len(lat):,} points of step {lat.step:g} (up to {fmt(end)} {unit})"


def require_mass(lat: Lattice, needed: float, fail: Callable[[str], Exception], advice: str,
                 what: str, unit: str) -> None:
    """Refuse a run whose grid holds less probability than ``needed``.

    Parameters
    ----------
    lat : Lattice
        The computed distribution.
    needed : float
        Least probability the grid must hold (e.g. the lowest level asked: below it every
        quantile lies beyond the grid).  A grid holding none at all is always refused, so a
        report can never say "mean 0, sd 0" for mass that lies beyond it.
    fail : callable
        ``message -> exception`` naming the spec key to change (a SpecError, exit status 2).
    advice : str
        What to change, e.g. ``"choose a larger grid.step"``.
    what : str
        What the lattice is, e.g. ``"the aggregate loss"``.
    unit : str
        Unit of the values.
    """
    held = held_mass(lat)
    if held > 0 and held >= needed:
        return
    if held > 0:
        raise fail(f"{grid_text(lat, unit)} holds only {held:.3g} of the probability of "
                   f"{what}, less than the {needed:g} the report needs; {advice}; nothing "
                   "was written")
    raise fail(f"{grid_text(lat, unit)} holds none of the probability of {what}: all of it "
               f"lies beyond the grid or was lost; {advice}; nothing was written")


def leaf_fail(sec: Section) -> tuple[Callable[[str], Exception], str]:
    """Who to blame, and what to advise, when a law of a spec puts no probability on the grid:
    its weights (``counts``, ``probabilities``, e.g. a total that overflows) or, for a
    continuous law, ``grid.step``."""
    for key in ("counts", "probabilities"):
        if sec.has(key):
            total = sum(sec.numbers(key, minimum=0.0))
            return (lambda message, key=key: sec.error(key, message),
                    f"its {key} must have a finite positive total (they total {total:g})")
    return (lambda message: sec.doc.error(("grid", "step"), message),
            "choose a grid.step near its typical values")
