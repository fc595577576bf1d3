"""The Lattice of a continuous law (``Lattice.from_law``): masses, ledger, step check.

The masses and their ledger are :func:`polyconv.dist.from_law.law_grid`'s (rules and sources
there); this module wraps them in the Lattice class it is given (``cls``: the classmethod's own,
so that neither module imports :mod:`polyconv.dist.lattice`) and warns when the step is too
coarse for the law (:func:`polyconv.dist.step_check.warn_if_coarse`).
"""

from __future__ import annotations

import math

import numpy as np

from .from_law import law_grid, law_ledger
from .step_check import warn_if_coarse

__all__ = ["lattice_from_law", "make_lattice"]


def lattice_from_law(law, *, step: float, size: int | None = None, rule: str = "nearest",
                     check: bool = True, cls):
    """Put a continuous law on the lattice ``origin + step * j``, ``j = 0..size-1``.

    Parameters
    ----------
    law : scipy.stats frozen continuous distribution or callable
        The law (e.g. ``scipy.stats.lognorm(1.2, scale=8000)``), or its cdf (a non-decreasing
        callable on ``[0, inf)``, vectorised or not).
    step : float
        Lattice spacing ``h > 0``.
    size : int, optional
        Number of points.  Default: enough that the mass beyond is below ``DEFAULT_TAIL``
        (cut at ``MAX_POINTS`` with a :class:`TruncationWarning`).
    rule : {"nearest", "down", "up", "moments"}
        How a cell's mass is placed (:mod:`polyconv.dist.from_law`).  ``"down"``/``"up"`` give
        stochastic lower/upper bounds of the law (:func:`polyconv.dist.law_bracket` uses both).
    check : bool
        Run the step check (internal callers that checked the step once pass False).
    cls : type
        The Lattice class (``Lattice.from_law`` passes its own).

    Returns
    -------
    Lattice
        Origin 0 for a law on ``[0, inf)`` (else see
        :func:`polyconv.dist.from_law.lattice_origin`; the mass below it joins the first point).
        Its ledger records the mass beyond the grid and an upper bound of its first moment.
        A :class:`~polyconv.dist.step_check.CoarseStepWarning` says when the step is too coarse
        for the law (:func:`polyconv.dist.step_check.check_step`).

    Notes
    -----
    Discretisation changes the law; that modelling error is not part of the ledger (bracket it
    with ``"down"``/``"up"``).  It shrinks with ``step``: ``O(h)`` for down/up, ``O(h^2)`` for
    nearest on smooth densities (common practice, no source).
    """
    grid = law_grid(law, step=step, size=size, rule=rule)
    lattice = cls(grid.pmf, grid.step, grid.origin, errors=grid.errors)
    if check and grid.frozen is not None:
        warn_if_coarse(grid.frozen, lattice, rule)
    return lattice


def make_lattice(pmf: np.ndarray, h: float, origin: float, *, point: float, l1: float,
                 moment: float, moment2: float = math.inf, cls):
    """A ``cls`` Lattice whose ledger holds the evaluation error of the masses (``point``,
    ``l1``) and the mass beyond the grid (:func:`polyconv.dist.from_law.law_ledger`)."""
    return cls(pmf, h, origin, errors=law_ledger(pmf, point=point, l1=l1, moment=moment,
                                                 moment2=moment2))
