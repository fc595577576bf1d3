"""Queries of a :class:`~polyconv.dist.lattice.Lattice`: moments, probabilities, risk measures.

A mixin of :class:`~polyconv.dist.lattice.Lattice` (the class core lives in
:mod:`polyconv.dist.lattice`): the lattice's own answers (cumulative sums of the pmf; the lower
quantile ``min{x : F(x) >= p}``; TVaR after Acerbi & Tasche 2002), each warning when its certified
range from the error ledger (:mod:`polyconv.dist.risk`) is too wide.

Caution: a model output, not advice; see the package docstring of :mod:`polyconv.dist`.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from . import risk
from .accuracy import dot, float_range
from .errors import AccuracyWarning, TruncationWarning

_real = risk.real_value


class LatticeQueries:
    """Moments, ``cdf``/``sf``, quantiles, VaR, TVaR and stop-loss of a Lattice (mixin)."""

    __slots__ = ()

    # -- moments ----------------------------------------------------------------------------
    def moment(self, k: int) -> float:
        """Raw moment ``sum_x x^k P(X = x)`` over the lattice.

        Mass beyond the lattice is not counted (a :class:`TruncationWarning` says when it is
        not negligible).
        """
        if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 0:
            raise ValueError(f"k must be a non-negative integer; got {k!r}")
        self._warn_truncated(f"moment({k})")
        with np.errstate(over="ignore", invalid="ignore"):
            value = dot(self._pmf, self.values ** int(k))
        if not math.isfinite(value):
            warnings.warn(f"moment({k}) overflows float64 (largest point "
                          f"{float(np.max(np.abs(self.values))):.3g}); returning {value}",
                          AccuracyWarning, stacklevel=2)
        return value

    def _mean(self) -> float:
        mass = float(np.sum(self._pmf))
        k = float_range(self._pmf.size)
        return self._origin * mass + self._step * dot(self._pmf, k)

    def mean(self) -> float:
        """``E[X] = origin * mass + step * sum k p_k`` over the lattice."""
        self._warn_truncated("mean()")
        return self._mean()

    def _variance_steps(self) -> float:
        """The variance in units of ``step**2`` (finite whatever the step)."""
        mass = float(np.sum(self._pmf))
        if mass == 0:
            return 0.0
        k = float_range(self._pmf.size)
        mk = dot(self._pmf, k) / mass
        return dot(self._pmf, (k - mk) ** 2)

    def _variance(self) -> float:
        return self._step * self._step * self._variance_steps()

    def variance(self) -> float:
        """``sum p_k (x_k - mean)^2`` over the lattice (the variance when nothing is truncated).

        ``inf`` with an :class:`AccuracyWarning` when it exceeds the float range (a step near
        ``1e154`` or more); :meth:`std` stays finite there.
        """
        self._warn_truncated("variance()")
        v = self._variance()
        if math.isinf(v):
            warnings.warn(f"variance() overflows float64 (step {self._step:.3g}); std() is "
                          f"{self._std():.6g}", AccuracyWarning, stacklevel=2)
        return v

    def _std(self) -> float:
        return self._step * math.sqrt(self._variance_steps())

    def std(self) -> float:
        """Square root of :meth:`variance`, computed in units of the step (finite for any
        finite step)."""
        self._warn_truncated("std()")
        return self._std()

    # -- probabilities ----------------------------------------------------------------------
    def _index(self, x) -> tuple[np.ndarray, np.ndarray]:
        xs = np.asarray(x, dtype=float)
        return xs, risk.lattice_index(xs, self._origin, self._step, self._pmf.size)

    def _beyond(self, xs: np.ndarray, k: np.ndarray) -> np.ndarray:
        """Finite points past the last lattice point where truncated mass may lie."""
        return np.isfinite(xs) & (k >= self._pmf.size) & (self._ledger.truncated > 0)

    def cdf(self, x):
        """``P(X <= x)``, the lattice's own (cumulative sum of the pmf; right-continuous, ``x``
        within ``1e-9`` steps of a point counts as it).

        ``cdf(-inf) = 0``, ``cdf(inf) = 1``, ``cdf(nan) = nan``.  Past the last point, where
        truncated mass may lie, the lattice cannot answer: ``nan`` with a
        :class:`TruncationWarning` stating the certified range.  Warns
        (:class:`AccuracyWarning`) where the certified range is wider than the value.
        """
        xs, k = self._index(x)
        br = self._br()
        n = self._pmf.size
        out = np.where(k < 0, 0.0, br.cum[np.clip(k, 0, n - 1)])
        low, high = br.cdf_range(k)
        self._flag(xs, k, out, low, high, "cdf")
        out = np.where(np.isposinf(xs), 1.0, out)
        out = np.where(np.isnan(xs) | self._beyond(xs, k), np.nan, out)
        return float(out) if out.ndim == 0 else out

    def sf(self, x):
        """``P(X > x)``, truncated mass included, summed from the right (no cancellation).

        Use it for deadline-miss or exceedance probabilities.  ``sf(inf) = 0``,
        ``sf(-inf) = 1``, ``sf(nan) = nan``.  Past the last point, where truncated mass may lie,
        ``nan`` with a :class:`TruncationWarning` stating the certified range (never the
        truncated mass as if it were data).  Warns (:class:`AccuracyWarning`) where the
        certified range is wider than the value.
        """
        xs, k = self._index(x)
        br = self._br()
        n = self._pmf.size
        out = br.s[np.clip(k + 1, 0, n)] + self._ledger.truncated
        out = np.where(k < 0, 1.0, np.minimum(out, 1.0))
        low, high = br.sf_range(k)
        self._flag(xs, k, out, low, high, "sf")
        out = np.where(np.isposinf(xs), 0.0, out)
        out = np.where(np.isnan(xs) | self._beyond(xs, k), np.nan, out)
        return float(out) if out.ndim == 0 else out

    def _flag(self, xs, k, values, low, high, name) -> None:
        beyond = self._beyond(xs, k)
        if np.any(beyond):
            i = np.flatnonzero(beyond)[0]
            warnings.warn(f"{name} at {xs.flat[i]!r} is past the last lattice point "
                          f"{self.values[-1]!r}, where truncated mass may lie: the exact value "
                          f"is only known to lie in [{low.flat[i]:.3g}, {high.flat[i]:.3g}]; "
                          "returning nan (extend the grid)", TruncationWarning, stacklevel=3)
        width = high - low
        bad = (~beyond) & np.isfinite(xs) & (values > 0) & \
            (width > risk.PROBABILITY_RTOL * values)
        if np.any(bad):
            i = np.flatnonzero(bad)[0]
            warnings.warn(f"{name} value {values.flat[i]:.3g} is not above its certified error "
                          f"range [{low.flat[i]:.3g}, {high.flat[i]:.3g}]: numerically "
                          "meaningless", AccuracyWarning, stacklevel=3)

    # -- risk measures ----------------------------------------------------------------------
    def quantile(self, p):
        """Lower quantile ``min{x on the lattice : cdf(x) >= p}``, ``0 < p <= 1``.

        The lattice's own quantile (``cdf`` is :meth:`cdf`), so ``cdf(quantile(p)) >= p``
        always.  ``nan`` with :class:`TruncationWarning` when the level exceeds the mass on the
        lattice; an :class:`AccuracyWarning` when the certified bracket
        (:meth:`quantile_bracket`) is wider than one step.  Percentiles of sums do not add.
        """
        arr = risk.check_level(p, allow_one=True)
        br = self._br()
        n = self._pmf.size
        k = br.own_quantile_index(arr)
        beyond = k >= n
        if np.any(beyond):
            warnings.warn(f"quantile beyond the lattice: level exceeds the retained mass "
                          f"{br.mass:.17g} (truncated_mass {self.truncated_mass:.3g}); "
                          "returning nan", TruncationWarning, stacklevel=2)
        lo, hi = br.quantile_range(arr)
        wide = (~beyond) & ((hi - lo > 1) | (hi >= n))
        if np.any(wide):
            span = "beyond the grid" if np.any(wide & (hi >= n)) else \
                f"{int(np.max(np.where(wide, hi - lo, 0)))} steps"
            warnings.warn("quantile: the exact computation's quantile is only known to within "
                          f"{span} (bracket wider than one step; see quantile_bracket)",
                          AccuracyWarning, stacklevel=2)
        out = np.where(beyond, np.nan, self._origin + self._step * k.astype(float))
        return float(out) if out.ndim == 0 else out

    def quantile_bracket(self, p, *, tol: float | None = None) -> tuple[float, float]:
        """Certified ``(low, high)`` containing the exact computation's quantile at level ``p``.

        From the cdf bounds of the error ledger (:mod:`polyconv.dist.risk`).  ``high = inf``
        when the quantile may lie beyond the grid.  Warns (:class:`AccuracyWarning`) only when
        ``high - low > tol`` (default: one step).
        """
        arr = risk.check_level(p, allow_one=True)
        if arr.ndim != 0:
            raise TypeError(f"p must be a scalar level for quantile_bracket; got {p!r}")
        tol = self._step if tol is None else _real(tol, "tol")
        lo, hi = self._br().quantile_range(arr)
        n = self._pmf.size
        low = self._origin + self._step * float(lo) if lo < n else \
            self._origin + self._step * n
        high = math.inf if hi >= n else self._origin + self._step * float(hi)
        if high - low > tol * (1 + 1e-9):
            warnings.warn(f"quantile bracket [{low!r}, {high!r}] at p={float(arr)!r} is wider "
                          f"than tol {tol!r}", AccuracyWarning, stacklevel=2)
        return low, high

    def value_at_risk(self, p):
        """``VaR_p = min{x : F(x) >= p}``, ``0 < p < 1`` (see :meth:`quantile`).

        Model output, not advice: assumptions (independence, discretisation, truncation) carry
        over; defer to local regulation and qualified actuarial practice.
        """
        risk.check_level(p)
        return self.quantile(p)

    def tail_value_at_risk(self, p):
        """``TVaR_p = VaR_p + E[(X - VaR_p)+] / (1 - p)`` (Acerbi & Tasche 2002), ``0 < p < 1``.

        The expected shortfall at level ``p``, correct for discrete distributions (atoms at
        ``VaR_p`` included), from the lattice's own VaR and pmf.  ``nan`` with a warning when
        its certified range is wider than ``DEFAULT_RTOL * max(|TVaR|, step)``
        (:data:`polyconv.dist.risk.DEFAULT_RTOL`; see :meth:`bounded`).  Model output, not
        advice (see :mod:`polyconv.dist`).
        """
        arr = risk.check_level(p)
        flat = [self._bounded_tvar(float(q), None, 3).value for q in arr.ravel()]
        out = np.array(flat).reshape(arr.shape)
        return float(out) if out.ndim == 0 else out

    def stop_loss(self, d):
        """Stop-loss premium ``E[(X - d)+]``: exact over the lattice, linear between points.

        ``stop_loss(inf) = 0``; ``-inf`` gives ``inf``; ``nan`` gives ``nan``.  ``nan`` with a
        warning when the certified range is wider than ``DEFAULT_RTOL * max(value, step)``
        (e.g. truncated mass of unknown first moment beyond the grid).  Model output, not
        advice (see :mod:`polyconv.dist`).
        """
        ds = np.asarray(d, dtype=float)
        flat = [self._bounded_stop_loss(float(v), None, 3).value for v in ds.ravel()]
        out = np.array(flat).reshape(ds.shape)
        return float(out) if out.ndim == 0 else out


def _real_or_inf(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {type(value).__name__} {value!r}")
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf
