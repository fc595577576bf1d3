"""Answers with their certified ranges: ``Lattice.bounded``.

A mixin of :class:`~polyconv.dist.lattice.Lattice`: each measure's value with the range the error
ledger certifies (:class:`~polyconv.dist.ledger.Bounded`), refused (``nan`` and a warning) when
that range is wider than a relative tolerance.

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
from .ledger import Bounded
from .queries import _real_or_inf

MEASURES = ("cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean", "std")
"""Measures :meth:`Lattice.bounded` answers."""

ARGUMENT = {"cdf": "the point x", "sf": "the point x", "quantile": "the level p in (0, 1]",
            "var": "the level p in (0, 1)", "tvar": "the level p in (0, 1)",
            "stop_loss": "the retention d"}
"""What ``arg`` of :meth:`Lattice.bounded` is, per measure (for error messages)."""

_real = risk.real_value


class LatticeAnswers:
    """``bounded(measure, arg)`` and the per-measure range logic of a Lattice (mixin)."""

    __slots__ = ()

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
        _check_arg(measure, arg)
        if isinstance(arg, np.ndarray):
            arg = arg.item()
        if measure in ("cdf", "sf"):
            return self._bounded_probability(measure, arg, rtol)
        if measure in ("quantile", "var"):
            return self._bounded_quantile(measure, arg, rtol)
        if measure == "tvar":
            risk.check_level(arg, "arg (the level p of bounded('tvar', arg))")
            return self._bounded_tvar(float(arg), rtol, 3)
        return self._bounded_stop_loss(arg, rtol, 3)

    def _refuse_or_keep(self, value, low, high, rtol, default, what, stacklevel) -> Bounded:
        """The Bounded answer, refused when its range is wider than ``rtol``.  A value outside its
        own certified range (the lattice's own TVaR, stop-loss or moment leaves out the mass
        beyond the grid, which the range counts) is replaced by the middle of the range, as
        the spliced answers do (:mod:`polyconv.dist.tail_splice`): never a value the
        certificate excludes."""
        rtol = default if rtol is None else rtol
        if math.isfinite(value) and low <= high and not low <= value <= high:
            value = 0.5 * (low + high)
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
        arr = risk.check_level(p, f"arg (the level p of bounded({measure!r}, arg))",
                               allow_one=measure == "quantile")
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
            value = br.tvar_value(p, k)
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
        # std in units of the step (no overflow for any finite step): u = x / step
        h = self._step
        led = self._ledger
        scaled = risk.Bracketer(self._pmf, 1.0, self._origin / h, led._replace(
            truncated_moment=led.truncated_moment / h,
            truncated_moment2=led.truncated_moment2 / h / h))
        lo1, hi1 = scaled.mean_range(m1 / h)
        u = self._origin / h + float_range(self._pmf.size)
        m2 = dot(self._pmf, u * u)
        lo2, hi2 = scaled.second_moment_range(self._pmf, m2)
        sq_hi = max(lo1 * lo1, hi1 * hi1)
        sq_lo = 0.0 if lo1 <= 0 <= hi1 else min(lo1 * lo1, hi1 * hi1)
        var_lo, var_hi = max(lo2 - sq_hi, 0.0), max(hi2 - sq_lo, 0.0)
        value = self._std()
        return self._refuse_or_keep(value, h * math.sqrt(var_lo), h * math.sqrt(var_hi), rtol,
                                    risk.DEFAULT_RTOL, "std", 3)


def _check_arg(measure: str, arg) -> None:
    """TypeError naming ``arg``, the measure and what was expected unless ``arg`` is one real
    number (a Python or numpy scalar; booleans and strings refused)."""
    what = ARGUMENT[measure]
    if arg is None:
        raise TypeError(f"bounded({measure!r}, arg): arg is missing; expected {what}, a real "
                        "number")
    scalar = isinstance(arg, numbers.Real) or (isinstance(arg, np.ndarray) and arg.ndim == 0
                                               and arg.dtype.kind in "iuf")
    if isinstance(arg, (bool, np.bool_)) or not scalar:
        kind = "an array" if isinstance(arg, (list, tuple, np.ndarray)) else \
            type(arg).__name__
        raise TypeError(f"bounded({measure!r}, arg): arg must be {what}, one real number; got "
                        f"{kind} {arg!r}")
