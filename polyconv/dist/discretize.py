"""Discretisation of a continuous distribution onto a lattice of step ``h``.

Methods (Klugman, Panjer & Willmot, *Loss Models*, ch. 9; local moment matching after Gerber,
"On the numerical evaluation of the distribution of aggregate claims and its stop-loss premiums",
Insurance: Mathematics and Economics 1 (1982)), with ``F`` the cdf, ``S = 1 - F``, points
``x_j = o + j h``:

* ``"rounding"`` (mass dispersal to the nearest point): ``f_0 = F(x_0 + h/2)``,
  ``f_j = F(x_j + h/2) - F(x_j - h/2)``.
* ``"lower"``: mass of ``(x_j, x_{j+1}]`` at ``x_j``; ``f_0 = F(x_1)``.  Stochastically smaller
  than ``X``: its quantiles and stop-loss premiums bound those of ``X`` from below.
* ``"upper"``: mass of ``(x_{j-1}, x_j]`` at ``x_j``; ``f_0 = F(x_0)``.  Stochastically larger:
  bounds from above.
* ``"moment-matching"`` (local, first moment): ``f_0 = 1 - E[Y ^ h] / h``,
  ``f_j = (2 E[Y ^ jh] - E[Y ^ (j-1)h] - E[Y ^ (j+1)h]) / h`` for ``Y = X - o``; preserves the
  mean.  ``E[Y ^ u] = int_0^u S(o + t) dt`` by Gauss-Legendre quadrature on each cell.

Differences are taken from ``F`` below the median and from ``S`` above it, so small tail
probabilities keep their relative accuracy.  The mass beyond the last point is ``truncated_mass``;
it is never folded into the last point or renormalised away.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np
from scipy import stats

from .accuracy import UNIT_ROUNDOFF
from .errors import TruncationWarning
from .lattice import Lattice

DEFAULT_TAIL = 1e-12
"""Without ``size``: enough points that the mass beyond the lattice is below this."""

MAX_POINTS = 1 << 24
"""Largest default lattice (a heavier tail is cut here and reported)."""

METHODS = ("rounding", "lower", "upper", "moment-matching")

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(12)
_GL_NODES_LO, _GL_WEIGHTS_LO = np.polynomial.legendre.leggauss(6)


class _Law:
    """cdf/sf access for a scipy frozen continuous law or a callable cdf on ``[0, inf)``."""

    def __init__(self, dist):
        if hasattr(dist, "dist") and isinstance(getattr(dist, "dist", None), stats.rv_continuous):
            self.frozen = dist
            self.lower = float(dist.support()[0])
        elif isinstance(getattr(dist, "dist", None), stats.rv_discrete):
            raise TypeError("dist must be continuous; a discrete law is already on a lattice: "
                            "build a Lattice from its pmf")
        elif callable(dist):
            self.frozen = None
            self.call = dist
            self.lower = 0.0
            if float(np.asarray(self._call(np.array([-1e-300]))).ravel()[0]) > 1e-12:
                raise ValueError("dist: a callable cdf must describe a law on [0, inf) "
                                 "(its value just below 0 is not 0)")
        else:
            raise TypeError("dist must be a frozen scipy.stats continuous distribution or a "
                            f"callable cdf; got {type(dist).__name__}")

    def _call(self, x: np.ndarray) -> np.ndarray:
        try:
            out = np.asarray(self.call(x), dtype=float)
            if out.shape == x.shape:
                return out
        except (TypeError, ValueError):
            pass
        return np.array([float(self.call(float(v))) for v in x.ravel()]).reshape(x.shape)

    def cdf_sf(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if self.frozen is not None:
            return self.frozen.cdf(x), self.frozen.sf(x)
        c = np.clip(self._call(x), 0.0, 1.0)
        return c, 1.0 - c

    def sf(self, x: np.ndarray) -> np.ndarray:
        return self.cdf_sf(x)[1]

    def isf(self, q: float) -> float:
        if self.frozen is not None:
            return float(self.frozen.isf(q))
        x = 1.0
        while self.sf(np.array([x]))[0] > q:
            x *= 2.0
            if x > 1e300:
                return math.inf
        return x

    def ppf_low(self, q: float) -> float:
        if self.frozen is not None:
            return float(self.frozen.ppf(q))
        return 0.0


def _differences(cdf: np.ndarray, sf: np.ndarray) -> np.ndarray:
    """``P(edge_j < X <= edge_{j+1})`` from cdf values below the median, sf values above."""
    from_cdf = np.diff(cdf)
    from_sf = -np.diff(sf)
    use_sf = cdf[:-1] >= 0.5
    return np.where(use_sf, from_sf, from_cdf)


def discretize(dist, *, step: float, size: int | None = None, method: str = "rounding"
               ) -> Lattice:
    """Put a continuous distribution on the lattice ``origin + step * k``.

    Parameters
    ----------
    dist : scipy.stats frozen continuous distribution or callable
        The law, or its cdf (a callable on ``[0, inf)``, vectorised or not).
    step : float
        Lattice spacing ``h > 0``.
    size : int, optional
        Number of points.  Default: enough that the mass beyond the lattice is below
        ``DEFAULT_TAIL`` (capped at ``MAX_POINTS`` with a :class:`TruncationWarning`).
    method : {"rounding", "lower", "upper", "moment-matching"}
        See the module docstring.

    Returns
    -------
    Lattice
        Origin 0 when the law lives on ``[0, inf)``, else ``h * floor(F^{-1}(1e-12) / h)``
        (the mass below it joins the first point).  The mass beyond the last point is
        ``truncated_mass``.  ``trust_floor`` covers the float evaluation of the cdf (a few
        roundoffs; scipy's own cdf accuracy is assumed) and, for moment matching, the quadrature
        (estimated by comparing 6- and 12-point Gauss-Legendre rules).

    Notes
    -----
    Discretisation changes the law: its error is a modelling error, not part of
    ``trust_floor``; it shrinks with ``step`` (``O(h)`` for lower/upper, ``O(h^2)`` for the
    rounding method on smooth densities: common practice, no source).
    """
    law = _Law(dist)
    h = float(step) if isinstance(step, numbers.Real) and not isinstance(step, bool) else None
    if h is None or not (math.isfinite(h) and h > 0):
        raise ValueError(f"step must be a positive finite number; got {step!r}")
    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(map(repr, METHODS))}; got {method!r}")
    if law.lower >= 0:
        origin = 0.0 if law.lower == 0 or not math.isfinite(law.lower) else \
            h * math.floor(law.lower / h)
    else:
        origin = h * math.floor(law.ppf_low(DEFAULT_TAIL) / h)
    if size is None:
        top = law.isf(DEFAULT_TAIL)
        n = (top - origin) / h + 3 if math.isfinite(top) else math.inf
        if n > MAX_POINTS:
            warnings.warn(f"discretize: the tail needs more than {MAX_POINTS} points to fall "
                          f"below {DEFAULT_TAIL}; cut there (see truncated_mass)",
                          TruncationWarning, stacklevel=2)
            n = MAX_POINTS
        size = max(int(math.ceil(n)), 2)
    elif isinstance(size, bool) or not isinstance(size, numbers.Integral) or size < 1:
        raise ValueError(f"size must be a positive integer; got {size!r}")
    size = int(size)
    floor = 8 * UNIT_ROUNDOFF
    j = np.arange(size + 1, dtype=float)
    if method == "rounding":
        edges = origin + (j - 0.5) * h
    elif method == "lower":
        edges = origin + j * h
    elif method == "upper":
        edges = origin + (j - 1.0) * h
    else:
        pmf, floor = _moment_matching(law, origin, h, size)
        return Lattice(pmf, h, origin, trust_floor=floor)
    cdf, sf = law.cdf_sf(edges)
    cdf[0], sf[0] = 0.0, 1.0  # everything below the first point joins it
    if method == "upper":  # the first point holds P(X <= origin)
        cdf[0], sf[0] = 0.0, 1.0
    pmf = _differences(cdf, sf)
    return Lattice(np.clip(pmf, 0.0, 1.0), h, origin, trust_floor=floor)


def _cell_integrals(law: _Law, origin: float, h: float, n_cells: int, nodes, weights):
    """``int_{o+(j-1)h}^{o+jh} S(t) dt`` for ``j = 1..n_cells``."""
    left = origin + h * np.arange(n_cells)
    pts = left[:, None] + (nodes[None, :] + 1.0) * (h / 2.0)
    vals = law.sf(pts.ravel()).reshape(pts.shape)
    return (vals @ weights) * (h / 2.0)


def _moment_matching(law: _Law, origin: float, h: float, size: int):
    """Local first-moment matching: ``f_0 = 1 - I_1 / h``, ``f_j = (I_j - I_{j+1}) / h`` with
    ``I_j`` the integral of ``S`` over the ``j``-th cell (telescoped limited expected values)."""
    cells = _cell_integrals(law, origin, h, size + 1, _GL_NODES, _GL_WEIGHTS)
    check = _cell_integrals(law, origin, h, size + 1, _GL_NODES_LO, _GL_WEIGHTS_LO)
    quad_err = float(np.max(np.abs(cells - check))) / h
    pmf = np.empty(size)
    pmf[0] = 1.0 - cells[0] / h
    pmf[1:] = (cells[:-2] - cells[1:-1]) / h
    floor = 8 * UNIT_ROUNDOFF + 2 * quad_err
    return np.clip(pmf, 0.0, 1.0), floor
