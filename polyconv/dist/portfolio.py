"""Portfolios of independent lines: re-gridding to a common step, the total, diversification.

Re-gridding (:func:`regrid`) moves each point's mass to the two neighbouring points of the new
grid ``H j`` in proportions that keep its mass and its mean: mass ``p`` at ``x`` with
``a = H floor(x / H)`` goes ``p (a + H - x) / H`` to ``a`` and ``p (x - a) / H`` to ``a + H``
(the "method of rounding" with linear weights, first-order local moment matching; Klugman,
Panjer & Willmot, *Loss Models*, ch. 9, from memory).  Mean and mass are unchanged, the variance
grows by at most ``H^2 / 4``.  The map is a Markov kernel, so the computed error (L1,
cumulative) does not grow; each new point receives mass from at most ``ceil(H / h) + 1`` old
points (its point bound scales so).  The change of the law itself is a modelling step, like
discretisation: :class:`RegridEffect` states its size (largest change of the cdf on the new grid
and the variance added), which reports show.

The total of independent lines is their convolution (``Lattice + Lattice``), the
diversification benefit of a measure ``rho`` is ``sum_i rho(X_i) - rho(sum_i X_i)``.

Caution: independence between lines is an assumption (a model output, not advice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .lattice import Lattice


@dataclass(frozen=True)
class RegridEffect:
    """How much :func:`regrid` changed a law (a modelling change, not a computed error).

    Attributes
    ----------
    cdf_shift : float
        ``max_j |F_new(H j) - F_old(H j)|`` over the new grid points.
    variance_added : float
        ``Var(new) - Var(old)`` (between 0 and ``H^2 / 4``).
    mean_shift : float
        ``E[new] - E[old]`` (0 up to rounding).
    """

    cdf_shift: float
    variance_added: float
    mean_shift: float


def regrid(lat: Lattice, step: float) -> Lattice:
    """The law of ``lat`` on the grid ``step * j`` with its mass and mean kept (module
    docstring); the same as :meth:`Lattice.regrid`.

    Parameters
    ----------
    lat : Lattice
        Any lattice (its points need not lie on the new grid).
    step : float
        New step ``H > 0``.

    Returns
    -------
    Lattice
        Origin ``H floor(origin / H)``; the truncated part stays beyond (from the image of its
        first index), with its first moment bound raised by ``H`` times its mass.
    """
    if not isinstance(lat, Lattice):
        raise TypeError(f"lat must be a Lattice; got {type(lat).__name__}")
    return lat.regrid(step)


def regrid_effect(old: Lattice, new: Lattice) -> RegridEffect:
    """Size of the change made by :func:`regrid` (exact over the represented parts)."""
    pts = new.values
    f_new = np.cumsum(new.pmf)
    idx = np.searchsorted(old.values, pts + 1e-9 * old.step, side="right") - 1
    f_old = np.where(idx >= 0, np.cumsum(old.pmf)[np.clip(idx, 0, None)], 0.0)
    shift = float(np.max(np.abs(f_new - f_old))) if pts.size else 0.0
    return RegridEffect(shift, new._variance() - old._variance(), new._mean() - old._mean())


def common_step(lines: list[Lattice]) -> float:
    """The coarsest step of the lines (re-gridding finer lines up loses the least points)."""
    return max(lat.step for lat in lines)


@dataclass
class PortfolioResult:
    """Lines on one step, their independent total and per-line figures."""

    names: list[str]
    lines: list[Lattice]
    total: Lattice
    effects: list[RegridEffect]

    def diversification(self, measure: str, p: float) -> float:
        """``sum_i rho(X_i) - rho(total)`` for ``measure`` in ``{"var", "tvar"}``."""
        fn = {"var": "value_at_risk", "tvar": "tail_value_at_risk"}.get(measure)
        if fn is None:
            raise ValueError(f"measure must be 'var' or 'tvar'; got {measure!r}")
        return float(sum(getattr(x, fn)(p) for x in self.lines) - getattr(self.total, fn)(p))


def portfolio(lines, step: float | None = None, names: list[str] | None = None
              ) -> PortfolioResult:
    """Sum independent lines after re-gridding each to ``step`` (default: the coarsest).

    Parameters
    ----------
    lines : sequence of Lattice
        Aggregate laws of the lines (independent of each other: an assumption).
    step : float, optional
        Common step.
    names : list of str, optional
        Line names (default ``line 1``, ...).
    """
    lines = list(lines)
    if not lines or not all(isinstance(x, Lattice) for x in lines):
        raise TypeError("lines must be a non-empty sequence of Lattice")
    names = names or [f"line {i + 1}" for i in range(len(lines))]
    if len(names) != len(lines):
        raise ValueError(f"names has {len(names)} entries for {len(lines)} lines")
    h = common_step(lines) if step is None else float(step)
    on = [regrid(x, h) for x in lines]
    effects = [regrid_effect(x, y) for x, y in zip(lines, on, strict=True)]
    total = on[0]
    for x in on[1:]:
        total = total + x
    return PortfolioResult(names, on, total, effects)
