"""``Lattice``: an immutable probability distribution on ``origin + step * k``, ``k = 0..n-1``.

Probabilities that do not sum to one are kept as given: the missing mass is ``truncated_mass``
and is understood to lie *above* the lattice (as compounding and discretisation produce it); it is
never renormalised away (DESIGN.md section 6: renormalising moved heavy-tail probabilities by 1-2%
in a test case).

Every Lattice carries ``trust_floor``, an absolute bound on the error of each of its probabilities
from how it was computed (see :mod:`polyconv.dist.accuracy`).  Probabilities, quantiles and tail
measures that rest on probabilities below it warn (:class:`AccuracyWarning`) or return ``nan``.

Caution: a model output, not advice; see the package docstring of :mod:`polyconv.dist`.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from ..api import convolve, plan
from . import accuracy, risk
from .errors import AccuracyWarning, TruncationWarning
from .transform import power_law, transform_compound

STEP_RTOL = 1e-9
"""Relative tolerance within which two lattice steps count as equal."""


def _real(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {type(value).__name__} {value!r}")
    out = float(value)
    if not math.isfinite(out):
        raise ValueError(f"{name} must be finite; got {value!r}")
    return out


class Lattice:
    """A probability distribution on the points ``origin + step * k``, ``k = 0, ..., n - 1``.

    Parameters
    ----------
    pmf : array_like
        Non-negative probabilities of the points, 1-D, summing to at most 1.  Negative entries
        no larger in size than the float-noise tolerance (``trust_floor`` plus a few units of
        roundoff times ``max(pmf)``) are set to zero and the floor raised to cover them; larger
        negative entries, non-finite entries or a total above ``1 + tolerance`` raise
        ValueError.  A total below 1 is kept: the rest is :attr:`truncated_mass`.
    step : float
        Lattice spacing ``h > 0``.
    origin : float
        Value of the first point.
    trust_floor : float, optional
        Absolute error bound of each probability, if the pmf was computed (default 0: exact).

    Notes
    -----
    Truncated mass is assumed to lie above the lattice.  After a sum (``+``, :meth:`nfold`,
    compounding) it may partly lie among the upper points instead; the floor then includes it.

    ``X + Y`` for two Lattices is the distribution of the sum of *independent* variables (the
    convolution of the pmfs); both must have the same ``step``.  ``X + c`` shifts by a number.

    Examples
    --------
    >>> from polyconv.dist import Lattice
    >>> die = Lattice([1/6] * 6, origin=1)
    >>> round((die + die).mean(), 12)
    7.0
    """

    __slots__ = ("_pmf", "_step", "_origin", "_floor", "_truncated", "_cache")

    def __init__(self, pmf, step: float = 1.0, origin: float = 0.0, *, trust_floor: float = 0.0):
        try:
            arr = np.array(pmf, dtype=float, copy=True)
        except (TypeError, ValueError):
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
        floor = float(trust_floor)
        if not floor >= 0:
            raise ValueError(f"trust_floor must be >= 0; got {trust_floor!r}")
        u = accuracy.UNIT_ROUNDOFF
        noise = floor + 4 * u * float(np.max(np.abs(arr)))
        low = float(np.min(arr))
        if low < -noise:
            k = int(np.argmin(arr))
            raise ValueError(f"pmf must be non-negative; pmf[{k}] = {low!r} is below the "
                             f"float-noise tolerance {noise:.3g}")
        if low < 0:
            floor = max(floor, -low)
            np.maximum(arr, 0.0, out=arr)
        total = float(np.sum(arr))
        mass_tol = arr.size * (floor + 2 * u) + 4 * u
        if total > 1 + mass_tol:
            raise ValueError(f"pmf sums to {total!r} > 1 (tolerance {mass_tol:.3g}); "
                             "probabilities are not renormalised")
        arr.flags.writeable = False
        object.__setattr__(self, "_pmf", arr)
        object.__setattr__(self, "_step", step)
        object.__setattr__(self, "_origin", origin)
        object.__setattr__(self, "_floor", floor)
        missing = 1.0 - total
        # within the rounding of a pairwise sum the missing mass is noise, not truncation
        if missing <= (math.log2(arr.size) + 4) * u:
            missing = 0.0
        object.__setattr__(self, "_truncated", missing)
        object.__setattr__(self, "_cache", {})

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
    def trust_floor(self) -> float:
        """Absolute error bound of each probability from how it was computed (0 if exact)."""
        return self._floor

    @property
    def truncated_mass(self) -> float:
        """``1 - sum(pmf)``: probability beyond the lattice (not renormalised away)."""
        return self._truncated

    def __len__(self) -> int:
        return self._pmf.size

    def __repr__(self) -> str:
        return (f"Lattice(n={self._pmf.size}, step={self._step!r}, origin={self._origin!r}, "
                f"truncated_mass={self._truncated:.3g}, trust_floor={self._floor:.3g})")

    # -- cached sums ------------------------------------------------------------------------
    def _cum(self) -> np.ndarray:
        if "cum" not in self._cache:
            self._cache["cum"] = np.cumsum(self._pmf)
        return self._cache["cum"]

    def _tails(self):
        if "tails" not in self._cache:
            self._cache["tails"] = risk.tail_sums(self._pmf)
        return self._cache["tails"]

    def _warn_truncated(self, what: str, relative_to: float = 1.0) -> None:
        if self._truncated > risk.TRUNCATION_LEVEL * max(relative_to, 0.0):
            warnings.warn(f"{what} counts only the lattice: truncated_mass "
                          f"{self._truncated:.3g} lies beyond it", TruncationWarning, stacklevel=3)

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

    def mean(self) -> float:
        """``E[X] = origin * mass + step * sum k p_k`` over the lattice."""
        self._warn_truncated("mean()")
        mass = float(np.sum(self._pmf))
        k = np.arange(self._pmf.size)
        return self._origin * mass + self._step * float(np.dot(self._pmf, k))

    def variance(self) -> float:
        """``sum p_k (x_k - mean)^2`` over the lattice (the variance when nothing is truncated)."""
        self._warn_truncated("variance()")
        mass = float(np.sum(self._pmf))
        if mass == 0:
            return 0.0
        k = np.arange(self._pmf.size)
        mk = float(np.dot(self._pmf, k)) / mass
        return self._step ** 2 * float(np.dot(self._pmf, (k - mk) ** 2))

    def std(self) -> float:
        """Square root of :meth:`variance`."""
        return math.sqrt(self.variance())

    # -- probabilities ----------------------------------------------------------------------
    def cdf(self, x):
        """``P(X <= x)`` (right-continuous; ``x`` within ``1e-9`` steps of a point counts as it).

        Warns (:class:`AccuracyWarning`) where the value is not above its error bound.
        """
        xs = np.asarray(x, dtype=float)
        n = self._pmf.size
        k = risk.lattice_index(xs, self._origin, self._step)
        cum = self._cum()
        kk = np.clip(k, 0, n - 1)
        out = np.where(k < 0, 0.0, cum[kk])
        self._flag(out, risk.cumulative_error(kk, n, self._floor), (k >= 0), "cdf")
        return float(out) if out.ndim == 0 else out

    def sf(self, x):
        """``P(X > x)``, truncated mass included, summed from the right (no cancellation).

        Use it for deadline-miss or exceedance probabilities.  Warns (:class:`AccuracyWarning`)
        where the value is not above its error bound.
        """
        xs = np.asarray(x, dtype=float)
        n = self._pmf.size
        k = risk.lattice_index(xs, self._origin, self._step)
        s, _ = self._tails()
        m = np.clip(k + 1, 0, n)
        out = s[m] + self._truncated
        self._flag(out, risk.cumulative_error(np.minimum(m, n - 1), n, self._floor), (m < n),
                   "sf")
        return float(out) if out.ndim == 0 else out

    def _flag(self, values, err, active, name) -> None:
        if self._floor > 0 and np.any(active & (values <= err) & (values > 0)):
            warnings.warn(f"{name} value below its error bound from the trust floor "
                          f"({self._floor:.3g} per probability): numerically meaningless",
                          AccuracyWarning, stacklevel=3)

    # -- risk measures ----------------------------------------------------------------------
    def quantile(self, p):
        """Lower quantile ``min{x on the lattice : F(x) >= p}``, ``0 < p <= 1``.

        ``nan`` with :class:`AccuracyWarning` when ``min(p, 1 - p)`` is within the error of the
        cumulative probabilities; ``nan`` with :class:`TruncationWarning` when the quantile lies
        beyond the lattice.  Percentiles of sums do not add.
        """
        out = risk.quantile(self._pmf, self._step, self._origin, self._floor, self._truncated,
                            self._cum(), p)
        return float(out) if out.ndim == 0 else out

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
        ``VaR_p`` included).  ``nan`` with a warning when it rests on noise or on mass beyond the
        lattice.  Model output, not advice (see :mod:`polyconv.dist`).
        """
        arr = risk.check_level(p)
        var = np.asarray(self.quantile(arr), dtype=float)
        out = np.full(var.shape, np.nan)
        ok = np.isfinite(var)
        if np.any(ok):
            sl = risk.stop_loss(self._pmf, self._step, self._origin, self._floor,
                                self._truncated, self._tails(), var[ok])
            out[ok] = var[ok] + sl / (1 - arr[ok] if arr.ndim else 1 - arr)
        return float(out) if out.ndim == 0 else out

    def stop_loss(self, d):
        """Stop-loss premium ``E[(X - d)+]``: exact over the lattice, linear between points.

        Model output, not advice (see :mod:`polyconv.dist`).
        """
        out = risk.stop_loss(self._pmf, self._step, self._origin, self._floor, self._truncated,
                             self._tails(), d)
        return float(out) if out.ndim == 0 else out

    # -- transformations --------------------------------------------------------------------
    def layer(self, deductible: float, limit: float = math.inf) -> Lattice:
        """Per-occurrence layer ``min(max(X - deductible, 0), limit)``.

        ``deductible - origin`` and a finite ``limit`` must be whole multiples of ``step`` (so
        the layer lies on a lattice of the same step, starting at 0).  Mass beyond the lattice
        goes to ``limit`` when the lattice reaches ``deductible + limit``; otherwise it stays
        truncated.
        """
        d = _real(deductible, "deductible")
        lim = float(limit) if limit == math.inf else _real(limit, "limit")
        if lim <= 0:
            raise ValueError(f"limit must be positive; got {limit!r}")
        h = self._step
        shift = (d - self._origin) / h
        if abs(shift - round(shift)) > 1e-9 * max(1.0, abs(shift)):
            raise ValueError(f"deductible must lie on the lattice origin + step * k; got {d!r} "
                             f"with origin {self._origin!r}, step {h!r}")
        shift = int(round(shift))
        n = self._pmf.size
        if math.isinf(lim):
            width = max(n - 1 - shift, 0) + 1
        else:
            w = lim / h
            if abs(w - round(w)) > 1e-9 * max(1.0, w):
                raise ValueError(f"limit must be a whole multiple of step {h!r}; got {limit!r}")
            width = int(round(w)) + 1
        out = np.zeros(width)
        k = np.arange(n) - shift
        pos = np.clip(k, 0, width - 1)
        np.add.at(out, pos, self._pmf)
        truncated_to_limit = (not math.isinf(lim)) and (n - 1 - shift >= width - 1)
        if truncated_to_limit:
            out[-1] += self._truncated
        floor = self._floor * max(1, n - width + 1, shift + 1)
        return Lattice(np.minimum(out, 1.0), h, 0.0, trust_floor=floor)

    def nfold(self, n: int) -> Lattice:
        """Distribution of the sum of ``n`` independent copies, by transform powering.

        ``g = IFFT(FFT(f)^n)`` on a transform covering the full support ``n (len - 1) + 1``
        (no wrap-around), ``log2 n`` complex multiplications per frequency instead of ``n - 1``
        convolutions.  Truncated mass ``t``: a copy beyond the lattice can land anywhere above
        ``len(pmf) - 1`` points, so each probability may miss up to ``n t``, added to the floor
        (first order; :mod:`polyconv.dist.accuracy`).
        """
        if isinstance(n, bool) or not isinstance(n, numbers.Integral) or n < 0:
            raise ValueError(f"n must be a non-negative integer; got {n!r}")
        n = int(n)
        if n == 0:
            return Lattice([1.0], self._step, 0.0)
        if n == 1:
            return self
        f = np.asarray(self._pmf)
        full = n * (f.size - 1) + 1
        res = transform_compound(power_law(n), f, full, n_fft=_fast(full), theta=0.0,
                                 log_alias_mass=-math.inf)
        floor = res.trust_floor + n * (self._floor + self._truncated)
        return Lattice(np.minimum(res.pmf, 1.0), self._step, n * self._origin,
                       trust_floor=floor)

    def __add__(self, other):
        if isinstance(other, Lattice):
            return _independent_sum(self, other)
        if isinstance(other, numbers.Real) and not isinstance(other, bool):
            c = _real(other, "shift")
            return Lattice(self._pmf, self._step, self._origin + c, trust_floor=self._floor)
        return NotImplemented

    __radd__ = __add__


def _fast(n: int) -> int:
    from ..transforms import fast_length
    return fast_length(n, real=True)


def same_step(a: Lattice, b: Lattice) -> bool:
    """Steps equal within :data:`STEP_RTOL`."""
    return abs(a.step - b.step) <= STEP_RTOL * max(a.step, b.step)


def _independent_sum(x: Lattice, y: Lattice) -> Lattice:
    """Independent sum: pmf convolution through ``polyconv.convolve``; error from the engine's
    bound (:func:`polyconv.dist.accuracy.convolution_bound`) plus the inputs' floors carried
    through (:func:`polyconv.dist.accuracy.propagated_sum_floor`)."""
    if not same_step(x, y):
        raise ValueError(f"cannot add lattices with different steps ({x.step!r} and {y.step!r}); "
                         "re-discretise one of them on the other's step")
    a, b = np.asarray(x.pmf), np.asarray(y.pmf)
    the_plan = plan(a, b)
    c = convolve(a, b)
    bound = accuracy.convolution_bound(the_plan.engine, a, b, the_plan.transform_length)
    floor = bound + accuracy.propagated_sum_floor(x.trust_floor, float(a.sum()),
                                                  y.trust_floor, float(b.sum()))
    # mass beyond either lattice may land anywhere in the upper part of the sum's lattice: each
    # probability there may miss up to t_x + t_y (a rigorous absolute bound)
    floor += x.truncated_mass + y.truncated_mass
    c = np.clip(c, 0.0, 1.0)
    return Lattice(c, x.step, x.origin + y.origin, trust_floor=floor)
