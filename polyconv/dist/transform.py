"""Transform-domain evaluation ``g = IFFT(P(FFT(f)))`` with exponential tilting.

For a counting law with probability generating function ``P`` and a severity pmf ``f`` on the
integers, the compound pmf is ``g = sum_n P(N = n) f^{*n}``, whose generating function is
``P(F(z))``.  Evaluating it on the ``M``-th roots of unity gives the length-``M`` circular
(aliased) version of ``g`` (common practice, no source; e.g. Klugman, Panjer & Willmot, *Loss
Models*, ch. 9).  Exponential tilting (Grubel & Hermesmeier, ASTIN Bulletin 29 (1999)) transforms
``f_j e^{-theta j}`` instead and multiplies the result by ``e^{theta k}``: aliased mass shrinks by
``e^{-theta M}``, round-off grows by ``e^{theta k}``.  Padding the transform to ``M >= 2 size``
keeps that growth moderate (DESIGN.md section 6, measured).

``nfold`` is the same computation with ``P(z) = z^n`` and no aliasing (the transform covers the
full support).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..numerics import transforms as tf
from . import accuracy, long_route
from .enclosure import Enclosure

TRANSFORM_BYTES_PER_POINT = 80
"""Peak bytes per result point of a padded transform route (``M = 2 size``: the tilted input and
the inverse output, 8 bytes per transform point each, and two complex half spectra, 16 bytes per
transform point together), plus the result and its error arrays; checked against the memory
budget (:mod:`polyconv.budget`) before allocating."""


def check_transform_budget(points: int, what: str) -> None:
    """Refuse (:class:`polyconv.budget.MemoryBudgetError`, naming ``what``) a transform route on
    ``points`` result points that does not fit the memory budget."""
    from ..numerics import budget

    budget.check_allocation(TRANSFORM_BYTES_PER_POINT * float(points), what)


@dataclass(frozen=True)
class TransformLaw:
    """What the transform route needs from a counting law.

    Attributes
    ----------
    pgf : callable
        ``P(z)`` on a complex array with ``|z| <= 1``.
    ratio : callable or None
        ``r(z) = P'(z) / P(z)`` (for the Lipschitz factor of the error bound), or None to use
        ``mean`` as the bound of ``|P'|``.
    log_pgf_real : callable
        ``s -> log P(e^s)`` for real ``s >= 0`` (``inf`` where the series diverges), for Chernoff
        tail bounds.
    mean : float
        ``E[N]``.
    pgf_rel : float
        Relative rounding of evaluating ``P`` (in units of the roundoff ``u``).
    pgf_abs : float
        Absolute rounding of evaluating ``P`` on the unit disc (in units of ``u``).
    long_ok : bool
        ``pgf`` keeps a longdouble argument's precision.
    """

    pgf: Callable[[np.ndarray], np.ndarray]
    ratio: Callable[[np.ndarray], np.ndarray] | None
    log_pgf_real: Callable[[float], float]
    mean: float
    pgf_rel: float = 4.0
    pgf_abs: float = 0.0
    long_ok: bool = False
    """True when ``pgf`` evaluates in the precision of its argument (constants included), so a
    longdouble route may call it (:mod:`polyconv.dist.long_route`)."""


def power_law(n: int) -> TransformLaw:
    """The degenerate count ``N = n``: ``P(z) = z^n`` (binary powering, relative error about
    ``n sqrt(5) u``: the relative errors of the factors add)."""

    def pgf(z):
        return integer_power(z, n)

    return TransformLaw(pgf, lambda z: n / np.where(z == 0, 1.0, z), lambda s: n * s, float(n),
                        pgf_rel=n * math.sqrt(5.0) + 2.0, long_ok=True)


def integer_power(z: np.ndarray, n: int) -> np.ndarray:
    """``z**n`` elementwise for an integer ``n >= 0`` by repeated squaring (no log/exp, so no
    branch-cut or overflow surprises for complex ``z``)."""
    result = np.ones_like(z)
    base = z.copy()
    while n:
        if n & 1:
            result *= base
        n >>= 1
        if n:
            base *= base
    return result


def reduced_severity(f: np.ndarray, max_len: int = 1024) -> tuple[np.ndarray, np.ndarray]:
    """Severity mass moved to block upper ends: ``(indices, masses)`` with at most ``max_len``
    blocks.  Stochastically larger than ``f``, so its moment generating function bounds that of
    ``f`` from above for ``t >= 0`` (keeps Chernoff bounds rigorous while cheap)."""
    n = f.size
    if n <= max_len:
        idx = np.nonzero(f)[0]
        return idx.astype(float), f[idx]
    width = -(-n // max_len)
    padded = np.zeros(width * (-(-n // width)))
    padded[:n] = f
    blocks = padded.reshape(-1, width).sum(axis=1)
    ends = np.minimum(np.arange(blocks.size) * width + width - 1, n - 1).astype(float)
    keep = blocks > 0
    return ends[keep], blocks[keep]


def log_chernoff_tail(law: TransformLaw, sev: tuple[np.ndarray, np.ndarray], x: float,
                      refine: bool = True) -> float:
    """log of an upper bound of ``P(S >= x)`` (Chernoff: ``min_t e^{-t x} P(M_X(t))``).

    ``t`` runs over a log-spaced grid, refined once around its best point; any ``t`` gives a
    valid bound, the grid only affects tightness (``refine=False``: the first grid only).
    Returns 0.0 (the trivial bound) when no ``t`` helps.
    """
    idx, mass = sev
    if x <= 0 or idx.size == 0:
        return 0.0
    logm = np.log(mass)
    best = 0.0
    taus = TAUS
    for _ in range(2 if refine else 1):  # a coarse log-grid of t, then a finer one
        vals = _chernoff_values(law, logm, idx, taus / x, x)
        i = int(np.argmin(vals))
        best = min(best, float(vals[i]))
        lo, hi = taus[max(i - 1, 0)], taus[min(i + 1, taus.size - 1)]
        taus = np.geomspace(lo, hi, TAUS.size)
    return best


def _chernoff_values(law: TransformLaw, logm, idx, t: np.ndarray, x: float) -> np.ndarray:
    """``log P(M_X(t)) - t x`` for each ``t`` (one matrix, row-wise log-sum-exp)."""
    a = logm[None, :] + t[:, None] * idx[None, :]
    top = np.max(a, axis=1)
    s = top + np.log(np.sum(np.exp(a - top[:, None]), axis=1))
    return np.array([law.log_pgf_real(float(sk)) for sk in s]) - t * x


TAUS = np.geomspace(1e-3, 1e3, 13)
"""First log-grid of the Chernoff parameter ``t x`` tried by :func:`log_chernoff_tail` (then
refined around its best point; any ``t`` gives a valid bound, the grid only affects
tightness)."""


SPLIT_FRACTIONS = (0.9, 0.7, 0.5, 0.35, 0.2, 0.1)
"""Caps ``c = fraction * x`` tried by :func:`log_split_tail`."""


def log_split_tail(law: TransformLaw, sev: tuple[np.ndarray, np.ndarray], x: float) -> float:
    """log of an upper bound of ``P(S >= x)`` that stays useful for heavy tails.

    If every claim is at most ``c`` then ``S = sum min(X_i, c)``, so (union bound)
    ``P(S >= x) <= E[N] P(X > c) + P(sum min(X_i, c) >= x)``; the second term has a Chernoff bound
    (:func:`log_chernoff_tail`) even when ``X`` has none, the capped severity being bounded.  On
    the reduced severity (masses at block ends) ``P(X > c) <= `` the mass of blocks ending above
    ``c``, and capping the block ends keeps the stochastic order, so the bound stays rigorous.
    The best of the caps in :data:`SPLIT_FRACTIONS` is returned (0.0 when none helps).
    """
    idx, mass = sev
    if x <= 0 or idx.size == 0:
        return 0.0
    order = np.argsort(idx)
    idx, mass = idx[order], mass[order]
    above = np.cumsum(mass[::-1])[::-1]  # mass of blocks at index >= position
    def combined(jump, log_rest):
        if jump == 0.0:
            return log_rest
        if jump + math.exp(log_rest) < 1.0:
            return math.log(jump) + math.log1p(math.exp(log_rest) / jump)
        return 0.0

    best, best_cap = 0.0, None
    for frac in SPLIT_FRACTIONS:  # each cap on the first t-grid, the best one refined
        c = frac * x
        k = int(np.searchsorted(idx, c, side="right"))
        jump = law.mean * (float(above[k]) if k < idx.size else 0.0)
        if jump >= 1.0:
            continue
        capped = (np.minimum(idx, c), mass)
        val = combined(jump, log_chernoff_tail(law, capped, x, refine=False))
        if val < best:
            best, best_cap = val, (jump, capped)
    if best_cap is not None:
        jump, capped = best_cap
        best = min(best, combined(jump, log_chernoff_tail(law, capped, x)))
    return best


def log_tail_bound(law: TransformLaw, sev: tuple[np.ndarray, np.ndarray], x: float) -> float:
    """log of an upper bound of ``P(S >= x)``: the better of :func:`log_chernoff_tail` and
    :func:`log_split_tail`."""
    return min(log_chernoff_tail(law, sev, x), log_split_tail(law, sev, x))


def size_for_tail(law: TransformLaw, f: np.ndarray, tol: float, minimum: int, cap: int) -> int:
    """Smallest grid length ``s`` in ``[minimum, cap]`` with ``P(S >= s) <= tol`` by
    :func:`log_tail_bound` (``cap`` when none is)."""
    sev = reduced_severity(f)
    logtol = math.log(tol)
    if log_tail_bound(law, sev, minimum) <= logtol:
        return minimum
    if log_tail_bound(law, sev, cap) > logtol:
        return cap
    lo, hi = minimum, cap
    while hi - lo > max(1, lo // 256):
        mid = (lo + hi) // 2
        if log_tail_bound(law, sev, mid) <= logtol:
            hi = mid
        else:
            lo = mid
    return hi


@dataclass(frozen=True)
class TransformResult:
    """Output of :func:`transform_compound`: the pmf on ``[0, size)``, its error bound and the
    parameters used."""

    pmf: np.ndarray
    trust_floor: float
    n_fft: int
    theta: float
    rounding_floor: float
    aliasing_floor: float
    l1_bound: float = float("inf")
    """Bound of the L1 norm of the error over the ``size`` entries (see
    :func:`polyconv.dist.accuracy.untilted_l1`)."""
    log_alias_mass: float = 0.0
    """log of the bound of ``P(S >= n_fft)`` used."""
    errors: np.ndarray | None = None
    """Per-point bounds of the returned pmf's error (the longdouble route,
    :mod:`polyconv.dist.long_route`), or None (float route: ``rounding_floor`` untilted at
    each index plus ``aliasing_floor``)."""
    cumulative: float | None = None
    """Bound of every cumulative sum of the error (longdouble route), or None (``l1_bound``)."""
    l2_bound: float = float("inf")
    """Bound of the error's Euclidean norm over the ``size`` entries."""
    enclosure: object = None
    """Longdouble route: :class:`polyconv.dist.enclosure.Enclosure` of the exact model (the
    longdouble result, radius its a-priori bound plus the aliasing bound), else None."""


def transform_compound(law: TransformLaw, f: np.ndarray, size: int, *, n_fft: int | None = None,
                       theta: float | None = None, log_alias_mass: float | None = None,
                       rebalance: bool = True) -> TransformResult:
    """First ``size`` entries of ``IFFT(P(FFT(f)))`` with tilting and padding.

    Parameters
    ----------
    law : TransformLaw
        The counting law.
    f : numpy.ndarray
        Severity pmf on ``0, 1, ..., len(f) - 1`` (origin 0).
    size : int
        Entries wanted.
    n_fft : int, optional
        Transform length; default the next fast length ``>= max(2 size, len(f))``.
    theta : float, optional
        Tilt per lattice step; default from :func:`polyconv.dist.accuracy.choose_tilt`.
        ``theta = 0`` disables tilting.
    log_alias_mass : float, optional
        log of a bound of ``P(S >= n_fft)``; default a Chernoff bound.
    rebalance : bool
        With the default tilt: when the aliasing bound exceeds ten times the rounding bound,
        run once more with the tilt re-chosen from the measured rounding (a tighter bound for
        a second transform); False keeps the first (its bounds are as rigorous, only wider).

    Returns
    -------
    TransformResult
        ``pmf`` (negative round-off noise set to 0, within the floor), ``trust_floor`` =
        untilted rounding bound + aliasing bound (:mod:`polyconv.dist.accuracy`).
    """
    auto_theta = theta is None
    res = _transform_once(law, f, size, n_fft, theta, log_alias_mass)
    if rebalance and auto_theta and res.aliasing_floor > 10 * res.rounding_floor:
        # the tilt was chosen from an a-priori rounding estimate (E[N] as Lipschitz factor);
        # with the measured tilted-domain rounding, rebalance once
        tilted_round = res.rounding_floor * math.exp(-res.theta * max(size - 1, 0))
        theta2 = accuracy.choose_tilt(res.n_fft, size, math.log(max(res.aliasing_floor, 1e-300))
                                      + res.theta * res.n_fft, tilted_round)
        if theta2 > 1.05 * res.theta:
            res2 = _transform_once(law, f, size, res.n_fft, theta2, res.log_alias_mass)
            if res2.trust_floor < res.trust_floor:
                res = res2
    return res


def _transform_once(law, f, size, n_fft, theta, log_alias_mass) -> TransformResult:
    if n_fft is None:
        n_fft = tf.fast_length(max(2 * size, f.size), real=True)
    if n_fft < f.size:
        f = _fold(f, n_fft)
    if log_alias_mass is None:
        log_alias_mass = log_tail_bound(law, reduced_severity(f), float(n_fft))
    long = long_route.transform_applies(n_fft, law.long_ok)
    if long:  # extended precision, rounded once (polyconv.dist.long_route)
        u = long_route.UNIT_ROUNDOFF_LONG
        eta = accuracy.fft_relative_error(n_fft, u, long_route.TWIDDLE_ERROR_LONG)
    else:
        u = accuracy.UNIT_ROUNDOFF
        eta = accuracy.fft_relative_error(n_fft)
    pre_round = eta * (law.mean + 1) + (law.pgf_rel + law.pgf_abs) * u
    if theta is None:
        theta = accuracy.choose_tilt(n_fft, size, log_alias_mass, pre_round)
    dt = long_route.L if long else float
    j = np.arange(f.size, dtype=dt)
    # the tilted input errs by 3 u relative (exp and product): within eta + 3u of the transform
    ft = f * np.exp(-theta * j) if theta > 0 else np.asarray(f, dtype=dt)
    eta_in = eta + 3 * u if theta > 0 else eta
    if long:
        phi = long_route.rfft(ft, n_fft)
    else:
        phi = tf.rfft(tf.zero_padded(ft, n_fft), -1, 1)
    big_g = law.pgf(phi)
    g_full = long_route.irfft(big_g, n_fft) if long else tf.irfft(big_g, n_fft, -1, 1)
    gt = g_full[:size]
    # floor: Lipschitz factor ||P'(phi)||_2 / sqrt(M) over the full (Hermitian) spectrum
    if law.ratio is not None:
        deriv = np.abs(law.ratio(phi) * big_g).astype(float)
        lip = math.sqrt(_hermitian_sq_sum(deriv, n_fft) / n_fft)
        lip = min(lip, law.mean) if law.mean > 0 else lip
    else:
        lip = law.mean
    l2_out = float(np.sqrt(np.sum(g_full * g_full)))  # the inverse transform's whole output
    rounding = accuracy.transform_compound_floor(n_fft, float(np.sum(np.abs(ft))), lip,
                                                 law.pgf_rel * u, law.pgf_abs * u, l2_out,
                                                 eta=eta_in) * (1 + 1e-12)
    k = np.arange(size, dtype=dt)
    g = gt * np.exp(theta * k) if theta > 0 else gt
    rounding_u = accuracy.untilted_floor(rounding, theta, size - 1)
    alias = accuracy.aliasing_bound(log_alias_mass, theta, n_fft)
    l1 = accuracy.untilted_l1(rounding, theta, size) + alias
    if not long:
        np.maximum(g, 0.0, out=g)
        return TransformResult(g, rounding_u + alias, n_fft, theta, rounding_u, alias, l1,
                               log_alias_mass, l2_bound=rounding_u + alias)
    # per point: tilted-domain bound untilted at k, the untilting's own 3 u_L, the aliasing
    per_point = rounding * np.exp(theta * np.arange(size, dtype=float)) * (1 + 1e-12) \
        + 3 * u * np.abs(g).astype(float) + alias
    pmf, errors, cum = long_route.rounded(g, per_point)
    # cumulative and L1: the running sum of E_L is at most its Cauchy-Schwarz form (l1 above)
    a_sum = float(np.sum(per_point))
    extra = min(l1 + 3 * u * float(np.sum(np.abs(g))), a_sum) - a_sum
    d_l1 = float(np.sum(errors)) * (1 + (size + 2) * 2.0 ** -53)
    return TransformResult(pmf, float(np.max(errors)), n_fft, theta, rounding_u, alias,
                           max(d_l1 + extra, 0.0), log_alias_mass, errors=errors,
                           cumulative=max(cum + extra, 0.0),
                           l2_bound=long_route.l2_norm(errors),
                           enclosure=Enclosure(np.maximum(g, 0), per_point * (1 + 4 * 2.0 ** -53)))


def _hermitian_sq_sum(half: np.ndarray, n_fft: int) -> float:
    """Sum of squares over the full spectrum given the rfft half."""
    sq = half * half
    total = 2.0 * float(np.sum(sq)) - float(sq[0])
    if n_fft % 2 == 0:
        total -= float(sq[-1])
    return total


def _fold(f: np.ndarray, n: int) -> np.ndarray:
    """Wrap a sequence onto length ``n`` (what a short transform does anyway)."""
    out = np.zeros(n)
    for start in range(0, f.size, n):
        chunk = f[start:start + n]
        out[: chunk.size] += chunk
    return out
