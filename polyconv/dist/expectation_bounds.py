"""Certified ranges of expectations on a lattice: stop-loss premiums, TVaR, mean, second moment.

A mixin of :class:`polyconv.dist.risk.Bracketer` (which holds the cdf, sf and quantile bounds and
the arrays ``s``, ``t``, ``Bt``, ``SB`` used here).  Against the exact model of the lattice
(:mod:`polyconv.dist.ledger`), with ``B_j`` a bound of ``sum_{k >= j} |e_k|`` and ``Bt_j`` one of
``|sum_{k >= j} e_k|``:

* stop-loss ``E[(S - d)+] = h T_m + (x_m - d) S_m`` (``m`` the first point above ``d``), and by
  summation by parts (``(x_k - d)+`` increases by at most one step per point)
  ``|sum_k (x_k - d)+ e_k| <= (x_m - d) Bt_m + h sum_{j > m} Bt_j``; the truncated part adds
  between ``T_low (x_from - d)+`` and its first-moment bound.
* TVaR (Rockafellar & Uryasev, J. Banking & Finance 26 (2002) 1443-1471:
  ``TVaR_p = min_c {c + E[(S - c)+] / (1 - p)}``, attained at ``VaR_p``): ``min_c`` over the
  quantile bracket's points of ``c + SL_low(c)/(1-p)`` (low) and of ``c + SL_high(c)/(1-p)``
  (high, valid for any ``c``).
* mean and second moment by the same summation by parts with the weights ``|x_k|`` and
  ``x_k^2``.

Float rounding of the sums themselves is added (recursive summation: ``gamma_m`` times the sum,
Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2).

Caution: model outputs, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math

import numpy as np

from .accuracy import UNIT_ROUNDOFF, dot, float_range
from .arguments import lattice_index
from .ledger import cum_bound

_U = UNIT_ROUNDOFF
UNIT_ROUNDOFF_LONG = float(np.finfo(np.longdouble).eps) / 2
"""Unit roundoff of longdouble, in which the cumulative sums run."""
_UL = UNIT_ROUNDOFF_LONG
_L = np.longdouble

SCALAR_MIN = 1 << 14
"""Lattices of at least this many points answer one stop-loss from sums over the points above
its retention (no tail arrays), and one quantile bracket from a window of the cdf bounds."""


def _down(x) -> float:
    """The largest float at or below the longdouble ``x``."""
    f = float(x)
    return float(np.nextafter(f, -math.inf)) if _L(f) > x else f


def _up(x) -> float:
    """The smallest float at or above the longdouble ``x``."""
    f = float(x)
    return float(np.nextafter(f, math.inf)) if _L(f) < x else f


def _ramp_total(cap: float, slope: float, count: int) -> float:
    """``sum_{i=0}^{count-1} min(cap, i slope)`` in closed form, rounded up."""
    if count <= 1 or cap <= 0 or slope <= 0:
        return 0.0
    if math.isnan(cap) or math.isnan(slope):  # a ledger entry unknown: no bound
        return math.inf
    ratio = cap / slope
    q = count - 1 if not ratio < count - 1 else int(ratio)
    return (slope * q * (q + 1) / 2 + (count - 1 - q) * cap) * (1 + 8 * _U)


class ExpectationBounds:
    """Stop-loss, TVaR and moment ranges of a :class:`~polyconv.dist.risk.Bracketer` (mixin)."""

    __slots__ = ()

    # -- stop-loss --------------------------------------------------------------------------
    def stop_loss_value(self, d: np.ndarray) -> np.ndarray:
        """The lattice's own ``E[(X - d)+]`` (computed pmf only), finite ``d`` (not snapped)."""
        one = self._one_stop_loss(d)
        if one is not None:
            return one[0]
        m = np.clip(lattice_index(d, self.o, self.h, self.n, snap=0.0) + 1, 0, self.n)
        xm = self.o + self.h * m
        return self.h * self.t[m] + (xm - d) * self.s[m]

    def _one_stop_loss(self, d):
        """``(value, on-grid error, S_m, x_m, m)`` of one stop-loss on a long lattice whose
        tail arrays are not built, from sums over the points above ``d`` only (longdouble,
        rounded once: within the same ``2 (n - m + 2) u_long``), the error by closed forms
        (:meth:`_ramp_total`, :meth:`_l2_excess`) and one pass over the profile; None
        otherwise.  The sum of the per-point minima (the arrays' route) can only be smaller:
        the minimum of these sums is as rigorous, and wider at most by their spread."""
        if np.ndim(d) != 0 or self.n < SCALAR_MIN or "_tails_long" in self.__dict__:
            return None
        n, h = self.n, self.h
        m = int(np.clip(lattice_index(d, self.o, h, n, snap=0.0) + 1, 0, n))
        memo = self.__dict__.setdefault("_one_sl", {})
        key = (m, float(d))
        if key not in memo:
            big_n = n - m
            xm = self.o + h * m
            pl = np.asarray(self.pmf[m:], dtype=_L)
            s_m = float(np.sum(pl))
            t_m = float(np.sum(np.arange(big_n, dtype=_L) * pl))
            value = h * t_m + (xm - d) * s_m
            c = min(self.ledger.l1, 2 * cum_bound(self.ledger))
            pt = self.ledger.point
            err = (xm - d) * min(c, big_n * pt) + h * _ramp_total(c, pt, big_n)
            if self.profile is not None:
                prof = self.profile[m:]
                direct = (xm - d) * float(np.sum(prof)) + h * dot(np.arange(big_n, dtype=float),
                                                                   prof)
                err = min(err, direct * (1 + (big_n + 4) * _U))
            if self.l2 is not None:
                err = min(err, float(self._l2_excess(xm - d, big_n)))
            if self.enc is not None:
                err = min(err, self._enc_excess(xm - d, m))
            memo[key] = (value, err, s_m, xm, m)
        return memo[key]

    def stop_loss_range(self, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Certified ``(low, high)`` of the exact ``E[(X - d)+]`` at finite ``d``."""
        n, h = self.n, self.h
        one = self._one_stop_loss(d)
        if one is not None:
            value, err, s_m, xm, m = one
        else:
            m = np.clip(lattice_index(d, self.o, h, n, snap=0.0) + 1, 0, n)
            xm = self.o + h * m
            s_m = self.s[m]
            value = h * self.t[m] + (xm - d) * s_m
            err = (xm - d) * self.Bt[m] + h * self.SB[np.minimum(m + 1, n + 1)]
            if self.l2 is not None:
                err = np.minimum(err, self._l2_excess(xm - d, n - m))
            if self.enc is not None:
                err = np.minimum(err, self._enc_excess(xm - d, m))
        # float x_m = o + h m and x_m - d: within r = 4 u (|o| + h m + |d|) of the exact reals;
        # when x_{m-1} lies within r of d it may be above d: charged on S_{m-1} = S_m + p_{m-1}
        r = 4 * _U * (abs(self.o) + h * m + np.abs(d))
        below = np.maximum(m - 1, 0)
        close = (m > 0) & (d - (self.o + h * below) <= 2 * r)
        s_near = s_m + np.where(close, np.asarray(self.pmf)[below], 0.0)
        err = err + (8 * _U + 2 * (n - m + 2) * _UL) * value + r * s_near * (1 + 2 * _U)
        x_from = self._x_from_low()
        trunc_low = self.t_low * np.maximum(x_from - d, 0.0) if self.t_low > 0 else 0.0
        trunc_high = self._truncated_excess_high(d, x_from)
        low = np.maximum(value - err, 0.0) + trunc_low
        high = value + err + trunc_high
        return low, high

    def _enc_excess(self, a, m):
        """Bound of ``|sum_{k >= m} (a + h (k - m)) e_k|`` from the enclosure's tail and ramp
        sums (:mod:`polyconv.dist.enclosure`), rounded up."""
        return (a * self.enc.tail[m] + self.h * self.enc.ramp[m]) * (1 + 4 * _U)

    def _l2_excess(self, a: np.ndarray, count: np.ndarray) -> np.ndarray:
        """``||w||_2 l2`` for the weights ``w_j = a + h j``, ``j = 0..count-1`` (the excesses
        ``x_k - d`` over ``count`` points from the first point above ``d``), by the closed
        form ``sum_j (a + h j)^2 = N a^2 + a h N (N - 1) + h^2 (N - 1) N (2N - 1) / 6``,
        rounded up (a few ulps)."""
        big_n = np.asarray(count, dtype=float)
        a = np.asarray(a, dtype=float)
        h = self.h
        s2 = big_n * a * a + a * h * big_n * (big_n - 1) \
            + h * h * (big_n - 1) * big_n * (2 * big_n - 1) / 6
        return np.sqrt(np.maximum(s2, 0.0)) * self.l2 * (1 + 16 * _U)

    def _x_from_low(self) -> float:
        """A float-safe lower bound of the lowest point where truncated mass may lie,
        ``origin + step * truncated_from`` less its rounding."""
        x = self.o + self.h * self.tf
        return x - 4 * _U * (abs(self.o) + self.h * self.tf)

    def _truncated_excess_high(self, d: np.ndarray, x_from: float) -> np.ndarray:
        """Upper bound of ``E[(X - d)+ 1{X truncated}]``.  The truncated part lies at or above
        ``x_from``, so with ``c = min(d, x_from)``: ``(X - d)+ <= X - c`` there, and
        ``E[(X - c) 1{T}] <= M - c t`` (``M`` the ledger's first-moment bound, ``t`` the
        truncated mass: its low bound when ``c >= 0``, its high bound otherwise)."""
        m = self._moment_high()
        if self.t_high == 0 or not math.isfinite(m):
            return np.full(np.shape(d), m) if np.ndim(d) else m
        c = np.minimum(d, x_from)
        sub = np.where(c >= 0, c * self.t_low * (1 - 4 * _U), c * self.t_high * (1 + 4 * _U))
        return np.maximum(m - sub, 0.0)

    def _moment_high(self) -> float:
        if self.t_high == 0:
            return 0.0
        return self.ledger.truncated_moment

    def _sl_arrays(self):
        """Stop-loss at every lattice point ``d = x_k``, in longdouble: own value ``h T_k``
        (``E[(X - x_k)+] = h sum_{j > k} (j - k) p_j = h T_k``) and certified range (the
        on-grid error ``h SB_{k+1}`` by summation by parts, the truncated part's terms)."""
        if self._sl is None:
            n, h = self.n, self.h
            k = np.arange(n)
            t_long = self.t_long[:n]
            value = _L(h) * t_long
            rel = (2 * (n - k) + 6) * _UL  # two longdouble cumulative sums and one product
            err = h * self.SB[1: n + 1] * (1 + (n + 6) * _U)
            if self.l2 is not None:  # weights h, 2h, ... beyond x_k
                err = np.minimum(err, self._l2_excess(np.full(n, h), n - 1 - k))
            if self.enc is not None:  # h sum_{j >= k} (j - k) e_j
                err = np.minimum(err, h * self.enc.ramp[:n] * (1 + 4 * _U))
            err = err.astype(_L)
            d = self.o + h * k  # float points: within 2 u (|o| + h k) of the exact x_k
            moved = 2 * _U * (abs(self.o) + h * k)  # (not u |d|: o + h k may cancel)
            x_from = self._x_from_low()
            trunc_low = np.zeros(n) if self.t_low <= 0 else np.maximum(
                self.t_low * (1 - 4 * _U) * (np.maximum(x_from - d, 0.0) - moved), 0.0)
            trunc_high = self._truncated_excess_high(d, x_from)
            if self.t_high > 0:
                trunc_high = trunc_high * (1 + 4 * _U) + self.t_high * moved
            lo = np.maximum(value * (1 - rel) - err, 0.0) + trunc_low.astype(_L)
            hi = value * (1 + rel) + err + np.asarray(trunc_high, dtype=_L)
            self._sl = (value, lo, hi)
        return self._sl

    # -- TVaR -------------------------------------------------------------------------------
    def _points_long(self) -> tuple[np.ndarray, np.ndarray]:
        """``x_k = origin + step k`` in longdouble and a bound of their rounding."""
        k = np.arange(self.n)
        x = _L(self.o) + _L(self.h) * k.astype(_L)
        return x, 2 * _UL * (abs(self.o) + self.h * k.astype(float)) + 1e-4930

    def tvar_value(self, p: float, k: int) -> float:
        """The lattice's own ``TVaR_p = x_k + E[(X - x_k)+] / (1 - p)`` at its VaR index
        ``k``, evaluated in longdouble and rounded once."""
        q = _L(1) - _L(p)
        return float(_L(self.o) + _L(self.h) * _L(k) + _L(self.h) * self.t_long[k] / q)

    def tvar_range(self, p: float) -> tuple[float, float]:
        """Certified ``(low, high)`` of the exact ``TVaR_p`` (module docstring), computed in
        longdouble with every rounding charged (``1 - p`` and the division: ``u_long`` each) and
        rounded outward to float once."""
        lo_k, hi_k = self.quantile_range(np.asarray(p))
        lo_k, hi_k = int(lo_k), int(hi_k)
        _, sl_lo, sl_hi = self._sl_arrays()
        x, x_err = self._points_long()
        q = _L(1) - _L(p)
        low_all = x - x_err + sl_lo / q * _L(1 - 6 * _UL)
        high_all = x + x_err + sl_hi / q * _L(1 + 6 * _UL)
        beyond = (self.o + self.h * self.n) - 4 * _U * (abs(self.o) + self.h * self.n)
        high = _up(np.min(high_all))
        if lo_k >= self.n:  # the quantile lies beyond the grid for every model in range
            return beyond, high
        low = _down(np.min(low_all[lo_k: min(hi_k, self.n - 1) + 1]))
        if hi_k >= self.n:
            low = min(low, beyond)
        return low, max(high, low)

    # -- moments ----------------------------------------------------------------------------
    def mean_range(self, value: float) -> tuple[float, float]:
        """Certified range of the exact mean around the lattice's own ``value``."""
        err = abs(self.o) * min(cum_bound(self.ledger), self.n * self.ledger.point) \
            + self.h * self._sb1()
        if self.enc is not None:  # sum_k (o + h k) e_k = o S_0(e) + h T_0(e)
            err = min(err, (abs(self.o) * self.enc.tail[0] + self.h * self.enc.ramp[0])
                      * (1 + 4 * _U))
        k = float_range(self.n)
        if self.o >= 0:  # every point non-negative: |x_k| = o + h k
            absum = self.o * float(np.sum(self.pmf)) + self.h * dot(k, self.pmf)
            absum *= 1 + 4 * _U
        else:
            absum = dot(np.abs(self.o + self.h * k), self.pmf)
        mass = float(np.sum(self.pmf)) * (1 + (self.n + 2) * _U)
        err += (self.n + 2) * _U * absum + 4 * _U * (abs(self.o) * mass + abs(value))
        x_from = self._x_from_low()
        m = self._moment_high()
        t_lo = (self.t_low * x_from if self.t_low > 0 else 0.0) if x_from >= 0 else -m
        return value - err + t_lo, value + err + m

    def _sb1(self) -> float:
        """``SB[1] = sum_{j=1..n} Bt_j`` in closed form: ``Bt_j = min(c, (n - j) point)`` with
        ``c = min(l1, 2 K)`` is ``m point`` up to ``m = c / point``, then ``c``."""
        if "SB" in self.__dict__:
            return float(self.SB[1])
        c = min(self.ledger.l1, 2 * cum_bound(self.ledger))
        d = self.ledger.point
        top = self.n - 1  # m = n - j runs over 0..n-1
        if not (c > 0 and d > 0):  # NaN: a ledger entry unknown (a NaN count law), no bound
            return 0.0 if d <= 0 or c <= 0 else math.inf
        q = min(int(c / d), top)
        return (d * q * (q + 1) / 2 + (top - q) * c) * (1 + 4 * _U)

    def second_moment_range(self, pmf: np.ndarray, value: float) -> tuple[float, float]:
        """Certified range of the exact ``E[X^2]``: the on-grid sum, its error by summation by
        parts, and the ledger's bound of the truncated part's second moment (``inf`` unknown)."""
        w = (abs(self.o) + self.h * np.arange(self.n)) ** 2
        inc = np.diff(np.concatenate(([0.0], w)))  # increments of a non-decreasing weight
        err = dot(inc, self.B[: self.n])
        err += (self.n + 2) * _U * dot(w, pmf)
        trunc = self.ledger.truncated_moment2 if self.t_high > 0 else 0.0
        high = (value + err + trunc) * (1 + 2 * _U)
        return max(value - err, 0.0), high
