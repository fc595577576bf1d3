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

Module map: this module holds the class core (construction, validation, properties, cached
sums, transformations ``+``, ``nfold``, ``layer``); the queries are mixins in their own modules,
:mod:`polyconv.dist.queries` (moments, ``cdf``/``sf``, quantiles, VaR, TVaR, stop-loss) and
:mod:`polyconv.dist.answers` (``bounded``).  New groups of methods go in a new mixin module
listed in the bases of :class:`Lattice` (mixins declare ``__slots__ = ()``).

Caution: a model output, not advice; see the package docstring of :mod:`polyconv.dist`.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from . import accuracy, propagate, risk
from .answers import LatticeAnswers
from .errors import TruncationWarning
from .from_law import check_step_value
from .ledger import ErrorLedger, validate
from .queries import LatticeQueries

STEP_RTOL = propagate.STEP_RTOL
"""Relative tolerance within which two lattice steps count as equal."""

MASS_TOL = 1e-9
"""A pmf may sum above 1 by at most ``min(l1, MASS_TOL)`` plus summation rounding."""

_real = risk.real_value


class Lattice(LatticeQueries, LatticeAnswers):
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
        step = check_step_value(_real(step, "step"))
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
    def _make(cls, pmf: np.ndarray, step: float, origin: float, ledger: ErrorLedger,
              profile: np.ndarray | None = None, l2: float | None = None,
              enclosure=None) -> Lattice:
        """Internal constructor for computed results: ``pmf`` already non-negative and finite;
        ``truncated`` is set to ``1 - sum(pmf)`` (clipped at 0, the excess is in ``l1``).
        ``profile``: optional per-point bounds ``|e_k| <= profile_k`` (a route that knows
        them, e.g. a compound); the certified ranges use them where they beat the ledger's
        scalar bounds (:class:`polyconv.dist.risk.Bracketer`); ``l2``: optional bound of the
        error's Euclidean norm (transform routes), used by Cauchy-Schwarz; ``enclosure``: an
        optional :class:`polyconv.dist.enclosure.Enclosure` of the exact model, point by point.
        None of them is carried by operations."""
        arr = np.clip(np.asarray(pmf, dtype=float), 0.0, 1.0)
        arr.flags.writeable = False
        total = float(np.sum(arr))
        excess = max(total - 1.0, 0.0)
        n = arr.size
        l1 = min(float(ledger.l1) + excess, 2.0)
        ledger = ErrorLedger(min(float(ledger.point), 1.0), l1,
                             _missing(total, n), int(min(max(ledger.truncated_from, 0), n)),
                             float(ledger.truncated_moment),
                             min(float(ledger.cumulative) + excess, l1),
                             float(ledger.truncated_moment2))
        if ledger.truncated == 0 and ledger.truncated_moment == math.inf and ledger.l1 == 0:
            ledger = ledger._replace(truncated_moment=0.0)
        out = cls.__new__(cls)
        out._init(arr, float(step), float(origin), ledger)
        if profile is not None:
            prof = np.asarray(profile, dtype=float)
            if prof.shape == arr.shape and np.all(prof >= 0):
                out._cache["profile"] = prof
        if l2 is not None and math.isfinite(l2) and l2 >= 0:
            out._cache["l2"] = float(l2)
        if enclosure is not None and np.shape(enclosure.radius) == arr.shape:
            out._cache["enclosure"] = enclosure
        return out

    @classmethod
    def from_law(cls, law, *, step, size=None, rule="nearest") -> Lattice:
        """Put a continuous scipy.stats law (or a cdf) on a lattice of ``step``.

        rule: ``"nearest"``, ``"down"`` (stochastic lower bound), ``"up"`` (upper bound) or
        ``"moments"`` (local moment matching).  Implemented in
        :func:`polyconv.dist.law_lattice.lattice_from_law`.
        """
        # --- from_law hook (branch `grids` owns the implementation; keep this one delegation)
        from .law_lattice import lattice_from_law
        return lattice_from_law(law, step=step, size=size, rule=rule, cls=cls)

    @classmethod
    def from_samples(cls, samples, *, step, origin=0.0, counts=None, alpha=0.05,
                     rule="nearest") -> Lattice:
        """Empirical law of measured ``samples`` (optionally weighted by ``counts``) on the
        lattice ``origin + step k``, its ledger carrying the Dvoretzky-Kiefer-Wolfowitz band
        at confidence ``1 - alpha``.  Implemented in
        :func:`polyconv.dist.sample_band.band_law` (as :func:`polyconv.dist.samples.empirical`)."""
        # --- from_samples hook (branch `latency` owns the implementation)
        from .sample_band import band_law
        pmf, h, o, ledger = band_law(samples, step=step, origin=origin, counts=counts,
                                     alpha=alpha, rule=rule)[:4]
        return cls(pmf, h, o, errors=ledger)

    def scaled(self, factor: float, *, rule: str = "nearest") -> Lattice:
        """Law of ``factor * X`` on this lattice (time scaling, inflation); see
        :func:`polyconv.dist.scaling.scale_parts` for the rules and the ledger."""
        # --- scaled hook (branch `latency` owns the implementation)
        from .scaling import scale_parts
        return Lattice._make(*scale_parts(self, factor, rule))

    def regrid(self, step: float) -> Lattice:
        """This law on the grid ``step * j``, mass and mean kept (linear split of each point
        between its two new neighbours); the ledger carries the computed error.  Implemented
        in :func:`polyconv.dist.regridding.regrid_parts` (its effect on the law:
        :func:`~polyconv.dist.portfolio.regrid_effect`)."""
        # --- regrid hook (branch `actuarial` owns the implementation)
        from .regridding import regrid_parts, same_grid
        if same_grid(self, float(step)):
            return self
        return Lattice._make(*regrid_parts(self, step))

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
                                               self._ledger, self._cache.get("profile"),
                                               self._cache.get("l2"),
                                               self._cache.get("enclosure"))
        return self._cache["br"]

    def _warn_truncated(self, what: str, relative_to: float = 1.0) -> None:
        t = self._ledger.truncated
        if t > risk.TRUNCATION_LEVEL * max(relative_to, 0.0):
            warnings.warn(f"{what} counts only the lattice: truncated_mass "
                          f"{t:.3g} lies beyond it", TruncationWarning, stacklevel=3)

    def _abs_moment(self) -> float:
        """Upper bound of ``sum |x_k| q_k`` (the represented part's absolute first moment)."""
        x = np.abs(self.values)
        return accuracy.dot(self._pmf, x) + self._ledger.l1 * float(np.max(x)) + 1e-300

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

def same_step(a: Lattice, b: Lattice) -> bool:
    """Steps equal within :data:`STEP_RTOL`."""
    return propagate.steps_equal(a.step, b.step)
