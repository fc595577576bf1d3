"""Compound distributions ``S = X_1 + ... + X_N`` (independent severities, independent of ``N``).

Two routes, one result:

* ``"fft"``: ``g = IFFT(P_N(FFT(f)))`` on a padded transform (``M >= 2 size``) with exponential
  tilting (Grubel & Hermesmeier, ASTIN Bulletin 29 (1999)) chosen from a Chernoff bound of the
  aliased mass (:mod:`polyconv.dist.transform`).  ``O(M log M)``; any counting law with a PGF.
* ``"recursion"``: Panjer's recursion (Panjer, ASTIN Bulletin 12 (1981))
  ``g_x = [1 / (1 - a f_0)] sum_{y=1..x} (a + b y / x) f_y g_{x-y}``, ``g_0 = P_N(f_0)``, for the
  ``(a, b, 0)`` class only.  ``O(size * len(f))``: the independent check.  Run in scaled arithmetic
  (``g_0`` kept as a logarithm, values rescaled by ``1e-280`` when they grow), so a large Poisson
  mean whose ``e^{-lambda}`` underflows needs no splitting.  Stable for ``a >= 0`` (Panjer & Wang,
  ASTIN Bulletin 23 (1993), from memory); for the binomial (``a < 0``) errors can grow, and the
  error ledger, computed by a running first-order bound, says by how much.

Cautions: a model output, not advice.  It assumes the claim count and the severities are
independent, the severities identically distributed; it inherits the discretisation of the
severity and truncates the result to a finite grid (``truncated_mass``).  Defer to local
regulation and qualified actuarial practice before using it for reserves, capital or prices.
"""

from __future__ import annotations

import math
import numbers
import warnings

import numpy as np

from . import accuracy
from .compound_tail import (
    count_tail_moment,
    tail_moment_bound,
    truncated_second_moment,
    wald_tail_moment,
)
from .counts import CountsLaw, classify
from .enclosure import Enclosure, EnclosureSums, pick
from .errors import TruncationWarning
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, untruncated
from .panjer import panjer_recursion
from .panjer_long import long_recursion
from .transform import check_transform_budget, size_for_tail, transform_compound

DEFAULT_TAIL = 1e-12
"""Default grid: the smallest with Chernoff-bounded mass beyond it below this tolerance."""

MAX_POINTS = 1 << 20
"""Memory budget of the default grid (points, ~100 MB of transforms); a heavier tail stops here
and is reported (ask for a ``goal`` or a ``size`` instead)."""

RECURSION_AUTO_MAX = 512
"""``method="auto"`` uses the recursion up to this many points (stable laws only)."""

_U = accuracy.UNIT_ROUNDOFF
_UL = float(np.finfo(np.longdouble).eps) / 2


def compound(counts, severity: Lattice, *, method: str = "auto", size: int | None = None,
             goal=None) -> Lattice:
    """Distribution of ``S = X_1 + ... + X_N`` on the severity's lattice.

    Parameters
    ----------
    counts : scipy.stats frozen discrete distribution
        Law of ``N``, e.g. ``scipy.stats.poisson(3.0)``, ``nbinom(n, p)``, ``binom(n, p)`` (Panjer
        class) or any other frozen discrete law (transform route only).
    severity : Lattice
        Law of each ``X_i``; its origin must be a non-negative whole multiple of its step.
    method : {"auto", "fft", "recursion"}
        ``"auto"``: the recursion for stable Panjer laws on at most ``RECURSION_AUTO_MAX``
        points, the transform otherwise.
    size : int, optional
        Points of the result, from 0.  Default: the smallest grid, at least as long as the
        severity lattice, whose Chernoff-bounded tail mass is below ``DEFAULT_TAIL``, capped at
        ``MAX_POINTS`` (a :class:`TruncationWarning` reports the cap).
    goal : polyconv.dist.Goal, optional
        Instead of ``size``: the shortest grid on which the measures of the goal have certified
        ranges within its tolerance (:func:`polyconv.dist.goals.compound_for_goal`).

    Returns
    -------
    Lattice
        Origin 0, the severity's step, ``size`` points.  ``truncated_mass`` is the mass not on
        the grid; ``errors`` (:func:`compound_ledger`) holds the route's rounding and aliasing
        bound (or the recursion's running bound) with the severity's errors carried through the
        counting law's PGF, where the truncated mass may lie (from the severity's own truncation
        point, or the grid's end) and its first moment from ``E[S] = E[N] E[X]``.

    Notes
    -----
    Assumes ``N, X_1, X_2, ...`` independent and the ``X_i`` identically distributed.  A model
    output, not advice: see :mod:`polyconv.dist`.

    Examples
    --------
    >>> from scipy import stats
    >>> from polyconv.dist import Lattice, compound
    >>> s = compound(stats.poisson(2.0), Lattice([0.0, 0.5, 0.5]))
    >>> round(s.mean(), 10)
    3.0
    """
    law = classify(counts)
    if not isinstance(severity, Lattice):
        raise TypeError(f"severity must be a Lattice; got {type(severity).__name__}")
    if method not in ("auto", "fft", "recursion"):
        raise ValueError(f"method must be 'auto', 'fft' or 'recursion'; got {method!r}")
    if goal is not None:  # goal-oriented grid (polyconv.dist.goals)
        if size is not None:
            raise ValueError("give either size or goal, not both")
        from .goals import compound_for_goal
        return compound_for_goal(counts, severity, goal, lambda s: compound(
            counts, severity, method=method, size=s))
    return compound_lattice(counts, law, severity, method, size)


def compound_lattice(counts, law: CountsLaw, severity: Lattice, method: str, size: int | None,
                     second_moment: bool = True, rebalance: bool = True) -> Lattice:
    """:func:`compound` after its argument checks (``law = classify(counts)``);
    ``second_moment=False`` skips the truncated second-moment bound (:func:`compound_ledger`),
    for callers that ask no standard deviation; ``rebalance=False`` skips the transform's
    second, re-tilted run (:func:`polyconv.dist.transform.transform_compound`), for callers
    whose tolerance is far above the rounding."""
    f = _severity_vector(severity)
    size = _grid_size(law, f, size)
    check_transform_budget(max(size, f.size), f"size={size} (compound points)")
    stable = law.ab is not None and law.ab[0] >= 0
    if method == "auto":
        method = "recursion" if stable and size <= RECURSION_AUTO_MAX else "fft"
    n_max = float(counts.support()[1]) if law.tail_mass == 0 else math.inf
    enc = None
    if method == "recursion":
        if law.ab is None:
            raise ValueError(f"method='recursion' needs a Panjer (a, b, 0) law (poisson, nbinom, "
                             f"binom with loc=0); counts is {law.name}: use method='fft'")
        enc = long_recursion(law, f, size, n_max)
        if enc is not None:  # longdouble recursion, rounded once (polyconv.dist.panjer_long)
            g = np.minimum(enc.center, 1).astype(float)
            if law.ab[0] < 0:  # unstable recursion (binomial): certified by the transform too
                enc = pick(enc, transform_compound(law.transform, f, size).enclosure)
            errs = EnclosureSums(g, enc).profile
        else:
            g, errs = panjer_recursion(law, f, size)
            g, errs, _ = _beyond_support(g, errs, f, n_max)
        r_point, r_l1 = float(np.max(errs)), float(np.sum(errs))
        r_cum = r_l1
    else:
        res = transform_compound(law.transform, f, size, rebalance=rebalance)
        if res.enclosure is not None:  # certified also by the longdouble recursion
            enc = pick(res.enclosure, long_recursion(law, f, size, n_max))
        g, r_point, r_l1 = res.pmf, res.trust_floor, min(res.l1_bound, size * res.trust_floor)
        if res.errors is not None:  # longdouble route: a-posteriori per-point bounds
            errs = res.errors
            r_cum = min(res.cumulative, r_l1)
        else:
            # per point: the tilted-domain bound (a Euclidean norm, so also per point) untilted
            # at each index, plus the aliasing bound (uniform in k)
            errs = res.rounding_floor * np.exp(res.theta * (np.arange(size) - (size - 1))) \
                + res.aliasing_floor
            r_cum = r_l1
        g, errs, enc = _beyond_support(g, errs, f, n_max, enc)
    g = np.minimum(g, 1.0)
    if enc is not None:
        r_point, r_l1, r_cum = EnclosureSums(g, enc).ledger_numbers()
        errs = np.minimum(errs, EnclosureSums(g, enc).profile)
    route_l2 = None
    if method != "recursion":
        # Euclidean norm of the route's error: the tilted-domain bound is one (untilted: times
        # at most e^{theta (size - 1)}); the aliased mass has L1 (so L2) at most its bound
        route_l2 = res.l2_bound
    ledger = compound_ledger(counts, law, severity, f, g, r_point, r_l1, errs, second_moment,
                             route_l2, r_cum, None if enc is None else
                             float(EnclosureSums(g, enc).ramp[0]))
    profile, carried = _profile(errs, severity, counts, law)
    if method != "recursion" and res.errors is None and res.theta * (size - 1) < 1:
        profile = None  # nearly uniform: the Euclidean bound l2 beats its running sums
    l2 = None
    if route_l2 is not None:  # plus the severity's carried errors, ||e||_2^2 <= ||e||_inf ||e||_1
        l2 = (route_l2 + math.sqrt(carried * max(ledger.l1, 0.0))) * (1 + 8 * _U)
    if enc is not None and carried > 0:  # the enclosure is of the computed severity's compound
        enc = Enclosure(enc.center, enc.radius + carried * (1 + 4 * _U))
    return Lattice._make(g, severity.step, 0.0, ledger, profile, l2, enc)


def _beyond_support(g: np.ndarray, errs: np.ndarray, f: np.ndarray, n_max: float, enc=None):
    """A count bounded by ``n_max`` and a severity vector whose last positive entry is at
    ``top``: the compound of that vector is exactly 0 beyond ``n_max top`` (there the
    recursion, unstable for ``a < 0``, only grows noise, a transform its rounding); the pmf,
    its bounds and an enclosure are set to 0 there."""
    nz = np.flatnonzero(f)
    if not math.isfinite(n_max) or not nz.size:
        return g, errs, enc
    last = int(n_max) * int(nz[-1])
    if last + 1 < g.size:
        g, errs = g.copy(), errs.copy()
        g[last + 1:] = 0.0
        errs[last + 1:] = 0.0
        if enc is not None:
            center, radius = enc.center.copy(), enc.radius.copy()
            center[last + 1:] = 0
            radius[last + 1:] = 0.0
            enc = Enclosure(center, radius)
    return g, errs, enc


def _profile(errs: np.ndarray, severity: Lattice, counts, law: CountsLaw
             ) -> tuple[np.ndarray, float]:
    """Per-point error bounds of a compound: the route's own (``errs``) plus the severity's
    carried per-point error ``d P_N'(1 + l)`` (:func:`compound_ledger`), rounded up; and that
    carried per-point error."""
    e = severity.errors
    carried = 0.0
    if e.l1 > 0:
        delta = max(e.l1, 1e-8)
        slope = (math.expm1(_log_pgf_above_one(law, 2 * delta))
                 - math.expm1(_log_pgf_above_one(law, delta))) / delta * (1 + 1e-6)
        carried = e.point * max(slope, float(counts.mean()))
    return np.asarray(errs, dtype=float) * (1 + 4 * _U) + carried, carried


def _grid_size(law: CountsLaw, f: np.ndarray, size: int | None) -> int:
    """Points of the result: the user's ``size``, or the default grid (tail tolerance)."""
    if size is None:
        size = size_for_tail(law.transform, f, DEFAULT_TAIL, f.size, MAX_POINTS)
        if size >= MAX_POINTS:
            warnings.warn(f"compound grid capped at {MAX_POINTS} points before the tail mass "
                          f"fell below {DEFAULT_TAIL}; see truncated_mass", TruncationWarning,
                          stacklevel=3)
    elif isinstance(size, bool) or not isinstance(size, numbers.Integral) or size < 1:
        raise ValueError(f"size must be a positive integer; got {size!r}")
    return int(size)


def _log_pgf_above_one(law: CountsLaw, delta: float) -> float:
    """``log P_N(1 + delta)`` (``inf`` where the series diverges)."""
    return law.transform.log_pgf_real(math.log1p(delta))


def compound_ledger(counts, law: CountsLaw, severity: Lattice, f: np.ndarray, g: np.ndarray,
                    r_point: float, r_l1: float, errs: np.ndarray, second_moment: bool = True,
                    route_l2: float | None = None, r_cum: float | None = None,
                    enc_ramp: float | None = None) -> ErrorLedger:
    """Error ledger of a compound computed from the severity vector ``f`` (route rounding
    ``r_point``, ``r_l1``).

    * Severity error ``e`` (L1 ``l``, per point ``d``): ``||sum_n P(N=n) (f^{*n} - q^{*n})||_1
      <= sum_n P(N=n) ((1 + l)^n - 1) = P_N(1 + l) - 1`` (telescoping, each factor of L1 norm
      at most ``1 + l``), per point ``<= d P_N'(1 + l)`` and in cumulative sums
      ``<= K P_N'(1 + l)`` (``K`` the severity's cumulative bound), with ``P_N'(1 + l) <= (P_N(1 + 2
      delta) - P_N(1 + delta)) / delta`` for ``delta >= l`` (a PGF is convex on the reals).
    * Truncated part: mass of the severity's truncated part carried by any claim (from the
      severity's ``truncated_from``), mass beyond the grid (from ``len(g)``) and, for a generic
      counting law, the count tail dropped (anywhere).  Its first moment is at most
      ``E[S] - sum_{k < size} x_k q_k`` with ``E[S] = E[N] E[X]`` (Wald's identity), ``E[X]``
      at most the severity's certified mean bound: this is what keeps TVaR and stop-loss finite
      on heavy tails.
    * ``route_l2``: a bound of the route's error in Euclidean norm (transform routes); the
      on-grid moment's error ``sum_k x_k |e_k|`` is then also at most ``||x||_2 route_l2``
      (Cauchy-Schwarz), far below the per-point sum on long grids.
    * ``second_moment=False`` leaves the truncated part's second moment unknown (``inf``: the
      standard deviation is then refused), for callers that need no std.
    * ``r_cum``: a bound of the route's cumulative (signed) error sums (default ``r_l1``);
      ``enc_ramp``: a bound of ``|sum_k k (g_k - q_k)|`` from an enclosure (the truncated
      moment is then also computed in longdouble, :func:`polyconv.dist.compound_tail.
      wald_tail_moment`).
    """
    e = severity.errors
    h = severity.step
    size = g.size
    mean_n = float(counts.mean())
    if e.l1 > 0:
        delta = max(e.l1, 1e-8)
        log1 = _log_pgf_above_one(law, e.l1)
        l1_in = math.expm1(log1) if math.isfinite(log1) else math.inf
        slope = (math.expm1(_log_pgf_above_one(law, 2 * delta))
                 - math.expm1(_log_pgf_above_one(law, delta))) / delta * (1 + 1e-6)
        point_in = e.point * max(slope, mean_n)
        cum_in = cum_bound(e) * max(slope, mean_n)
    else:
        l1_in = point_in = cum_in = 0.0
    l1 = min(r_l1 + l1_in, 2.0)
    point = min(r_point + point_in, l1)
    cum = min((r_l1 if r_cum is None else r_cum) + cum_in, l1)
    k0 = f.size - len(severity)
    froms = [size]
    if not untruncated(e):
        froms.append(k0 + e.truncated_from)
    if law.tail_mass > 0:
        froms.append(0)
    tf = int(min(froms))
    br = severity._br()
    if _fits_the_grid(counts, law, severity, f, size):  # nothing of S lies beyond the grid
        return ErrorLedger(point, l1, 0.0, size, 0.0, cum, 0.0)
    # first moment of the truncated part: E[S] - (represented on-grid moment)
    sev_mean_high = br.mean_range(severity._mean())[1]
    if not math.isfinite(sev_mean_high):
        moment = math.inf
    else:
        k = accuracy.float_range(size)
        total = mean_n * sev_mean_high * (1 + 4 * _U)
        if law.tail_mass > 0:
            total += count_tail_moment(counts, law) * sev_mean_high
        on_grid = h * accuracy.dot(k, g)  # a float dot: within (size + 2) u (Higham 3.1)
        rnd = (size + 2) * _U
        if rnd * on_grid > 1e-3 * max(total - on_grid, 0.0):
            # the float rounding would dominate the bound (little truncated): longdouble sum
            # of non-negative terms (within (size + 2) u_long), rounded once (u)
            on_grid = h * float(np.sum(k.astype(np.longdouble) * g.astype(np.longdouble)))
            rnd = (size + 2) * _UL
        # sum_k x_k |e_k|: the route's per-point bounds; the severity's errors carried through
        # by summation by parts on their cumulative bound
        route = accuracy.dot(k, errs)
        if route_l2 is not None:  # ||k||_2^2 = (s - 1) s (2 s - 1) / 6
            route = min(route, math.sqrt((size - 1) * size * (2 * size - 1) / 6) * route_l2
                        * (1 + 8 * _U))
        err = h * route + h * _ramp_sum(min(l1_in, 2 * cum_in), point_in, size)
        err = err * (1 + 4 * _U) + (rnd + 4 * _U) * on_grid
        moment = max(total - (on_grid - err), 1e-300)
        if untruncated(e) and e.l1 == 0 and law.tail_mass == 0:
            moment = min(moment, tail_moment_bound(law, f, h, size))
            if enc_ramp is not None:
                moment = min(moment, wald_tail_moment(law, f, g, enc_ramp, h))
    moment2 = math.inf if not second_moment else truncated_second_moment(
        counts, law, severity, br, g, errs, h, (l1_in, cum_in, point_in), sev_mean_high)
    return ErrorLedger(point, l1, 0.0, tf, moment, cum, moment2)


def _fits_the_grid(counts, law: CountsLaw, severity: Lattice, f: np.ndarray, size: int) -> bool:
    """True when ``S`` surely lies on the grid: a count bounded by ``n_max`` (binomial), its
    whole law summed (no dropped tail), a severity with nothing truncated and its last point
    at index ``L``, and ``n_max L < size``."""
    if law.tail_mass > 0 or not untruncated(severity.errors):
        return False
    n_max = float(counts.support()[1])
    if not math.isfinite(n_max):
        return False
    nz = np.flatnonzero(f)
    # where the computed severity is 0 the exact one is 0 too only if it has no error
    top = f.size - 1 if severity.errors.l1 > 0 else (int(nz[-1]) if nz.size else 0)
    return n_max * top < size


def _ramp_sum(cap: float, slope: float, size: int) -> float:
    """``sum_{j=1}^{size-1} min(cap, (size - j) slope)`` in closed form (``m slope`` for
    ``m = size - j`` up to ``cap / slope``, then ``cap``), rounded up."""
    top = size - 1
    if top <= 0 or cap <= 0 or slope <= 0:
        return 0.0
    ratio = cap / slope
    q = top if not ratio < top else int(ratio)
    return (slope * q * (q + 1) / 2 + (top - q) * cap) * (1 + 8 * _U)


def _severity_vector(severity: Lattice) -> np.ndarray:
    shift = severity.origin / severity.step
    k = round(shift)
    if k < 0 or abs(shift - k) > 1e-9 * max(1.0, abs(shift)):
        raise ValueError("severity origin must be a non-negative whole multiple of its step "
                         f"(got origin {severity.origin!r}, step {severity.step!r}); shift it "
                         "with severity + c and shift the compound back per claim count")
    f = np.zeros(k + severity.pmf.size)
    f[k:] = severity.pmf
    return f
