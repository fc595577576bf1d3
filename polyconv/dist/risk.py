"""Risk measures on a lattice and their certified bounds: cdf, sf, quantile (VaR), TVaR, stop-loss.

Definitions (Acerbi & Tasche, "On the coherence of expected shortfall", J. Banking & Finance 26
(2002) 1487-1503, for TVaR of a general, possibly discrete, distribution):

* ``VaR_p = min{x : F(x) >= p}`` (the lower ``p``-quantile), here with ``F`` the lattice's own
  computed cdf (float cumulative sum), so the answer is never below the lattice's quantile.
* ``TVaR_p = VaR_p + E[(S - VaR_p)+] / (1 - p) = min_c {c + E[(S - c)+] / (1 - p)}``
  (Rockafellar & Uryasev, J. Banking & Finance 26 (2002) 1443-1471: the minimum is attained at
  ``VaR_p``).
* stop-loss premium ``E[(S - d)+]``, exactly piecewise linear in ``d`` between lattice points.

Bounds (against the exact model of the lattice, see :mod:`polyconv.dist.ledger`).  Write
``C_k = min(l1, (k + 1) point)`` for the error of ``sum_{j <= k} p^_j`` and
``B_j = min(l1, (n - j) point)`` for that of ``sum_{k >= j} p^_k``.  Then

* ``F(k) in [P^(k) - C_k, P^(k) + C_k (+ T if truncated mass may lie at or below k)]`` and,
  from the right, ``F(k) = 1 - Q(>k) - t(>k)``; the tighter end of each route is kept (the
  right-hand route keeps far tails accurate).
* stop-loss, by summation by parts (``(x_k - d)+`` increases by at most one step per point):
  ``|sum_k (x_k - d)+ e_k| <= (x_m - d) B_m + h sum_{j > m} B_j``; the truncated part adds
  between ``T_low (x_from - d)+`` and its first-moment bound.
* a quantile bracket: ``[min{k: F_high(k) >= p}, min{k: F_low(k) >= p}]``.
* TVaR: ``min_c`` over the bracket's points of ``c + SL_low(c)/(1-p)`` (low) and of
  ``c + SL_high(c)/(1-p)`` (high, valid for any ``c``).

Float rounding of the sums themselves is added (recursive summation: ``gamma_m`` times the sum,
Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2).

Caution: these are model outputs, not advice.  They inherit every assumption of the Lattice they are
computed from (independence, discretisation, truncation); for reserves, capital or prices defer to
local regulation and qualified actuarial practice.
"""

from __future__ import annotations

import math
import numbers
from functools import cached_property

import numpy as np

from .accuracy import UNIT_ROUNDOFF, float_range
from .ledger import ErrorLedger, cum_bound, t_bounds, untruncated

SNAP = 1e-9
"""An ``x`` within ``SNAP`` lattice steps of a lattice point counts as that point (so 0.3 on a grid
of step 0.1 is the point 3, whatever the float rounding of 3 * 0.1)."""

TRUNCATION_LEVEL = 1e-9
"""Truncated mass, relative to the probability a measure rests on, above which it warns."""

DEFAULT_RTOL = 1e-3
"""Relative tolerance of TVaR, stop-loss, mean and std: refused (``nan`` with a warning) when the
certified range is wider than ``DEFAULT_RTOL * max(|value|, step)`` (the step: nothing finer can
be resolved on the lattice)."""

PROBABILITY_RTOL = 1.0
"""cdf and sf are flagged when the certified range is wider than the value itself (not one
significant digit)."""

_U = UNIT_ROUNDOFF
_UL = float(np.finfo(np.longdouble).eps) / 2
"""Unit roundoff of longdouble, in which the cumulative sums run."""


def real_value(value, name: str) -> float:
    """``float(value)`` for a finite real number; TypeError / ValueError naming ``name``
    otherwise (booleans refused, integers too large for a float refused)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {type(value).__name__} {value!r}")
    try:
        out = float(value)
    except OverflowError:
        digits = len(str(abs(int(value)))) if isinstance(value, numbers.Integral) else None
        size = f"an integer of {digits} digits" if digits else repr(value)
        raise ValueError(f"{name} must be a finite float; {size} is too large") from None
    if not math.isfinite(out):
        raise ValueError(f"{name} must be finite; got {value!r}")
    return out


def lattice_index(x, origin: float, step: float, n: int, snap: float = SNAP) -> np.ndarray:
    """Index ``k`` of the last point ``origin + step k <= x + snap step``, clipped to ``[-1, n]``
    (so huge or infinite ``x`` never overflow an integer cast); ``nan`` maps to ``-1``."""
    xs = np.asarray(x, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        k = np.floor((xs - origin) / step + snap)
    k = np.where(np.isnan(k), -1.0, np.clip(k, -1.0, float(n)))
    return k.astype(np.int64)


def check_level(p, name: str = "p", allow_one: bool = False) -> np.ndarray:
    """Validate probability levels ``0 < p < 1`` (``<= 1`` with ``allow_one``).

    Raises TypeError naming ``name`` for anything but real numbers (strings and booleans
    included) and ValueError for levels outside the range.
    """
    if isinstance(p, (str, bytes, bool, np.bool_)):
        raise TypeError(f"{name} must be a real number or array of them; got {p!r}")
    if isinstance(p, numbers.Real):
        arr = np.asarray(float(p))
    else:
        try:
            arr = np.asarray(p)
        except (TypeError, ValueError):
            raise TypeError(f"{name} must be a real number or array of them; got {p!r}") from None
        if arr.dtype.kind not in "iuf":
            raise TypeError(f"{name} must be a real number or array of them; got {p!r}")
        arr = arr.astype(float)
    hi_ok = (arr <= 1) if allow_one else (arr < 1)
    if not np.all(np.isfinite(arr) & (arr > 0) & hi_ok):
        rng = "(0, 1]" if allow_one else "(0, 1)"
        raise ValueError(f"{name} must lie in {rng}; got {p!r}")
    return arr


def tail_sums(pmf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``S_m = sum_{k>=m} p_k`` and ``T_m = sum_{k>=m} (k - m) p_k`` for ``m = 0..n``.

    Built from the right by ``T_m = T_{m+1} + S_{m+1}``: sums of non-negative terms, no
    cancellation (so far tails keep their relative accuracy).
    Sums run in longdouble and are rounded once to float64 (so each ``S_m`` is within
    ``u + (n - m) u_long`` of the exact sum, relative; ``T_m`` within ``u + 2 n u_long``).
    """
    n = pmf.size
    s = np.zeros(n + 1, dtype=np.longdouble)
    s[:n] = np.cumsum(np.asarray(pmf, dtype=np.longdouble)[::-1])[::-1]
    t = np.zeros(n + 1, dtype=np.longdouble)
    t[:n] = np.cumsum(s[1:][::-1])[::-1]
    return s.astype(float), t.astype(float)


class Bracketer:
    """Certified bounds of every query on one Lattice (arrays built once, ``O(n)``).

    Parameters
    ----------
    pmf : numpy.ndarray
        Computed probabilities (non-negative).
    step, origin : float
        The lattice.
    ledger : ErrorLedger
        Its error ledger.
    """

    def __init__(self, pmf: np.ndarray, step: float, origin: float, ledger: ErrorLedger):
        n = pmf.size
        self.n, self.h, self.o, self.ledger, self.pmf = n, step, origin, ledger, pmf
        self.tf = ledger.truncated_from
        self._sl = None

    # -- arrays, each built on first use (a stop-loss needs no cdf arrays, a cdf no tail sums)
    @cached_property
    def cum(self) -> np.ndarray:
        """Computed cdf at each point (longdouble cumulative sum, rounded once)."""
        return np.cumsum(np.asarray(self.pmf, dtype=np.longdouble)).astype(float)

    @cached_property
    def _tails(self) -> tuple[np.ndarray, np.ndarray]:
        return tail_sums(self.pmf)

    @property
    def s(self) -> np.ndarray:
        """``S_m = sum_{k >= m} p_k`` (:func:`tail_sums`)."""
        return self._tails[0]

    @property
    def t(self) -> np.ndarray:
        """``T_m = sum_{k >= m} (k - m) p_k`` (:func:`tail_sums`)."""
        return self._tails[1]

    @cached_property
    def mass(self) -> float:
        """Computed mass on the lattice."""
        return float(self.s[0])

    @cached_property
    def _t_bounds(self) -> tuple[float, float]:
        if untruncated(self.ledger):
            return 0.0, 0.0
        return t_bounds(self.ledger, self.mass, self.n)

    @property
    def t_low(self) -> float:
        """Lower bound of the truncated mass."""
        return self._t_bounds[0]

    @property
    def t_high(self) -> float:
        """Upper bound of the truncated mass."""
        return self._t_bounds[1]

    @cached_property
    def C(self) -> np.ndarray:  # noqa: N802 (the name of the bound in the module docstring)
        """``|sum_{j <= k} e_j|`` bound at each ``k``."""
        k = np.arange(self.n)
        return np.minimum(cum_bound(self.ledger), (k + 1) * self.ledger.point)

    @cached_property
    def B(self) -> np.ndarray:  # noqa: N802
        """Bound of ``sum_{k >= j} |e_k|``, ``j = 0..n``."""
        j = np.arange(self.n + 1)
        return np.minimum(self.ledger.l1, (self.n - j) * self.ledger.point)

    @cached_property
    def Bt(self) -> np.ndarray:  # noqa: N802
        """Bound of ``|sum_{k >= j} e_k|`` (signed sums), ``j = 0..n``."""
        return np.minimum(self.B, 2 * cum_bound(self.ledger))

    @cached_property
    def SB(self) -> np.ndarray:  # noqa: N802
        """``SB[j] = sum_{i >= j} Bt_i`` (``n + 2`` entries)."""
        sb = np.zeros(self.n + 2)
        sb[: self.n + 1] = np.cumsum(self.Bt[::-1])[::-1]
        return sb

    @cached_property
    def _cdf_bounds(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(F_low, F_high, S_low, S_high)`` at each index, the cdf from both routes."""
        n = self.n
        k = np.arange(n)
        rc = (_U + (k + 2) * _UL) * self.cum + 2 * _U
        tail = self.s[1:]
        rs = (_U + (n - k + 2) * _UL) * tail
        maybe_below = k >= self.tf
        cum_low = self.cum - self.C - rc
        cum_high = self.cum + self.C + rc + np.where(maybe_below, self.t_high, 0.0)
        tail_low = np.maximum(tail - self.Bt[1:] - rs, 0.0) + np.where(maybe_below, 0.0,
                                                                        self.t_low)
        tail_high = tail + self.Bt[1:] + rs + self.t_high
        return (np.clip(np.maximum(cum_low, 1.0 - tail_high - 2 * _U), 0.0, 1.0),
                np.clip(np.minimum(cum_high, 1.0 - tail_low + 2 * _U), 0.0, 1.0),
                np.clip(np.maximum(tail_low, 1.0 - cum_high - 2 * _U), 0.0, 1.0),
                np.clip(np.minimum(tail_high, 1.0 - cum_low + 2 * _U), 0.0, 1.0))

    @property
    def F_low(self) -> np.ndarray:  # noqa: N802
        return self._cdf_bounds[0]

    @property
    def F_high(self) -> np.ndarray:  # noqa: N802
        return self._cdf_bounds[1]

    @property
    def S_low(self) -> np.ndarray:  # noqa: N802
        return self._cdf_bounds[2]

    @property
    def S_high(self) -> np.ndarray:  # noqa: N802
        return self._cdf_bounds[3]

    @cached_property
    def _run_high(self) -> np.ndarray:
        return np.maximum.accumulate(self.F_high)

    @cached_property
    def _run_low(self) -> np.ndarray:
        return np.maximum.accumulate(self.F_low)

    # -- cdf / sf ---------------------------------------------------------------------------
    def cdf_range(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Certified ``(low, high)`` of ``F`` at lattice index ``k`` in ``[-1, n]`` (``n``:
        beyond the last point)."""
        kk = np.clip(k, 0, self.n - 1)
        low = np.where(k < 0, 0.0, self.F_low[kk])
        high = np.where(k < 0, 0.0, np.where(k >= self.n, 1.0, self.F_high[kk]))
        return low, high

    def sf_range(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Certified ``(low, high)`` of ``P(X > x)`` at lattice index ``k``."""
        kk = np.clip(k, 0, self.n - 1)
        low = np.where(k < 0, 1.0, np.where(k >= self.n, 0.0, self.S_low[kk]))
        high = np.where(k < 0, 1.0, self.S_high[kk])
        return low, high

    # -- quantile ---------------------------------------------------------------------------
    def own_quantile_index(self, p: np.ndarray) -> np.ndarray:
        """Smallest ``k`` with computed ``cdf(k) >= p`` (``n`` when none)."""
        return np.searchsorted(self.cum, p, side="left")

    def quantile_range(self, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Indices ``(low, high)`` containing the exact model's quantile index (``high = n``:
        it may lie beyond the grid)."""
        lo = np.searchsorted(self._run_high, p, side="left")
        hi = np.searchsorted(self._run_low, p, side="left")
        if self.ledger.point == 0 and self.ledger.l1 == 0:
            lo, hi = self._exact_ties(np.asarray(p, dtype=float), lo, hi)
        return lo, hi

    def _exact_ties(self, p: np.ndarray, lo: np.ndarray, hi: np.ndarray):
        """An exact pmf (no computed error): decide ``sum_{j <= k} p_j >= p`` exactly inside
        the rounding window (``math.fsum`` is correctly rounded, so the sign of
        ``fsum(p_0..p_k, -p)`` is the sign of the exact difference)."""
        lo, hi = np.array(lo, copy=True), np.array(hi, copy=True)
        for i in np.ndindex(p.shape):
            a, b = int(lo[i]), int(min(hi[i], self.tf - 1, self.n - 1))
            if b - a > 64 or a > b:
                continue
            for k in range(a, b + 1):
                if math.fsum([*self.pmf[: k + 1].tolist(), -float(p[i])]) >= 0:
                    lo[i] = hi[i] = k
                    break
        return lo, hi

    # -- stop-loss --------------------------------------------------------------------------
    def stop_loss_value(self, d: np.ndarray) -> np.ndarray:
        """The lattice's own ``E[(X - d)+]`` (computed pmf only), finite ``d`` (not snapped)."""
        m = np.clip(lattice_index(d, self.o, self.h, self.n, snap=0.0) + 1, 0, self.n)
        xm = self.o + self.h * m
        return self.h * self.t[m] + (xm - d) * self.s[m]

    def stop_loss_range(self, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Certified ``(low, high)`` of the exact ``E[(X - d)+]`` at finite ``d``."""
        n, h = self.n, self.h
        m = np.clip(lattice_index(d, self.o, h, n, snap=0.0) + 1, 0, n)
        xm = self.o + h * m
        value = h * self.t[m] + (xm - d) * self.s[m]
        err = (xm - d) * self.Bt[m] + h * self.SB[np.minimum(m + 1, n + 1)]
        err = err + (8 * _U + 2 * (n - m + 2) * _UL) * value \
            + 4 * _U * (np.abs(xm) + np.abs(d)) * self.s[m]  # float x_m - d
        x_from = self._x_from_low()
        trunc_low = self.t_low * np.maximum(x_from - d, 0.0) if self.t_low > 0 else 0.0
        trunc_high = self._truncated_excess_high(d, x_from)
        low = np.maximum(value - err, 0.0) + trunc_low
        high = value + err + trunc_high
        return low, high

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
        """Stop-loss at every lattice point ``d = x_k``: own value and certified range."""
        if self._sl is None:
            d = self.o + self.h * np.arange(self.n)
            lo, hi = self.stop_loss_range(d)
            self._sl = (self.h * self.t[: self.n], lo, hi)
        return self._sl

    # -- TVaR -------------------------------------------------------------------------------
    def tvar_range(self, p: float) -> tuple[float, float]:
        """Certified ``(low, high)`` of the exact ``TVaR_p`` (module docstring)."""
        lo_k, hi_k = self.quantile_range(np.asarray(p))
        lo_k, hi_k = int(lo_k), int(hi_k)
        _, sl_lo, sl_hi = self._sl_arrays()
        x = self.o + self.h * np.arange(self.n)
        top = min(hi_k, self.n - 1)
        beyond = (self.o + self.h * self.n) - 4 * _U * (abs(self.o) + self.h * self.n)
        if lo_k >= self.n:  # the quantile lies beyond the grid for every model in range
            return beyond, float(np.min(x + sl_hi / (1 - p)))
        seg = slice(lo_k, top + 1)
        # float rounding of x_k = origin + step k and of x + SL / (1 - p): a few ulps
        slack = 6 * _U * (np.abs(x) + np.abs(self.o) + (sl_hi / (1 - p)))
        low = float(np.min(x[seg] + sl_lo[seg] / (1 - p) - slack[seg]))
        if hi_k >= self.n:
            low = min(low, beyond)
        high = float(np.min(x + sl_hi / (1 - p) + slack))
        return low, max(high, low)

    # -- moments ----------------------------------------------------------------------------
    def mean_range(self, value: float) -> tuple[float, float]:
        """Certified range of the exact mean around the lattice's own ``value``."""
        err = abs(self.o) * min(cum_bound(self.ledger), self.n * self.ledger.point) \
            + self.h * self._sb1()
        k = float_range(self.n)
        if self.o >= 0:  # every point non-negative: |x_k| = o + h k
            absum = self.o * float(np.sum(self.pmf)) + self.h * float(np.dot(k, self.pmf))
            absum *= 1 + 4 * _U
        else:
            absum = float(np.dot(np.abs(self.o + self.h * k), self.pmf))
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
        err = float(np.dot(inc, self.B[: self.n]))
        err += (self.n + 2) * _U * float(np.dot(w, pmf))
        trunc = self.ledger.truncated_moment2 if self.t_high > 0 else 0.0
        high = (value + err + trunc) * (1 + 2 * _U)
        return max(value - err, 0.0), high
