"""Bounds of the part of a compound that lies beyond its grid: first and second moments.

Helpers of :func:`polyconv.dist.compound.compound_ledger`.  The truncated part of a compound
``S`` on ``size`` points (nothing else truncated: the severity exact and whole, the count law
summed entirely) is ``{S >= size}``; its first moment is bounded three ways by the caller (Wald's
identity minus the on-grid moment) and here by an exponential (Chernoff-type) moment bound.

Caution: a model output, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from . import accuracy
from .counts import CountsLaw
from .transform import reduced_severity

if TYPE_CHECKING:
    from .lattice import Lattice

_U = accuracy.UNIT_ROUNDOFF


def tail_moment_bound(law: CountsLaw, f: np.ndarray, h: float, size: int) -> float:
    """Upper bound of ``E[S 1{S >= size}]`` for the compound of the severity vector ``f``
    (origin 0, step ``h``), from ``E[S e^{t (S - s)}] = e^{-t s} P'(M(t)) M'(t)`` for ``t > 0``.

    ``S 1{S >= s} <= S e^{t (S - s)}``; ``M`` is the moment generating function of the severity
    moved to block upper ends (:func:`polyconv.dist.transform.reduced_severity`, stochastically
    larger; ``S 1{S >= s}`` is non-decreasing in ``S``, so the bound stays one);
    ``P'(z) <= (P(z (1 + d)) - P(z)) / (z d)`` (a PGF is convex on the positive reals),
    ``d = 1e-6``, with a relative margin ``1e-6`` for the rounding of that difference (about
    ``u / d``).  The best ``t`` of a log-spaced grid (any ``t`` is valid).  Where the
    Wald-identity bound of the caller is a difference of two nearly equal floats (``E[S]`` and
    the on-grid moment, each within a few ``u``), this one is tiny when the tail is.
    """
    idx, mass = reduced_severity(f)
    s = float(size)
    pos = idx > 0
    if not np.any(pos):
        return 0.0
    t = (np.geomspace(1e-3, 1e3, 25) / s)[:, None]
    logm = np.log(mass)[None, :]
    lz = _logsumexp(logm + t * idx[None, :])  # log M(t)
    ld = _logsumexp(logm[:, pos] + np.log(idx[pos])[None, :] + t * idx[None, pos])  # log M'(t)
    d = 1e-6
    best = math.inf
    for lzi, ldi, ti in zip(lz, ld, t[:, 0], strict=True):
        p0 = law.transform.log_pgf_real(float(lzi))
        p1 = law.transform.log_pgf_real(float(lzi) + math.log1p(d))
        if not (math.isfinite(p0) and math.isfinite(p1)) or not 0 < p1 - p0 < 700:
            continue
        val = p0 + math.log(math.expm1(p1 - p0)) - float(lzi) - math.log(d) + float(ldi) \
            - float(ti) * s
        if val < 700:
            best = min(best, math.exp(val) * (1 + 1e-6))
    return h * best


def wald_tail_moment(law: CountsLaw, f: np.ndarray, g: np.ndarray, ramp: float,
                     h: float) -> float:
    """Upper bound of ``E[S 1{S >= size}]`` as ``E[S] - sum_k x_k q_k`` evaluated in longdouble.

    ``E[S] <= E[N] sum_k k f_k`` (Wald's identity; for a severity vector of total mass ``m <= 1``
    the mean is ``P'(m) sum k f_k <= P'(1) sum k f_k``), ``E[N] = (a + b) / (1 - a)`` from the
    law's longdouble Panjer coefficients (an ``(a, b, 0)`` law: ``P'(1) (1 - a) = a + b``),
    relative error at most ``20 u_L``; the sums of non-negative terms within ``(n + 2) u_L``
    (Higham, section 4.2); the on-grid exact moment ``sum k q_k >= sum k g_k - ramp`` with
    ``ramp`` a bound of ``|sum k (g_k - q_k)|`` (an enclosure's).  In units of steps, times
    ``h``, rounded up.  ``inf`` when the law has no longdouble coefficients or the severity's
    mass exceeds 1.
    """
    if law.ab_long is None or math.fsum(f.tolist()) > 1:
        return math.inf
    a, b = law.ab_long
    if not a < 1:
        return math.inf
    ld = np.longdouble
    ul = float(np.finfo(ld).eps) / 2
    mean_n = (a + b) / (1 - a)
    ex = np.sum(np.arange(f.size, dtype=ld) * f.astype(ld))
    on = np.sum(np.arange(g.size, dtype=ld) * g.astype(ld))
    total = mean_n * ex * (1 + ld((f.size + 25) * ul))
    steps = total - on * (1 - ld((g.size + 3) * ul)) + ld(ramp)
    return max(h * float(steps) * (1 + 4 * _U) + 8 * _U * h * float(ul * total), 1e-300)


def _logsumexp(a: np.ndarray) -> np.ndarray:
    """Row-wise ``log sum exp`` (one matrix; the rounding is far inside the margins above)."""
    top = np.max(a, axis=1)
    return top + np.log(np.sum(np.exp(a - top[:, None]), axis=1))


def truncated_second_moment(counts, law: CountsLaw, severity: Lattice, br, g: np.ndarray,
                             errs: np.ndarray, h: float, carried, sev_mean_high: float) -> float:
    """Upper bound of ``E[S^2 1{S in the truncated part}]``: ``E[S^2]`` minus the on-grid
    second moment, ``E[S^2] = E[N] E[X^2] + E[N(N - 1)] E[X]^2`` (moments of a random sum;
    common practice, no source), with ``E[X]`` and ``E[X^2]`` at the severity's certified high
    ends (its ledger's truncated second moment included).  The on-grid sum's error is the
    route's per-point bounds times ``x_k^2`` plus the severity's carried errors by summation by
    parts (``x_k^2`` grows by ``h^2 (2k - 1)`` per point).  ``inf`` when a moment is unknown or
    the count tail is dropped (generic counting laws)."""
    if law.tail_mass > 0 or not math.isfinite(sev_mean_high):
        return math.inf
    sev_pmf = np.asarray(severity.pmf)
    vals = severity.values
    with np.errstate(over="ignore", invalid="ignore"):
        m2_sev = accuracy.dot(sev_pmf, vals * vals)
        ex2 = br.second_moment_range(sev_pmf, m2_sev)[1]
    if not math.isfinite(ex2):
        return math.inf
    m, v = (float(t) for t in counts.stats(moments="mv"))
    factorial2 = max(v + m * m - m, 0.0)  # E[N(N - 1)]
    total = (m * ex2 + factorial2 * sev_mean_high * sev_mean_high) * (1 + 8 * _U)
    size = g.size
    k = accuracy.float_range(size)
    k2 = k * k
    on_grid2 = h * h * accuracy.dot(k2, g)
    l1_in, cum_in, point_in = carried
    j = k[1:]
    err2 = h * h * (accuracy.dot(k2, errs) + accuracy.dot(2 * j - 1, np.minimum(
        min(l1_in, 2 * cum_in), (size - j) * point_in)))
    err2 = err2 * (1 + 4 * _U) + ((size + 2) * _U + 4 * _U) * on_grid2
    if not math.isfinite(total - on_grid2 + err2):
        return math.inf
    return max(total - (on_grid2 - err2), 1e-300)


def count_tail_moment(counts, law: CountsLaw) -> float:
    """Bound of ``E[N 1{N beyond the summed support}]`` by Cauchy-Schwarz:
    ``sqrt(E[N^2] P(N > top))`` (scipy's moments)."""
    m, v = (float(t) for t in counts.stats(moments="mv"))
    return math.sqrt(max(v + m * m, 0.0) * law.tail_mass)
