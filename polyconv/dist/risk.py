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
* a quantile bracket: ``[min{k: F_high(k) >= p}, min{k: F_low(k) >= p}]``.

Stop-loss, TVaR and moment ranges: :mod:`polyconv.dist.expectation_bounds` (a mixin of
:class:`Bracketer`).

Float rounding of the sums themselves is added (recursive summation: ``gamma_m`` times the sum,
Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2).

Caution: these are model outputs, not advice.  They inherit every assumption of the Lattice they are
computed from (independence, discretisation, truncation); for reserves, capital or prices defer to
local regulation and qualified actuarial practice.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np

from .accuracy import UNIT_ROUNDOFF
from .arguments import SNAP, check_level, lattice_index, real_value
from .enclosure import Enclosure, EnclosureSums
from .expectation_bounds import SCALAR_MIN, UNIT_ROUNDOFF_LONG, ExpectationBounds
from .ledger import ErrorLedger, cum_bound, t_bounds, untruncated

TRUNCATION_LEVEL = 1e-9
"""Truncated mass, relative to the probability a measure rests on, above which it warns."""

DEFAULT_RTOL = 1e-3
"""Relative tolerance of TVaR, stop-loss, mean and std: refused (``nan`` with a warning) when the
certified range is wider than ``DEFAULT_RTOL * max(|value|, step)`` (the step: nothing finer can
be resolved on the lattice)."""

PROBABILITY_RTOL = 1.0
"""cdf and sf are flagged when the certified range is wider than the value itself (not one
significant digit)."""

__all__ = ["SNAP", "check_level", "lattice_index", "real_value", "Bracketer", "tail_sums"]
"""The argument helpers of :mod:`polyconv.dist.arguments` are imported here for the query
modules that reach them as ``risk.real_value`` and so on."""

_U = UNIT_ROUNDOFF
_UL = UNIT_ROUNDOFF_LONG

WINDOW_MIN = SCALAR_MIN
"""Lattices of at least this many points answer one quantile bracket from the cdf bounds on a
window around it (:meth:`Bracketer._window`) instead of the whole arrays."""


def tail_sums(pmf: np.ndarray, long: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """``S_m = sum_{k>=m} p_k`` and ``T_m = sum_{k>=m} (k - m) p_k`` for ``m = 0..n``.

    Built from the right by ``T_m = T_{m+1} + S_{m+1}``: sums of non-negative terms, no
    cancellation (so far tails keep their relative accuracy).
    Sums run in longdouble and are rounded once to float64 (so each ``S_m`` is within
    ``u + (n - m) u_long`` of the exact sum, relative; ``T_m`` within ``u + 2 n u_long``).
    ``long=True`` returns the longdouble sums (without the final ``u``).
    """
    n = pmf.size
    s = np.zeros(n + 1, dtype=np.longdouble)
    s[:n] = np.cumsum(np.asarray(pmf, dtype=np.longdouble)[::-1])[::-1]
    t = np.zeros(n + 1, dtype=np.longdouble)
    t[:n] = np.cumsum(s[1:][::-1])[::-1]
    return (s, t) if long else (s.astype(float), t.astype(float))


def _pair_entry(pair: str, i: int, doc: str) -> property:
    """Entry ``i`` of the cached pair ``pair`` of a :class:`Bracketer` as a read-only
    property."""
    return property(lambda self: getattr(self, pair)[i], doc=doc)


class Bracketer(ExpectationBounds):
    """Certified bounds of every query on one Lattice (arrays built once, ``O(n)``).

    Parameters
    ----------
    pmf : numpy.ndarray
        Computed probabilities (non-negative).
    step, origin : float
        The lattice.
    ledger : ErrorLedger
        Its error ledger.
    profile : numpy.ndarray, optional
        Per-point bounds ``|e_k| <= profile_k`` when the computation knows them; the running
        sums of the profile bound the cumulative errors where they beat ``(k + 1) point`` and
        ``l1`` (in the tail of a compound, where the pmf and its errors decay).
    l2 : float, optional
        A bound of the error's Euclidean norm ``||e||_2`` when the computation knows one
        (transform routes bound exactly that): by Cauchy-Schwarz, ``|sum_k w_k e_k| <=
        ||w||_2 l2`` for every weight ``w`` (cumulative sums, stop-loss excesses), a factor up
        to ``sqrt(n)`` below the per-point route.
    enclosure : Enclosure, optional
        A componentwise enclosure of the exact model (:mod:`polyconv.dist.enclosure`): the
        cumulative, tail and stop-loss sums of the error are then also bounded by their signed
        sums on the known part ``pmf - center`` plus the radii's sums.
    """

    def __init__(self, pmf: np.ndarray, step: float, origin: float, ledger: ErrorLedger,
                 profile: np.ndarray | None = None, l2: float | None = None,
                 enclosure: Enclosure | None = None):
        n = pmf.size
        self.n, self.h, self.o, self.ledger, self.pmf = n, step, origin, ledger, pmf
        self.enc = None if enclosure is None else EnclosureSums(pmf, enclosure)
        if self.enc is not None:
            profile = self.enc.profile if profile is None else \
                np.minimum(profile, self.enc.profile)
        self.profile = profile
        self.l2 = l2
        self.tf = ledger.truncated_from
        self._sl = None

    # -- arrays, each built on first use (a stop-loss needs no cdf arrays, a cdf no tail sums)
    @cached_property
    def cum(self) -> np.ndarray:
        """Computed cdf at each point (longdouble cumulative sum, rounded once)."""
        return np.cumsum(np.asarray(self.pmf, dtype=np.longdouble)).astype(float)

    @cached_property
    def _tails_long(self) -> tuple[np.ndarray, np.ndarray]:
        return tail_sums(self.pmf, long=True)

    @cached_property
    def _tails(self) -> tuple[np.ndarray, np.ndarray]:
        s, t = self._tails_long
        return s.astype(float), t.astype(float)

    @property
    def t_long(self) -> np.ndarray:
        """``T_m`` in longdouble (before rounding to float)."""
        return self._tails_long[1]

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
        """Computed mass on the lattice (one longdouble sum, rounded once; the tail sums give
        the same value when they are built anyway)."""
        if "_tails_long" in self.__dict__:
            return float(self.s[0])
        return float(np.sum(np.asarray(self.pmf, dtype=np.longdouble)))

    @cached_property
    def _t_bounds(self) -> tuple[float, float]:
        if untruncated(self.ledger):
            return 0.0, 0.0
        low, high = t_bounds(self.ledger, self.mass, self.n, _UL)  # a longdouble sum
        x_from = self._x_from_low()
        m = self.ledger.truncated_moment
        if x_from > 0 and math.isfinite(m):  # Markov: the truncated part lies at >= x_from
            high = max(min(high, m / x_from * (1 + 4 * _U)), low)
        return low, high

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
        return self._c_on(0, self.n)

    def _c_on(self, a: int, b: int) -> np.ndarray:
        """:attr:`C` at ``k = a..b-1``."""
        k = np.arange(a, b)
        out = np.minimum(cum_bound(self.ledger), (k + 1) * self.ledger.point)
        if self.profile is not None:  # float running sum of non-negative terms: (k + 2) u
            run = np.cumsum(self.profile[a:b])
            if a > 0:
                run += float(np.sum(self.profile[:a]))
            out = np.minimum(out, run * (1 + (k + 2) * _U))
        if self.l2 is not None:
            out = np.minimum(out, np.sqrt(k + 1.0) * self.l2 * (1 + 4 * _U))
        if self.enc is not None:
            out = np.minimum(out, self.enc.cum[a:b])
        return out

    @cached_property
    def B(self) -> np.ndarray:  # noqa: N802
        """Bound of ``sum_{k >= j} |e_k|``, ``j = 0..n``."""
        return self._b_on(0, self.n + 1)

    def _b_on(self, a: int, b: int) -> np.ndarray:
        """:attr:`B` at ``j = a..b-1`` (``b <= n + 1``)."""
        n = self.n
        j = np.arange(a, b)
        out = np.minimum(self.ledger.l1, (n - j) * self.ledger.point)
        if self.profile is not None:
            inner = np.zeros(b - a)
            top = min(b, n)
            inner[: top - a] = np.cumsum(self.profile[a:top][::-1])[::-1]
            if top < n:
                inner[: top - a] += float(np.sum(self.profile[top:]))
            out = np.minimum(out, inner * (1 + (n - j + 2) * _U))
        if self.l2 is not None:
            out = np.minimum(out, np.sqrt(n - j + 0.0) * self.l2 * (1 + 4 * _U))
        return out

    @cached_property
    def Bt(self) -> np.ndarray:  # noqa: N802
        """Bound of ``|sum_{k >= j} e_k|`` (signed sums), ``j = 0..n``."""
        out = np.minimum(self.B, 2 * cum_bound(self.ledger))
        return out if self.enc is None else np.minimum(out, self.enc.tail)

    @cached_property
    def SB(self) -> np.ndarray:  # noqa: N802
        """``SB[j] = sum_{i >= j} Bt_i`` (``n + 2`` entries)."""
        sb = np.zeros(self.n + 2)
        sb[: self.n + 1] = np.cumsum(self.Bt[::-1])[::-1]
        return sb

    @cached_property
    def _route_bounds(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(cum_low, cum_high, tail_low, tail_high)``: the cdf from the left and the sf from
        the right, each with its own error bound."""
        return self._route_on(0, self.n)

    def _route_on(self, a: int, b: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """:attr:`_route_bounds` at ``k = a..b-1``; a window builds its tail sums from the
        suffix sum beyond it (longdouble, so within the same ``(n - k + 2) u_long``)."""
        n = self.n
        k = np.arange(a, b)
        cum = self.cum[a:b]
        rc = (_U + (k + 2) * _UL) * cum + 2 * _U
        if a == 0 and b == n:
            tail, bt = self.s[1:], self.Bt[1:]
        else:
            pl = np.asarray(self.pmf, dtype=np.longdouble)
            tail_l = np.zeros(b - a, dtype=np.longdouble)
            tail_l[:-1] = np.cumsum(pl[a + 1: b][::-1])[::-1]
            tail = (tail_l + np.sum(pl[b:])).astype(float)
            bt = np.minimum(self._b_on(a + 1, b + 1), 2 * cum_bound(self.ledger))
            if self.enc is not None:
                bt = np.minimum(bt, self.enc.tail[a + 1: b + 1])
        rs = (_U + (n - k + 2) * _UL) * tail
        maybe_below = k >= self.tf
        c = self.C[a:b] if "C" in self.__dict__ else self._c_on(a, b)
        # each end is a sum of three or four floats: its own rounding (at most u of the partial
        # sums per operation, all within the value's magnitude) is charged by 4u of the value,
        # outward (bounds within an ulp of the value need it)
        cum_low = cum - c - rc
        cum_low -= 4 * _U * np.abs(cum_low)
        cum_high = cum + c + rc
        if self.t_high > 0:
            cum_high[maybe_below] += self.t_high
        cum_high *= 1 + 4 * _U
        tail_low = tail - bt - rs
        tail_low = np.maximum(tail_low - 4 * _U * np.abs(tail_low), 0.0)
        if self.t_low > 0:
            tail_low[~maybe_below] += self.t_low
            tail_low *= 1 - 4 * _U
        tail_high = (tail + bt + rs + self.t_high) * (1 + 4 * _U)
        return cum_low, cum_high, tail_low, tail_high

    @staticmethod
    def _pair(cum_low, cum_high, tail_low, tail_high) -> tuple[np.ndarray, np.ndarray]:
        """``(F_low, F_high)``: the tighter end of both routes."""
        return (np.clip(np.maximum(cum_low, 1.0 - tail_high - 2 * _U), 0.0, 1.0),
                np.clip(np.minimum(cum_high, 1.0 - tail_low + 2 * _U), 0.0, 1.0))

    @cached_property
    def _cdf_pair(self) -> tuple[np.ndarray, np.ndarray]:
        """``(F_low, F_high)`` (built without the sf pair, which a quantile does not need)."""
        return self._pair(*self._route_bounds)

    @cached_property
    def _sf_pair(self) -> tuple[np.ndarray, np.ndarray]:
        """``(S_low, S_high)``."""
        cum_low, cum_high, tail_low, tail_high = self._route_bounds
        return (np.clip(np.maximum(tail_low, 1.0 - cum_high - 2 * _U), 0.0, 1.0),
                np.clip(np.minimum(tail_high, 1.0 - cum_low + 2 * _U), 0.0, 1.0))

    F_low = _pair_entry("_cdf_pair", 0, "Lower bounds of the cdf at each index.")
    F_high = _pair_entry("_cdf_pair", 1, "Upper bounds of the cdf at each index.")
    S_low = _pair_entry("_sf_pair", 0, "Lower bounds of the survival function at each index.")
    S_high = _pair_entry("_sf_pair", 1, "Upper bounds of the survival function at each index.")

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
        window = self._window(p)
        if window is not None:
            lo, hi = window
        else:
            lo = np.searchsorted(self._run_high, p, side="left")
            hi = np.searchsorted(self._run_low, p, side="left")
        if self.ledger.point == 0 and self.ledger.l1 == 0:
            lo, hi = self._exact_ties(np.asarray(p, dtype=float), lo, hi)
        return lo, hi

    def _window(self, p) -> tuple[int, int] | None:
        """The bracket of one level from the cdf bounds on a window of a long lattice (None:
        use the whole arrays).  ``F_high(k) <= cum(k) + K + r + T`` and ``F_low(k) >=
        cum(k) - K - r`` (``K`` the cumulative bound, ``r`` the largest rounding term, ``T``
        the truncated mass) are non-decreasing in ``k``, so both first crossings of ``p`` lie
        between the crossings of these envelopes; inside, the bounds are the same as on the
        whole arrays."""
        p = np.asarray(p, dtype=float)
        n = self.n
        if p.ndim != 0 or n < WINDOW_MIN or "_cdf_pair" in self.__dict__:
            return None
        r = (_U + (n + 2) * _UL) * 2.0 + 2 * _U
        k_all = cum_bound(self.ledger)
        a = int(np.searchsorted(self.cum, float(p) - k_all - r - self.t_high, side="left"))
        b = int(np.searchsorted(self.cum, float(p) + k_all + r, side="left"))
        a, b = max(a - 1, 0), min(b + 1, n)
        if b - a > n // 4:
            return None
        f_low, f_high = self._pair(*self._route_on(a, b))
        lo, hi = np.flatnonzero(f_high >= p), np.flatnonzero(f_low >= p)
        return (a + int(lo[0]) if lo.size else n), (a + int(hi[0]) if hi.size else n)

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
