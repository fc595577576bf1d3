"""A continuous law put on the lattice ``origin + step * j``: the masses and their ledger.

Rules (Klugman, Panjer & Willmot, *Loss Models*, ch. 9; local moment matching after Gerber, "On
the numerical evaluation of the distribution of aggregate claims and its stop-loss premiums",
Insurance: Mathematics and Economics 1 (1982)), with ``F`` the cdf, ``S = 1 - F``, points
``x_j = o + j h``:

* ``"nearest"``: each point takes the mass of the cell around it, ``f_j = F(x_j + h/2) -
  F(x_j - h/2)`` (``f_0 = F(x_0 + h/2)``).
* ``"down"``: the mass of ``(x_j, x_{j+1}]`` sits at its lower end ``x_j`` (``f_0 = F(x_1)``).
  Stochastically smaller than ``X``: quantiles, TVaR and stop-loss premiums of the lattice are
  lower bounds of the law's, and stay so through sums and compounds of non-negative amounts.
* ``"up"``: the mass of ``(x_{j-1}, x_j]`` sits at its upper end ``x_j`` (``f_0 = F(x_0)``).
  Stochastically larger: upper bounds.
* ``"moments"``: local first-moment matching, ``f_0 = 1 - E[Y ^ h] / h``,
  ``f_j = (2 E[Y ^ jh] - E[Y ^ (j-1)h] - E[Y ^ (j+1)h]) / h`` for ``Y = X - o``; keeps the mean.
  ``E[Y ^ (jh)] - E[Y ^ (j-1)h] = int_{(j-1)h}^{jh} S(o + t) dt`` by Gauss-Legendre quadrature on
  each cell.

Cell masses are differences of ``F`` below the median and of ``S`` above it, so small tail
probabilities keep their relative accuracy.  Mass beyond the last point is never folded into it
nor renormalised away: the ledger records it (``truncated``) with the first moment of the
lattice model's part beyond the grid (``truncated_moment``, from
:mod:`polyconv.dist.law_moments`).  A step too coarse for the law is flagged
(:func:`polyconv.dist.step_check.check_step`).  The Lattice itself (``Lattice.from_law``) is
built in :mod:`polyconv.dist.law_lattice`; this module does not import the Lattice class.
"""

from __future__ import annotations

import math
import numbers
import sys
import warnings
from typing import NamedTuple

import numpy as np

from ..numerics import budget
from . import law_moments
from .accuracy import UNIT_ROUNDOFF
from .errors import TruncationWarning
from .ledger import ErrorLedger

RULES = ("nearest", "down", "up", "moments")
"""Names of the discretisation rules (see the module docstring)."""

DEFAULT_TAIL = 1e-12
"""Without ``size``: enough points that the mass beyond the lattice is below this."""

MAX_POINTS = 1 << 24
"""Largest lattice (memory budget: a few arrays of this many float64); a longer default is cut
here with a :class:`TruncationWarning`, a longer explicit ``size`` is refused."""

FROM_LAW_BYTES_PER_POINT = 64
"""Peak bytes per point of :func:`law_grid` (edges, cdf/sf values, differences, the pmf and
scipy's temporaries), checked against the memory budget before allocating."""

_OFFSET = {"nearest": 0.5, "down": 1.0, "up": 0.0}
"""Upper edge of cell ``j`` is ``o + (j + offset) h``."""

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(12)
_GL_NODES_LO, _GL_WEIGHTS_LO = np.polynomial.legendre.leggauss(6)
_CALLABLE_SLACK = 1e-12
"""A callable cdf may leave ``[0, 1]`` or decrease by this much (its own rounding)."""


class LawAccess:
    """cdf/sf access for a frozen scipy.stats continuous law or a callable cdf on ``[0, inf)``.

    Parameters
    ----------
    law : frozen scipy.stats continuous distribution or callable
    name : str
        Argument name used in error messages.
    """

    def __init__(self, law, name: str = "law"):
        from scipy import stats  # on first use: about a second cold (tests/test_import_light.py)

        self.name = name
        if isinstance(law, (stats.rv_continuous, stats.rv_discrete)):
            family = type(law).__name__.removesuffix("_gen")
            raise TypeError(f"{name} must be a frozen scipy.stats law, e.g. "
                            f"scipy.stats.{family}(...) with its parameters; got the unfrozen "
                            f"family scipy.stats.{family}")
        if isinstance(getattr(law, "dist", None), stats.rv_discrete):
            raise TypeError(f"{name} must be continuous; a discrete law is already on a lattice: "
                            "build a Lattice from its pmf")
        if law_moments.is_scipy_continuous(law):
            self.frozen = law
            self.lower = float(law.support()[0])
            if math.isnan(self.lower):  # scipy's mark of parameters outside the family's domain
                raise ValueError(f"{name}: invalid parameters for scipy.stats."
                                 f"{getattr(law.dist, 'name', 'law')} (args {law.args}, "
                                 f"keywords {law.kwds}): its support is undefined")
        elif callable(law):
            self.frozen = None
            self.call = law
            self.lower = 0.0
            if float(self._call(np.array([-1e-300]))[0]) > _CALLABLE_SLACK:
                raise ValueError(f"{name}: a callable cdf must describe a law on [0, inf) "
                                 "(its value just below 0 is not 0)")
        else:
            raise TypeError(f"{name} must be a frozen scipy.stats continuous distribution or a "
                            f"callable cdf; got {type(law).__name__}")

    def _call(self, x: np.ndarray) -> np.ndarray:
        """The callable at ``x`` (0 below 0: the law lives on ``[0, inf)``)."""
        below = x < 0
        if np.any(below) and self.lower == 0.0 and x.size > 1:
            out = np.zeros(x.shape)
            out[~below] = self._call(x[~below]) if np.any(~below) else 0.0
            return out
        try:
            out = np.asarray(self.call(x), dtype=float)
            if out.shape == x.shape:
                return out
        except (TypeError, ValueError):
            pass
        return np.array([float(self.call(float(v))) for v in x.ravel()]).reshape(x.shape)

    def cdf_sf(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(F(x), S(x))`` at increasing points ``x`` (a callable is checked: a cdf)."""
        if self.frozen is not None:
            return self.frozen.cdf(x), self.frozen.sf(x)
        c = self._call(x)
        if not np.all(np.isfinite(c)) or np.any(c < -_CALLABLE_SLACK) or \
                np.any(c > 1 + _CALLABLE_SLACK):
            k = int(np.argmax(~np.isfinite(c) | (c < -_CALLABLE_SLACK) | (c > 1 + _CALLABLE_SLACK)))
            raise ValueError(f"{self.name}: a callable cdf must take values in [0, 1]; "
                             f"cdf({x[k]!r}) = {c[k]!r}")
        drop = np.diff(c)
        if drop.size and float(np.min(drop)) < -_CALLABLE_SLACK:
            k = int(np.argmin(drop))
            raise ValueError(f"{self.name}: a callable cdf must be non-decreasing; cdf({x[k]!r}) "
                             f"= {c[k]!r} > cdf({x[k + 1]!r}) = {c[k + 1]!r}")
        c = np.clip(c, 0.0, 1.0)
        return c, 1.0 - c

    def tail_values(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(min(F, S), S is smaller)`` at increasing points ``x``: the cdf below the median, the
        sf above it, each evaluated once (small tail probabilities keep their relative
        accuracy)."""
        if self.frozen is None:
            c, s = self.cdf_sf(x)
            is_sf = c >= 0.5
            return np.where(is_sf, s, c), is_sf
        median = float(self.frozen.median())
        k = int(np.searchsorted(x, median, side="left"))
        values = np.empty(x.size)
        values[:k] = self.frozen.cdf(x[:k])
        values[k:] = self.frozen.sf(x[k:])
        is_sf = np.zeros(x.size, dtype=bool)
        is_sf[k:] = True
        return values, is_sf

    def sf(self, x: np.ndarray) -> np.ndarray:
        """``S(x)``."""
        if self.frozen is not None:
            return self.frozen.sf(x)
        return 1.0 - np.clip(self._call(x), 0.0, 1.0)

    def isf(self, q: float) -> float:
        """A point beyond which the mass is at most ``q`` (``inf`` if none is found)."""
        if self.frozen is not None:
            return float(self.frozen.isf(q))
        x = 1.0
        while self.sf(np.array([x]))[0] > q:
            x *= 2.0
            if x > 1e300:
                return math.inf
        return x

    def ppf_low(self, q: float) -> float:
        """A point below which the mass is about ``q`` (0 for a callable on ``[0, inf)``)."""
        if self.frozen is not None:
            return float(self.frozen.ppf(q))
        return 0.0


def check_rule(rule) -> str:
    """Validate a rule name (see :data:`RULES`)."""
    if rule not in RULES:
        raise ValueError(f"rule must be one of {', '.join(map(repr, RULES))}; got {rule!r}")
    return rule


def check_step_value(step) -> float:
    """Validate a lattice step: a positive finite real, at least the smallest normal double.

    A subnormal step is refused: the rounding model behind every bound (``|fl(x) - x| <= u|x|``,
    Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., sec. 2.2) holds only
    without underflow, and halving such a step reaches 0.
    """
    h = float(step) if isinstance(step, numbers.Real) and not isinstance(step, bool) else None
    if h is None or not (math.isfinite(h) and h > 0):
        raise ValueError(f"step must be a positive finite number; got {step!r}")
    if h < sys.float_info.min:
        raise ValueError(f"step must be at least {sys.float_info.min!r} (the smallest normal "
                         f"double; below it rounding is not relative and the bounds fail); "
                         f"got {step!r}")
    return h


def lattice_origin(law: LawAccess, h: float) -> float:
    """0 for a law on ``[0, inf)``; else ``h floor(lower end / h)``, the lower end being the
    support's or, when it is infinite, ``F^{-1}(DEFAULT_TAIL)``."""
    if law.lower >= 0:
        return 0.0 if law.lower == 0 else h * math.floor(law.lower / h)
    low = law.lower if math.isfinite(law.lower) else law.ppf_low(DEFAULT_TAIL)
    return h * math.floor(low / h)


def default_size(law: LawAccess, h: float, origin: float, tail: float = DEFAULT_TAIL) -> int:
    """Points from ``origin`` until the mass beyond is below ``tail`` (cut at ``MAX_POINTS``)."""
    top = law.isf(tail)
    n = (top - origin) / h + 3 if math.isfinite(top) else math.inf
    if n > MAX_POINTS:
        median = law.isf(0.5)
        if origin + h * (MAX_POINTS - 1) < median:  # most of the mass beyond any grid allowed
            raise ValueError(f"step={h!r} is too small for this law: {MAX_POINTS} points (the "
                             f"most from_law lays out) end at {origin + h * MAX_POINTS:.6g}, "
                             f"below the law's median {median:.6g}; give a step of at least "
                             f"{(median - origin) / MAX_POINTS:.3g} (e.g. "
                             f"{(median - origin) / 2 ** 16:.3g}) or an explicit size")
        warnings.warn(f"from_law: the tail needs more than {MAX_POINTS} points to fall below "
                      f"{tail}; cut there (see truncated_mass)", TruncationWarning, stacklevel=3)
        n = MAX_POINTS
    return max(int(math.ceil(n)), 2)


def rule_pmf(law: LawAccess, origin: float, h: float, size: int, rule: str,
             shift: float = 0.0) -> tuple[np.ndarray, float, float, float]:
    """Cell masses of ``rule`` on ``size`` points (cell edges moved by ``shift`` if given).

    Returns
    -------
    (pmf, point_error, l1_error, truncated)
        ``point_error`` bounds each mass's evaluation error and ``l1_error`` their sum: a few
        roundoffs of the cdf (below the median) or sf (above it) at both edges of each cell,
        scipy's cdf accuracy assumed; for ``"moments"`` the quadrature error instead, estimated
        by comparing 6- and 12-point Gauss-Legendre rules.  ``truncated`` is the lattice model's
        mass beyond the last point.
    """
    u = UNIT_ROUNDOFF
    if rule == "moments":
        cells = _cell_integrals(law, origin, h, size + 1, _GL_NODES, _GL_WEIGHTS)
        check = _cell_integrals(law, origin, h, size + 1, _GL_NODES_LO, _GL_WEIGHTS_LO)
        diff = np.abs(cells - check) / h
        pmf = np.empty(size)
        pmf[0] = 1.0 - cells[0] / h
        pmf[1:] = (cells[:-2] - cells[1:-1]) / h
        point = 8 * u + 2 * float(np.max(diff))
        l1 = 8 * u * size + 2 * float(np.sum(diff))
        return np.clip(pmf, 0.0, 1.0), point, l1, float(cells[-2]) / h
    edges = origin + shift + (np.arange(size + 1, dtype=float) - 1.0 + _OFFSET[rule]) * h
    tail = law.tail_values(edges)  # min(F, S) at each edge, and which one it is
    tail[0][0], tail[1][0] = 0.0, False  # everything below the first point joins it
    values, is_sf = tail
    cdf_side = np.where(is_sf, 1.0 - values, values)
    pmf = np.diff(cdf_side)
    from_sf = is_sf[:-1] & is_sf[1:]
    pmf[from_sf] = values[:-1][from_sf] - values[1:][from_sf]
    truncated = float(values[-1]) if is_sf[-1] else 1.0 - float(values[-1])
    l1 = 4 * u * float(np.sum(values)) + 2 * u
    return np.clip(pmf, 0.0, 1.0), 8 * u, l1, truncated


def _cell_integrals(law: LawAccess, origin: float, h: float, n_cells: int, nodes, weights):
    """``int_{o+(j-1)h}^{o+jh} S(t) dt`` for ``j = 1..n_cells``, by blocks of cells so the
    nodes times cells arrays stay small (within ``FROM_LAW_BYTES_PER_POINT``)."""
    out = np.empty(n_cells)
    for start in range(0, n_cells, 1 << 16):
        j = np.arange(start, min(start + (1 << 16), n_cells))
        pts = (origin + h * j)[:, None] + (nodes[None, :] + 1.0) * (h / 2.0)
        out[start:start + j.size] = (law.sf(pts.ravel()).reshape(pts.shape) @ weights) * (h / 2.0)
    return out


def truncated_moment(law: LawAccess, origin: float, h: float, size: int, rule: str,
                     truncated: float) -> float:
    """Upper bound of the first moment of the lattice model's mass beyond the grid.

    With ``b`` the upper edge of the last cell and ``T(b) = E[X 1{X > b}]``: a point of the
    lattice model lies at most ``c = h/2`` (nearest), 0 (down), ``h`` (up) above the amount it
    stands for, so the moment is at most ``T(b) + c S(b)``.  For ``"moments"`` it is exactly
    ``n I_n + E[(X - nh)+]`` (``I_n`` the last cell integral; telescoping the rule's masses).
    ``inf`` for a callable cdf or a law without finite mean.
    """
    if law.frozen is None:
        return math.inf
    n = size
    if rule == "moments":
        b = origin + n * h
        if b < 0:
            return math.inf
        tm = law_moments.tail_moment(law.frozen, b)
        s_b = float(law.frozen.sf(b))
        excess = max(tm - b * s_b, 0.0) + 4 * UNIT_ROUNDOFF * tm
        return (origin + n * h) * truncated + excess
    b = origin + (n - 1 + _OFFSET[rule]) * h
    if b < 0:
        return math.inf
    lift = {"nearest": 0.5, "down": 0.0, "up": 1.0}[rule] * h
    tm = law_moments.tail_moment(law.frozen, b)
    return tm * (1 + 4 * UNIT_ROUNDOFF) + lift * truncated


def truncated_moment2(law: LawAccess, origin: float, h: float, size: int, rule: str,
                      truncated: float) -> float:
    """Upper bound of the second moment of the lattice model's mass beyond the grid.

    With ``b`` the upper edge of the last cell, ``T1(b) = E[X 1{X > b}]``,
    ``T2(b) = E[X^2 1{X > b}]`` (:func:`polyconv.dist.law_moments.tail_moment2`) and a point of
    the model at most ``c`` above the amount it stands for (as in :func:`truncated_moment`):
    ``(X + c)^2 <= X^2 + 2 c X + c^2`` for ``X >= 0``, so the bound is ``T2 + 2 c T1 + c^2 S(b)``.
    ``inf`` for a callable cdf, the ``"moments"`` rule, or a law without a closed form or a
    finite second moment.
    """
    if law.frozen is None or rule == "moments":
        return math.inf
    b = origin + (size - 1 + _OFFSET[rule]) * h
    if b < 0:
        return math.inf
    lift = {"nearest": 0.5, "down": 0.0, "up": 1.0}[rule] * h
    t2 = law_moments.tail_moment2(law.frozen, b)
    if not math.isfinite(t2):
        return math.inf
    t1 = law_moments.tail_moment(law.frozen, b)
    return (t2 + 2 * lift * t1 + lift * lift * truncated) * (1 + 8 * UNIT_ROUNDOFF)


class LawGrid(NamedTuple):
    """A law's masses on ``origin + step j`` with their ledger: what its Lattice is built from
    (:func:`polyconv.dist.law_lattice.lattice_from_law`) and what the step check compares
    (:func:`polyconv.dist.step_check.check_step`)."""

    pmf: np.ndarray
    step: float
    origin: float
    errors: ErrorLedger
    frozen: object  # the frozen scipy.stats law, or None for a cdf

    @property
    def truncated_mass(self) -> float:
        """``1 - sum(pmf)`` (as :attr:`polyconv.dist.Lattice.truncated_mass`)."""
        return self.errors.truncated


def law_grid(law, *, step: float, size: int | None = None, rule: str = "nearest") -> LawGrid:
    """The masses of ``law`` on ``origin + step * j``, ``j = 0..size-1``, and their ledger.

    Parameters and rules as :func:`polyconv.dist.law_lattice.lattice_from_law`, which wraps the
    result in a Lattice and runs the step check.
    """
    access = LawAccess(law)
    h = check_step_value(step)
    rule = check_rule(rule)
    origin = lattice_origin(access, h)
    if size is None:
        size = default_size(access, h, origin)
    elif isinstance(size, bool) or not isinstance(size, numbers.Integral) or size < 1:
        raise ValueError(f"size must be a positive integer; got {size!r}")
    elif size > MAX_POINTS:
        raise ValueError(f"size must be at most {MAX_POINTS} points (memory budget); got {size}")
    size = int(size)
    budget.check_allocation(FROM_LAW_BYTES_PER_POINT * float(size),
                            f"size={size} (from_law points)")
    pmf, point, l1, truncated = rule_pmf(access, origin, h, size, rule)
    moment = truncated_moment(access, origin, h, size, rule, truncated)
    moment2 = truncated_moment2(access, origin, h, size, rule, truncated)
    ledger = law_ledger(pmf, point=point, l1=l1, moment=moment, moment2=moment2)
    return LawGrid(pmf, h, origin, ledger, access.frozen)


def law_ledger(pmf: np.ndarray, *, point: float, l1: float, moment: float,
               moment2: float = math.inf) -> ErrorLedger:
    """The ledger of masses computed with per-point error ``point`` (``l1`` in all): the mass
    beyond the grid, ``1 - sum(pmf)``, with the bounds ``moment`` and ``moment2`` of its first
    and second moments."""
    # one longdouble sum (within (n + 2) u_long of the exact sum, counted in l1)
    total = float(np.sum(np.asarray(pmf, dtype=np.longdouble)))
    l1 = l1 + (pmf.size + 2) * float(np.finfo(np.longdouble).eps) * max(total, 1.0)
    truncated = max(0.0, 1.0 - total)
    return ErrorLedger(point, min(l1, 2.0), truncated, pmf.size,
                       moment if truncated > 0 else 0.0,
                       truncated_moment2=moment2 if truncated > 0 else 0.0)
