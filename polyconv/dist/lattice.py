"""``Lattice``: an immutable probability distribution on ``origin + step * k``, ``k = 0..n-1``.

Probabilities that do not sum to one are kept as given: the missing mass is ``truncated_mass``
and is understood to lie *above* the lattice (as compounding and discretisation produce it); it is
never renormalised away (DESIGN.md section 6: renormalising moved heavy-tail probabilities by 1-2%
in a test case).

Every Lattice carries an :class:`~polyconv.dist.ledger.ErrorLedger` (:attr:`Lattice.errors`):
per-point and L1 bounds of the computed error, the truncated mass, where it may lie and a bound of
its first moment.  Every query has its own certified range from it (:meth:`Lattice.bounded`,
:meth:`Lattice.quantile_bracket`); plain queries return the lattice's own answer and warn
(:class:`AccuracyWarning`, :class:`TruncationWarning`) when that range is too wide.

Caution: a model output, not advice; see the package docstring of :mod:`polyconv.dist`.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from . import accuracy, propagate, risk
from .errors import AccuracyWarning, TruncationWarning
from .ledger import Bounded, ErrorLedger, validate

STEP_RTOL = propagate.STEP_RTOL
"""Relative tolerance within which two lattice steps count as equal."""

MASS_TOL = 1e-9
"""A pmf may sum above 1 by at most ``min(l1, MASS_TOL)`` plus summation rounding."""

MEASURES = ("cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean", "std")
"""Measures :meth:`Lattice.bounded` answers."""


_real = risk.real_value


class Lattice:
    """A probability distribution on the points ``origin + step * k``, ``k = 0, ..., n - 1``.

    Parameters
    ----------
    pmf : array_like
        Non-negative probabilities of the points, 1-D, summing to at most 1.  Negative entries
        no larger in size than the float-noise tolerance (``trust_floor`` plus a few units of
        roundoff times ``max(pmf)``) are set to zero and the error bound raised to cover them;
        larger negative entries, non-finite entries or a total above ``1 + tolerance`` raise
        ValueError.  A total below 1 is kept: the rest is :attr:`truncated_mass`.
    step : float
        Lattice spacing ``h > 0``.
    origin : float
        Value of the first point.
    trust_floor : float, optional
        Absolute error bound of each probability, if the pmf was computed (default 0: exact);
        at most 1.  Shorthand for ``errors`` with ``point = trust_floor`` and
        ``l1 = len(pmf) * trust_floor``.
    errors : ErrorLedger, optional
        The full ledger (constructors that know more, e.g. a law's truncated moment).  Its
        ``truncated`` should be ``1 - sum(pmf)`` (known up to ``l1``).

    Notes
    -----
    Without ``errors`` the truncated mass is assumed to lie above the lattice with an unknown
    first moment (so tail measures that depend on it are refused).

    ``X + Y`` for two Lattices is the distribution of the sum of *independent* variables (the
    convolution of the pmfs); both must have the same ``step``.  ``X + c`` shifts by a number.

    Examples
    --------
    >>> from polyconv.dist import Lattice
    >>> die = Lattice([1/6] * 6, origin=1)
    >>> round((die + die).mean(), 12)
    7.0
    """

    __slots__ = ("_pmf", "_step", "_origin", "_ledger", "_cache")

    def __init__(self, pmf, step: float = 1.0, origin: float = 0.0, *, trust_floor: float = 0.0,
                 errors: ErrorLedger | None = None):
        try:
            arr = np.array(pmf, dtype=float, copy=True)
        except (TypeError, ValueError, OverflowError):
            raise TypeError(f"pmf must be an array of real numbers; got {type(pmf).__name__}"
                            ) from None
        if np.iscomplexobj(np.asarray(pmf)):
            raise TypeError("pmf must be real, not complex")
        if arr.ndim != 1 or arr.size == 0:
            raise ValueError(f"pmf must be a non-empty 1-D array; got shape {arr.shape}")
        if not np.all(np.isfinite(arr)):
            raise ValueError("pmf must be finite (no nan or inf)")
        step = _real(step, "step")
        if step <= 0:
            raise ValueError(f"step must be positive; got {step!r}")
        origin = _real(origin, "origin")
        n = arr.size
        if errors is not None:
            ledger = validate(errors, n)
        else:
            floor = _real(trust_floor, "trust_floor")
            if not 0 <= floor <= 1:
                raise ValueError(f"trust_floor must lie in [0, 1]; got {trust_floor!r}")
            ledger = ErrorLedger(floor, min(n * floor, 2.0), 0.0, n, 0.0, min(n * floor, 2.0))
        u = accuracy.UNIT_ROUNDOFF
        noise = ledger.point + 4 * u * float(np.max(np.abs(arr)))
        low = float(np.min(arr))
        if low < -noise:
            k = int(np.argmin(arr))
            raise ValueError(f"pmf must be non-negative; pmf[{k}] = {low!r} is below the "
                             f"float-noise tolerance {noise:.3g}")
        if low < 0:
            bump = -low
            moved = float(-np.sum(arr[arr < 0]))
            ledger = ledger._replace(point=max(ledger.point, bump), l1=ledger.l1 + moved,
                                     cumulative=min(ledger.cumulative, ledger.l1) + moved)
            np.maximum(arr, 0.0, out=arr)
        total = float(np.sum(arr))
        mass_tol = min(ledger.l1, MASS_TOL) + (n + 4) * u
        if total > 1 + mass_tol:
            raise ValueError(f"pmf sums to {total!r} > 1 (tolerance {mass_tol:.3g}); "
                             "probabilities are not renormalised")
        missing = _missing(total, n)
        if errors is None and missing > 0:
            ledger = ledger._replace(truncated=missing, truncated_moment=math.inf)
        elif errors is None or ledger.truncated == 0:
            ledger = ledger._replace(truncated=missing)
        arr.flags.writeable = False
        self._init(arr, step, origin, ledger)

    def _init(self, arr, step, origin, ledger) -> None:
        object.__setattr__(self, "_pmf", arr)
        object.__setattr__(self, "_step", step)
        object.__setattr__(self, "_origin", origin)
        object.__setattr__(self, "_ledger", ledger)
        object.__setattr__(self, "_cache", {})

    @classmethod
    def _make(cls, pmf: np.ndarray, step: float, origin: float, ledger: ErrorLedger) -> Lattice:
        """Internal constructor for computed results: ``pmf`` already non-negative and finite;
        ``truncated`` is set to ``1 - sum(pmf)`` (clipped at 0, the excess is in ``l1``)."""
        arr = np.clip(np.asarray(pmf, dtype=float), 0.0, 1.0)
        arr.flags.writeable = False
        total = float(np.sum(arr))
        excess = max(total - 1.0, 0.0)
        n = arr.size
        l1 = min(float(ledger.l1) + excess, 2.0)
        ledger = ErrorLedger(min(float(ledger.point), 1.0), l1,
                             _missing(total, n), int(min(max(ledger.truncated_from, 0), n)),
                             float(ledger.truncated_moment),
                             min(float(ledger.cumulative) + excess, l1))
        if ledger.truncated == 0 and ledger.truncated_moment == math.inf and ledger.l1 == 0:
            ledger = ledger._replace(truncated_moment=0.0)
        out = cls.__new__(cls)
        out._init(arr, float(step), float(origin), ledger)
        return out

    @classmethod
    def from_law(cls, law, *, step, size=None, rule="nearest") -> Lattice:
        """Put a continuous scipy.stats law (or a cdf) on a lattice of ``step``.

        rule: ``"nearest"``, ``"down"`` (stochastic lower bound), ``"up"`` (upper bound) or
        ``"moments"`` (local moment matching).  Implemented in
        :func:`polyconv.dist.from_law.lattice_from_law`.
        """
        # --- from_law hook (branch `grids` owns the implementation; keep this one delegation)
        from .from_law import lattice_from_law
        return lattice_from_law(law, step=step, size=size, rule=rule)

    @classmethod
    def from_samples(cls, samples, *, step, origin=0.0, counts=None, alpha=0.05,
                     rule="nearest") -> Lattice:
        """Empirical law of measured ``samples`` (optionally weighted by ``counts``) on the
        lattice ``origin + step k``, its ledger carrying the Dvoretzky-Kiefer-Wolfowitz band
        at confidence ``1 - alpha``.  Implemented in
        :func:`polyconv.dist.samples.empirical`."""
        # --- from_samples hook (branch `latency` owns the implementation)
        from .samples import empirical
        return empirical(samples, step=step, origin=origin, counts=counts, alpha=alpha,
                         rule=rule).lattice

    def scaled(self, factor: float, *, rule: str = "nearest") -> Lattice:
        """Law of ``factor * X`` on this lattice (time scaling, inflation); see
        :func:`polyconv.dist.scaling.scale_parts` for the rules and the ledger."""
        # --- scaled hook (branch `latency` owns the implementation)
        from .scaling import scale_parts
        return Lattice._make(*scale_parts(self, factor, rule))

    def __setattr__(self, name, value):
        raise AttributeError("Lattice is immutable")

    # -- basic properties -------------------------------------------------------------------
    @property
    def pmf(self) -> np.ndarray:
        """Probabilities of the lattice points (read-only array)."""
        return self._pmf

    @property
    def step(self) -> float:
        """Spacing ``h`` of the lattice."""
        return self._step

    @property
    def origin(self) -> float:
        """Value of the first point."""
        return self._origin

    @property
    def values(self) -> np.ndarray:
        """The points ``origin + step * k``."""
        return self._origin + self._step * np.arange(self._pmf.size)

    @property
    def errors(self) -> ErrorLedger:
        """The error ledger: computed-error bounds, truncated mass, its location and moment."""
        return self._ledger

    @property
    def trust_floor(self) -> float:
        """Bound on the error of each probability (``errors.point``), kept for compatibility."""
        return self._ledger.point

    @property
    def truncated_mass(self) -> float:
        """``1 - sum(pmf)``: probability beyond the lattice (not renormalised away)."""
        return self._ledger.truncated

    def __len__(self) -> int:
        return self._pmf.size

    def __repr__(self) -> str:
        e = self._ledger
        return (f"Lattice(n={self._pmf.size}, step={self._step!r}, origin={self._origin!r}, "
                f"truncated_mass={e.truncated:.3g}, point_error={e.point:.3g}, "
                f"l1_error={e.l1:.3g})")

    # -- cached sums ------------------------------------------------------------------------
    def _br(self) -> risk.Bracketer:
        if "br" not in self._cache:
            self._cache["br"] = risk.Bracketer(self._pmf, self._step, self._origin,
                                               self._ledger)
        return self._cache["br"]

    def _warn_truncated(self, what: str, relative_to: float = 1.0) -> None:
        t = self._ledger.truncated
        if t > risk.TRUNCATION_LEVEL * max(relative_to, 0.0):
            warnings.warn(f"{what} counts only the lattice: truncated_mass "
                          f"{t:.3g} lies beyond it", TruncationWarning, stacklevel=3)

    def _abs_moment(self) -> float:
        """Upper bound of ``sum |x_k| q_k`` (the represented part's absolute first moment)."""
        x = np.abs(self.values)
        return float(np.dot(self._pmf, x)) + self._ledger.l1 * float(np.max(x)) + 1e-300

    # -- moments ----------------------------------------------------------------------------
    def moment(self, k: int) -> float:
        """Raw moment ``sum_x x^k P(X = x)`` over the lattice.

        Mass beyond the lattice is not counted (a :class:`TruncationWarning` says when it is
        not negligible).
        """
        if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 0:
            raise ValueError(f"k must be a non-negative integer; got {k!r}")
        self._warn_truncated(f"moment({k})")
        return float(np.dot(self._pmf, self.values ** int(k)))

    def _mean(self) -> float:
        mass = float(np.sum(self._pmf))
        k = np.arange(self._pmf.size)
        return self._origin * mass + self._step * float(np.dot(self._pmf, k))

    def mean(self) -> float:
        """``E[X] = origin * mass + step * sum k p_k`` over the lattice."""
        self._warn_truncated("mean()")
        return self._mean()

    def _variance(self) -> float:
        mass = float(np.sum(self._pmf))
        if mass == 0:
            return 0.0
        k = np.arange(self._pmf.size)
        mk = float(np.dot(self._pmf, k)) / mass
        return self._step ** 2 * float(np.dot(self._pmf, (k - mk) ** 2))

    def variance(self) -> float:
        """``sum p_k (x_k - mean)^2`` over the lattice (the variance when nothing is truncated)."""
        self._warn_truncated("variance()")
        return self._variance()

    def std(self) -> float:
        """Square root of :meth:`variance`."""
        return math.sqrt(self.variance())

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

    # -- answers with their bounds ---------------------------------------------------------
    def bounded(self, measure: str, arg: float | None = None, *, rtol: float | None = None
                ) -> Bounded:
        """One answer with its certified range: ``Bounded(value, low, high, refused, reason)``.

        Parameters
        ----------
        measure : {"cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean", "std"}
            What to answer; ``arg`` is the point (cdf, sf), the level (quantile, var, tvar) or
            the retention (stop_loss); none for mean and std.
        rtol : float, optional
            Refusal tolerance: the answer is refused (``value = nan``, ``refused = True``, a
            warning) when ``high - low > rtol * max(|value|, step)``.  Defaults:
            :data:`polyconv.dist.risk.DEFAULT_RTOL` (1e-3) for tvar, stop_loss, mean and std;
            for cdf and sf the range may not exceed the value itself (``rtol = 1``, scale the
            value, not the step); quantile/var are never refused on the grid (the lattice's own
            quantile is never below the exact one's bracket low end) and warn when the bracket
            is wider than ``max(step, rtol * |value|)``.

        Notes
        -----
        ``low`` and ``high`` bound the exact computation on this lattice (see
        :mod:`polyconv.dist.ledger`), not the discretisation of a continuous law.
        """
        if measure not in MEASURES:
            raise ValueError(f"measure must be one of {', '.join(MEASURES)}; got {measure!r}")
        if rtol is not None:
            rtol = _real(rtol, "rtol")
            if rtol < 0:
                raise ValueError(f"rtol must be >= 0; got {rtol!r}")
        if measure in ("mean", "std"):
            if arg is not None:
                raise TypeError(f"bounded({measure!r}) takes no argument; got {arg!r}")
            return self._bounded_moment(measure, rtol)
        if arg is None:
            raise TypeError(f"bounded({measure!r}, arg) needs an argument")
        if measure in ("cdf", "sf"):
            return self._bounded_probability(measure, arg, rtol)
        if measure in ("quantile", "var"):
            return self._bounded_quantile(measure, arg, rtol)
        if measure == "tvar":
            risk.check_level(arg)
            return self._bounded_tvar(float(arg), rtol, 3)
        return self._bounded_stop_loss(arg, rtol, 3)

    def _refuse_or_keep(self, value, low, high, rtol, default, what, stacklevel) -> Bounded:
        rtol = default if rtol is None else rtol
        scale = max(abs(value), self._step) if math.isfinite(value) else math.inf
        width = high - low
        if not math.isfinite(value) or not (width <= rtol * scale):
            reason = (f"{what}: certified range [{low:.6g}, {high:.6g}] is wider than rtol "
                      f"{rtol:g} x {scale:.6g}")
            warnings.warn(reason + "; returning nan", AccuracyWarning, stacklevel=stacklevel + 1)
            return Bounded(math.nan, low, high, True, reason)
        return Bounded(value, low, high, False, "")

    def _bounded_probability(self, measure, x, rtol) -> Bounded:
        xv = float(_real_or_inf(x, "x"))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            value = self.cdf(xv) if measure == "cdf" else self.sf(xv)
        _, k = self._index(xv)
        br = self._br()
        rng = br.cdf_range(k) if measure == "cdf" else br.sf_range(k)
        low, high = float(rng[0]), float(rng[1])
        if math.isinf(xv):
            low = high = value
        if math.isnan(value):
            reason = (f"{measure}({xv!r}) is past the last lattice point, where truncated mass "
                      f"may lie: only [{low:.3g}, {high:.3g}] is known")
            warnings.warn(reason, TruncationWarning, stacklevel=3)
            return Bounded(math.nan, low, high, True, reason)
        rtol = risk.PROBABILITY_RTOL if rtol is None else rtol
        if value > 0 and high - low > rtol * value:
            reason = f"{measure} range [{low:.3g}, {high:.3g}] is wider than rtol {rtol:g} x value"
            warnings.warn(reason, AccuracyWarning, stacklevel=3)
            return Bounded(math.nan, low, high, True, reason)
        return Bounded(value, low, high, False, "")

    def _bounded_quantile(self, measure, p, rtol) -> Bounded:
        arr = risk.check_level(p, allow_one=measure == "quantile")
        if arr.ndim != 0:
            raise TypeError(f"p must be a scalar level; got {p!r}")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            value = self.quantile(float(arr))
            low, high = self.quantile_bracket(float(arr))
        if math.isnan(value) or math.isinf(high):
            reason = (f"{measure} at p={float(arr)!r} may lie beyond the grid "
                      f"(bracket [{low:.6g}, {high}])")
            warnings.warn(reason, TruncationWarning, stacklevel=3)
            return Bounded(value, low, high, math.isnan(value), reason)
        tol = max(self._step, (rtol or 0.0) * abs(value))
        if high - low > tol * (1 + 1e-9):
            reason = f"{measure} bracket [{low:.6g}, {high:.6g}] is wider than {tol:.6g}"
            warnings.warn(reason, AccuracyWarning, stacklevel=3)
            return Bounded(value, low, high, False, reason)
        return Bounded(value, low, high, False, "")

    def _bounded_tvar(self, p: float, rtol, stacklevel: int) -> Bounded:
        br = self._br()
        k = int(br.own_quantile_index(np.asarray(p)))
        n = self._pmf.size
        if k >= n:
            value = math.nan
        else:
            value = float(self._origin + self._step * k + br.stop_loss_value(
                np.asarray(self._origin + self._step * k)) / (1 - p))
        low, high = br.tvar_range(p)
        return self._refuse_or_keep(value, low, high, rtol, risk.DEFAULT_RTOL,
                                    f"TVaR at p={p!r}", stacklevel)

    def _bounded_stop_loss(self, d, rtol, stacklevel: int) -> Bounded:
        dv = _real_or_inf(d, "d")
        if math.isnan(dv):
            return Bounded(math.nan, math.nan, math.nan, True, "stop_loss(nan) is nan")
        if dv == math.inf:
            return Bounded(0.0, 0.0, 0.0, False, "")
        if dv == -math.inf:
            return Bounded(math.inf, math.inf, math.inf, False, "")
        br = self._br()
        value = float(br.stop_loss_value(np.asarray(dv)))
        lo, hi = br.stop_loss_range(np.asarray(dv))
        return self._refuse_or_keep(value, float(lo), float(hi), rtol, risk.DEFAULT_RTOL,
                                    f"stop-loss at d={dv!r}", stacklevel)

    def _bounded_moment(self, measure, rtol) -> Bounded:
        br = self._br()
        m1 = self._mean()
        lo1, hi1 = br.mean_range(m1)
        if measure == "mean":
            return self._refuse_or_keep(m1, lo1, hi1, rtol, risk.DEFAULT_RTOL, "mean", 3)
        m2 = float(np.dot(self._pmf, self.values ** 2))
        lo2, hi2 = br.second_moment_range(self._pmf, m2)
        sq_hi = max(lo1 * lo1, hi1 * hi1)
        sq_lo = 0.0 if lo1 <= 0 <= hi1 else min(lo1 * lo1, hi1 * hi1)
        var_lo, var_hi = max(lo2 - sq_hi, 0.0), max(hi2 - sq_lo, 0.0)
        value = math.sqrt(self._variance()) if br.t_high == 0 or self.truncated_mass == 0 \
            else math.sqrt(self._variance())
        return self._refuse_or_keep(value, math.sqrt(var_lo), math.sqrt(var_hi), rtol,
                                    risk.DEFAULT_RTOL, "std", 3)

    # -- transformations --------------------------------------------------------------------
    def layer(self, deductible: float, limit: float = math.inf) -> Lattice:
        """Per-occurrence layer ``min(max(X - deductible, 0), limit)``.

        ``deductible - origin`` and a finite ``limit`` must be whole multiples of ``step`` (so
        the layer lies on a lattice of the same step, starting at 0).  Mass beyond the lattice
        goes to ``limit`` when all of it lies at or above ``deductible + limit``; otherwise it
        stays truncated.  Error ledger: merging points adds their errors, so the atom at 0 errs
        by at most the cumulative error of the merged points (not their count times a floor).
        """
        return Lattice._make(*propagate.layer(self, deductible, limit))

    def nfold(self, n: int) -> Lattice:
        """Distribution of the sum of ``n`` independent copies, by transform powering.

        ``g = IFFT(FFT(f)^n)`` on a transform covering the full support ``n (len - 1) + 1``
        (no wrap-around), ``log2 n`` complex multiplications per frequency instead of ``n - 1``
        convolutions.  Error ledger: :func:`polyconv.dist.ledger.power_errors`.
        """
        if isinstance(n, bool) or not isinstance(n, numbers.Integral) or n < 0:
            raise ValueError(f"n must be a non-negative integer; got {n!r}")
        if n == 1:
            return self
        return Lattice._make(*propagate.nfold(self, int(n)))

    def __add__(self, other):
        if isinstance(other, Lattice):
            return Lattice._make(*propagate.independent_sum(self, other))
        if isinstance(other, numbers.Real) and not isinstance(other, bool):
            c = _real(other, "shift")
            return Lattice._make(*propagate.shifted(self, c))
        return NotImplemented

    __radd__ = __add__


def _missing(total: float, n: int) -> float:
    """``1 - total``, with pairwise-summation noise counted as zero."""
    missing = 1.0 - total
    if missing <= (math.log2(max(n, 1)) + 4) * accuracy.UNIT_ROUNDOFF:
        return 0.0
    return missing


def _real_or_inf(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {type(value).__name__} {value!r}")
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf


def same_step(a: Lattice, b: Lattice) -> bool:
    """Steps equal within :data:`STEP_RTOL`."""
    return propagate.steps_equal(a.step, b.step)
