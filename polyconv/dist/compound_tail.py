"""Bounds of the part of a compound that lies beyond its grid: first and second moments.

Helpers of :func:`polyconv.dist.compound.compound_ledger`.  The truncated part of a compound
``S`` on ``size`` points (nothing else truncated: the severity exact and whole, the count law
summed entirely) is ``{S >= size}``; its first moment is bounded three ways by the caller (Wald's
identity minus the on-grid moment) and here by Cauchy-Schwarz against a Chernoff tail bound.

Caution: a model output, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from . import accuracy
from .counts import CountsLaw
from .transform import log_tail_bound, reduced_severity

if TYPE_CHECKING:
    from .lattice import Lattice

_U = accuracy.UNIT_ROUNDOFF


def tail_moment_bound(counts, law: CountsLaw, f: np.ndarray, h: float, size: int) -> float:
    """Upper bound of ``E[S 1{S >= size}]`` for the compound of the severity vector ``f``
    (origin 0, step ``h``).

    Cauchy-Schwarz: ``E[S 1{S >= s}] <= sqrt(E[S^2] P(S >= s))``, with ``P(S >= s)`` bounded by
    :func:`polyconv.dist.transform.log_tail_bound` (Chernoff and split bounds on the severity
    moved to block upper ends, rigorous) and ``E[S^2] = E[N] E[X^2] + E[N(N - 1)] E[X]^2``
    (moments of a random sum; common practice, no source), in units of the step, with a
    relative margin ``1e-6`` for the float sums.  Where the Wald-identity bound is a
    difference of two nearly equal floats (``E[S]`` and the on-grid moment, each within a few
    ``u``), this one is tiny when the tail is.  ``inf`` when the count has no finite variance.
    """
    m, v = (float(t) for t in counts.stats(moments="mv"))
    if not (math.isfinite(m) and math.isfinite(v)):
        return math.inf
    k = accuracy.float_range(f.size)
    ex = accuracy.dot(k, f)
    ex2 = accuracy.dot(k * k, f)
    es2 = (m * ex2 + max(v + m * m - m, 0.0) * ex * ex) * (1 + 1e-6)
    log_p = log_tail_bound(law.transform, reduced_severity(f), float(size))
    if not math.isfinite(es2):
        return math.inf
    return h * math.sqrt(es2) * math.exp(0.5 * min(log_p, 0.0)) * (1 + 1e-6)


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
