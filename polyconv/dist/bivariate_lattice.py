"""``BivariateLattice``: a joint distribution of two amounts on ``(step * i, step * j)``.

The joint law of two dependent amounts ``(X, Y)`` on one common step ``h`` (so ``X + Y`` is on the
same lattice), ``i = 0..n1-1``, ``j = 0..n2-1``.  Mass outside the rectangle is not represented
(the error ledger's ``truncated``); it lies where ``X >= n1 h`` or ``Y >= n2 h``, with bounds
``tails = (P(X >= n1 h), P(Y >= n2 h))``.  A rectangle that deliberately stops early on ``Y``
(a *window*, e.g. an aggregate layer cut just past its aggregate limit) is legitimate: then the
``Y`` marginal is exact on its grid and the ``X`` marginal is refused as inaccurate by its ledger.

Operations (each carries the :class:`~polyconv.dist.ledger.ErrorLedger` on the flattened pmf):
:meth:`~BivariateLattice.marginal` / :meth:`~BivariateLattice.marginals`,
:meth:`~BivariateLattice.total` (``X + Y``), :meth:`~BivariateLattice.columns_pushed`
(``X + phi(Y)`` for an index map ``phi``), :meth:`~BivariateLattice.conditional_expectation`
(``E[g(Y) | X = x]`` or ``E[g(X) | Y = y]``), ``+`` (independent sum: the 2-D convolution of
:func:`polyconv.pipeline.nd.convolve_nd`).  The compound sum is
:func:`polyconv.dist.bivariate.compound2`.

Push-forwards (marginals, sums) do not increase the L1 error (total variation); a marginal's
point error is at most ``min(l1, count * point)`` of the cells merged into it.

Caution: a model output, not advice; defer to local regulation and licensed practice.
"""

from __future__ import annotations

import math

import numpy as np

from ..pipeline.nd import convolve_nd, error_bound_nd
from . import accuracy
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, sum_errors

_U = accuracy.UNIT_ROUNDOFF


class BivariateLattice:
    """Joint pmf ``P(X = i h, Y = j h)`` on an ``n1 x n2`` rectangle from the origin.

    Parameters
    ----------
    pmf : array_like
        Non-negative 2-D probabilities summing to at most 1 (the rest is truncated: outside).
    step : float
        Common step ``h > 0`` of both axes.
    errors : ErrorLedger, optional
        Ledger of the flattened pmf (default: exact, ``point = l1 = 0``).
    tails : (float, float), optional
        Bounds of ``P(X >= n1 h)`` and ``P(Y >= n2 h)`` (default: ``1 - sum(pmf)`` each).
    means : (float, float), optional
        Upper bounds of ``E[X]`` and ``E[Y]`` of the exact model (give the marginals a finite
        truncated first moment, so their TVaR is answerable); default unknown.
    """

    __slots__ = ("pmf", "step", "errors", "tails", "means")

    def __init__(self, pmf, step: float = 1.0, *, errors: ErrorLedger | None = None,
                 tails: tuple[float, float] | None = None,
                 means: tuple[float, float] | None = None):
        arr = np.array(pmf, dtype=float)
        if arr.ndim != 2 or arr.size == 0:
            raise ValueError(f"pmf must be a non-empty 2-D array; got shape {arr.shape}")
        if not np.all(np.isfinite(arr)) or np.min(arr) < 0:
            raise ValueError("pmf must be finite and non-negative")
        total = float(np.sum(arr))
        if total > 1 + 1e-9:
            raise ValueError(f"pmf sums to {total!r} > 1; probabilities are not renormalised")
        if not (isinstance(step, (int, float)) and step > 0 and math.isfinite(step)):
            raise ValueError(f"step must be a positive finite number; got {step!r}")
        missing = max(0.0, 1.0 - total)
        if missing < (math.log2(arr.size) + 4) * _U:
            missing = 0.0
        if errors is None:
            errors = ErrorLedger(0.0, 0.0, missing, arr.size, 0.0 if missing == 0 else math.inf,
                                 0.0)
        arr.flags.writeable = False
        self.pmf = arr
        self.step = float(step)
        self.errors = errors._replace(truncated=missing)
        self.tails = (missing, missing) if tails is None else (float(tails[0]), float(tails[1]))
        self.means = (math.inf, math.inf) if means is None else (float(means[0]),
                                                                  float(means[1]))

    @property
    def shape(self) -> tuple[int, int]:
        """``(n1, n2)``."""
        return self.pmf.shape

    def __repr__(self) -> str:
        e = self.errors
        return (f"BivariateLattice(shape={self.shape}, step={self.step!r}, "
                f"truncated_mass={e.truncated:.3g}, l1_error={e.l1:.3g})")

    # -- construction ----------------------------------------------------------------------
    @classmethod
    def from_split(cls, ground_up: Lattice, ceded_index) -> BivariateLattice:
        """Joint law of ``(X - c(X), c(X))`` for one claim ``X`` and a cession ``c``.

        ``ceded_index(k)`` maps ground-up indices ``k`` (amount ``origin + k h``, on the lattice
        from 0) to ceded indices, ``0 <= c(k) <= k``.  The pmf of ``X`` is carried cell by cell
        (a push-forward: errors unchanged, truncated mass stays beyond, where ``X`` is).
        """
        h = ground_up.step
        k0 = round(ground_up.origin / h)
        if k0 < 0 or abs(ground_up.origin / h - k0) > 1e-9 * max(1.0, abs(k0)):
            raise ValueError("ground_up origin must be a non-negative whole multiple of its step")
        k = k0 + np.arange(len(ground_up))
        c = np.asarray(ceded_index(k), dtype=np.int64)
        if c.shape != k.shape or np.any(c < 0) or np.any(c > k):
            raise ValueError("ceded_index must map each index k to an integer in [0, k]")
        r = k - c
        pmf = np.zeros((int(r.max()) + 1, int(c.max()) + 1))
        np.add.at(pmf, (r, c), ground_up.pmf)
        e = ground_up.errors
        out = cls(pmf, h, tails=(ground_up.truncated_mass, ground_up.truncated_mass))
        out.errors = ErrorLedger(e.point, e.l1, out.errors.truncated, pmf.size,
                                 e.truncated_moment, cum_bound(e))
        mean_hi = ground_up._br().mean_range(ground_up._mean())[1]
        out.means = (mean_hi, mean_hi)
        return out

    # -- push-forwards ---------------------------------------------------------------------
    def _lattice(self, vec: np.ndarray, extra: float, truncated_from: int, mean: float
                 ) -> Lattice:
        """A Lattice from a pushed-forward vector: ``extra`` is mass that belongs on the grid
        but is outside the rectangle (a computed error)."""
        e = self.errors
        merged = self.pmf.size // max(vec.size, 1) + 1
        point = min(e.l1, merged * e.point) + extra
        l1 = e.l1 + extra
        cum = cum_bound(e) + extra
        on_grid = self.step * float(np.dot(np.arange(vec.size), vec))
        moment = math.inf if not math.isfinite(mean) else max(
            mean * (1 + 4 * _U) - on_grid + l1 * self.step * vec.size, 1e-300)
        if e.truncated_moment == 0 and extra == 0:
            moment = 0.0
        led = ErrorLedger(min(point, 2.0), min(l1, 2.0), 0.0, int(min(truncated_from, vec.size)),
                          moment, min(cum, 2.0))
        return Lattice._make(vec, self.step, 0.0, led)

    def marginal(self, axis: int) -> Lattice:
        """Law of ``X`` (``axis = 0``) or ``Y`` (``axis = 1``).

        Mass with the other coordinate beyond the rectangle is missing from this marginal's
        grid: its bound (``tails``) is added to the ledger's errors.
        """
        if axis not in (0, 1):
            raise ValueError(f"axis must be 0 or 1; got {axis!r}")
        vec = self.pmf.sum(axis=1 - axis)
        return self._lattice(vec, self.tails[1 - axis], vec.size, self.means[axis])

    def total(self) -> Lattice:
        """Law of ``X + Y`` on ``n1 + n2 - 1`` points (sums of the anti-diagonals).

        Mass outside the rectangle has ``X + Y >= min(n1, n2) h``: it is the truncated part,
        lying from there (ledger ``truncated_from``).
        """
        n1, n2 = self.shape
        return self._lattice(self.columns_pushed(np.arange(n2)), 0.0, min(n1, n2),
                             self.means[0] + self.means[1])

    def columns_pushed(self, offsets: np.ndarray, size: int | None = None) -> np.ndarray:
        """``v[i + offsets[j]] += pmf[i, j]``: the pmf of ``X + phi(Y)`` on the grid (a raw
        vector; ``size`` points, default ``n1 + max(offsets)``)."""
        n1, n2 = self.shape
        off = np.asarray(offsets, dtype=np.int64)
        if off.shape != (n2,) or np.any(off < 0):
            raise ValueError(f"offsets must be {n2} non-negative integers")
        size = int(n1 + off.max()) if size is None else int(size)
        out = np.zeros(size)
        for j in range(n2):
            o = int(off[j])
            if o >= size:
                continue
            stop = min(n1, size - o)
            out[o:o + stop] += self.pmf[:stop, j]
        return out

    def marginals(self) -> tuple[Lattice, Lattice]:
        """``(law of X, law of Y)``: :meth:`marginal` along each axis."""
        return self.marginal(0), self.marginal(1)

    def conditional_mean(self, axis: int) -> np.ndarray:
        """``E[Y | X = i h]`` per row (``axis = 0``) or ``E[X | Y = j h]`` per column
        (``axis = 1``), over the rectangle; ``nan`` where the conditioning cell has no mass."""
        return self.conditional_expectation(axis)

    def conditional_expectation(self, axis: int, g=None) -> np.ndarray:
        """``E[g(Y) | X = i h]`` per row (``axis = 0``) or ``E[g(X) | Y = j h]`` per column
        (``axis = 1``): ``sum_j g(j h) p(i, j) / sum_j p(i, j)`` (the definition of a
        conditional expectation on a lattice), over the rectangle.

        Parameters
        ----------
        axis : {0, 1}
            The conditioning coordinate.
        g : callable, optional
            Vectorised function of the other amount (default the identity: the conditional
            mean; ``lambda y: y**2`` gives the conditional second moment).

        Returns
        -------
        numpy.ndarray
            One value per grid point of the conditioning amount; ``nan`` where it has no mass.
        """
        if axis not in (0, 1):
            raise ValueError(f"axis must be 0 or 1; got {axis!r}")
        p = self.pmf if axis == 0 else self.pmf.T
        values = self.step * np.arange(p.shape[1], dtype=float)
        if g is not None:
            values = np.asarray(g(values), dtype=float)
            if values.shape != (p.shape[1],):
                raise ValueError(f"g must map the {p.shape[1]} grid amounts to as many values")
        mass = p.sum(axis=1)
        num = p @ values
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(mass > 0, num / np.where(mass > 0, mass, 1.0), np.nan)

    def __add__(self, other: BivariateLattice) -> BivariateLattice:
        """Independent sum ``(X1 + X2, Y1 + Y2)``: the full 2-D convolution of the pmfs, by
        :func:`polyconv.pipeline.nd.convolve_nd` over both axes (the cost model picks the N-D
        transform, overlap-add or direct summation).

        Ledger: :func:`polyconv.dist.ledger.sum_errors` (Young's inequality holds on ``Z^2``);
        rounding per point: the plan's rigorous bound (:func:`polyconv.pipeline.nd.
        error_bound_nd`: Percival's bound at the ``log2 (M1 M2)`` levels of the row-column
        transform, or the direct-summation bound).
        """
        if not isinstance(other, BivariateLattice):
            return NotImplemented
        if abs(self.step - other.step) > 1e-9 * self.step:
            raise ValueError(f"steps differ ({self.step!r}, {other.step!r})")
        a, b = self.pmf, other.pmf
        c, plan = convolve_nd(a, b, axes=(0, 1))
        c = np.clip(c, 0.0, 1.0)
        r_point = error_bound_nd(a, b, plan, axes=(0, 1))
        ea, eb = self.errors, other.errors
        ma, mb = float(a.sum()), float(b.sum())
        point, l1, cum = sum_errors(ea, ma, float(a.max()), eb, mb, float(b.max()), r_point,
                                    c.size * r_point)
        out = BivariateLattice(c, self.step,
                               tails=(self.tails[0] + other.tails[0],
                                      self.tails[1] + other.tails[1]),
                               means=(self.means[0] + other.means[0],
                                      self.means[1] + other.means[1]))
        moment = 0.0 if out.errors.truncated == 0 and ea.truncated_moment == 0 and \
            eb.truncated_moment == 0 else math.inf
        out.errors = ErrorLedger(point, l1, out.errors.truncated, c.size, moment, cum)
        return out
