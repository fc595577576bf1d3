"""Risk measures on a lattice distribution: quantile (VaR), tail value at risk, stop-loss.

Definitions (Acerbi & Tasche, "On the coherence of expected shortfall", J. Banking & Finance 26
(2002) 1487-1503, for TVaR of a general, possibly discrete, distribution):

* ``VaR_p = min{x : F(x) >= p}`` (the lower ``p``-quantile).
* ``TVaR_p = VaR_p + E[(S - VaR_p)+] / (1 - p)`` (expected shortfall; equals the Acerbi-Tasche
  ``ES_p`` also when ``F`` jumps at ``VaR_p``).
* stop-loss premium ``E[(S - d)+]``, exactly piecewise linear in ``d`` between lattice points.

Caution: these are model outputs, not advice.  They inherit every assumption of the Lattice they are
computed from (independence, discretisation, truncation); for reserves, capital or prices defer to
local regulation and qualified actuarial practice.

The functions work on raw arrays so they can be tested alone; :class:`~polyconv.dist.Lattice`
methods call them.  Each refuses (returns ``nan`` with an :class:`AccuracyWarning`) when the tail
probability it rests on is below the error bound carried by the lattice, and warns with a
:class:`TruncationWarning` when mass beyond the lattice could change the answer.
"""

from __future__ import annotations

import warnings

import numpy as np

from .accuracy import UNIT_ROUNDOFF
from .errors import AccuracyWarning, TruncationWarning

SNAP = 1e-9
"""An ``x`` within ``SNAP`` lattice steps of a lattice point counts as that point (so 0.3 on a grid
of step 0.1 is the point 3, whatever the float rounding of 3 * 0.1)."""

TRUNCATION_LEVEL = 1e-9
"""Truncated mass, relative to the probability a measure rests on, above which it warns."""


def lattice_index(x, origin: float, step: float) -> np.ndarray:
    """Index ``k`` of the last lattice point ``origin + step k <= x`` (may be < 0 or >= n)."""
    return np.floor((np.asarray(x, dtype=float) - origin) / step + SNAP).astype(np.int64)


def check_level(p, name: str = "p", allow_one: bool = False) -> np.ndarray:
    """Validate probability levels ``0 < p < 1`` (``<= 1`` with ``allow_one``)."""
    try:
        arr = np.asarray(p, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a real number or array of them; got {p!r}") from None
    hi_ok = (arr <= 1) if allow_one else (arr < 1)
    if not np.all(np.isfinite(arr) & (arr > 0) & hi_ok):
        rng = "(0, 1]" if allow_one else "(0, 1)"
        raise ValueError(f"{name} must lie in {rng}; got {p!r}")
    return arr


def cumulative_error(k: np.ndarray, n: int, floor: float) -> np.ndarray:
    """Error bound of a sum of ``k + 1`` lattice probabilities (from the left) or of the tail
    beyond ``k`` (from the right): ``min(k + 1, n - k) * floor`` plus summation rounding."""
    k = np.asarray(k)
    terms = np.minimum(k + 1, np.maximum(n - k, 1))
    return terms * (floor + UNIT_ROUNDOFF) + 2 * UNIT_ROUNDOFF


def quantile(pmf: np.ndarray, step: float, origin: float, floor: float, truncated: float,
             cum: np.ndarray, p) -> np.ndarray:
    """``min{x on the lattice : F(x) >= p}``; ``nan`` with a warning where it is not determined.

    ``F(x)`` within its rounding bound of ``p`` counts as reaching ``p``.  Refused (``nan`` and
    :class:`AccuracyWarning`) when ``min(p, 1 - p)`` is not above the error of the cumulative sums
    there; ``nan`` with :class:`TruncationWarning` when the quantile lies beyond the lattice.
    """
    arr = check_level(p, allow_one=True)
    n = pmf.size
    ks = np.arange(n)
    tol = ks * UNIT_ROUNDOFF + (ks + 1) * floor + 2 * UNIT_ROUNDOFF
    k = np.searchsorted(cum + tol, arr, side="left")
    out = origin + step * k.astype(float)
    beyond = k >= n
    if np.any(beyond):
        warnings.warn(f"quantile beyond the lattice: level exceeds the retained mass "
                      f"{1 - truncated:.17g} (truncated_mass {truncated:.3g}); returning nan",
                      TruncationWarning, stacklevel=3)
    kk = np.minimum(k, n - 1)
    err = cumulative_error(kk, n, floor)
    noisy = (~beyond) & (np.minimum(arr, 1 - arr) <= err) & (floor > 0)
    if np.any(noisy):
        warnings.warn(f"quantile level within the trust floor ({floor:.3g} per probability, "
                      f"cumulative error up to {float(np.max(err[noisy])):.3g}): "
                      "numerically meaningless, returning nan", AccuracyWarning, stacklevel=3)
    out = np.where(beyond | noisy, np.nan, out)
    return out


def tail_sums(pmf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``S_m = sum_{k>=m} p_k`` and ``T_m = sum_{k>=m} (k - m) p_k`` for ``m = 0..n``.

    Built from the right by ``T_m = T_{m+1} + S_{m+1}``: sums of non-negative terms, no
    cancellation (so far tails keep their relative accuracy).
    """
    n = pmf.size
    s = np.zeros(n + 1)
    s[:n] = np.cumsum(pmf[::-1])[::-1]
    t = np.zeros(n + 1)
    t[:n] = np.cumsum(s[1:][::-1])[::-1]
    return s, t


def stop_loss(pmf: np.ndarray, step: float, origin: float, floor: float, truncated: float,
              tails: tuple[np.ndarray, np.ndarray], d) -> np.ndarray:
    """``E[(X - d)+]`` over the lattice (exact, piecewise linear in ``d``).

    With ``m`` the first lattice index above ``d``: ``step T_m + (x_m - d) S_m``.  Mass beyond the
    lattice is unknown in location: the value is then a lower bound and a
    :class:`TruncationWarning` is issued when that mass is not negligible.
    """
    s, t = tails
    n = pmf.size
    d_arr = np.asarray(d, dtype=float)
    if not np.all(np.isfinite(d_arr)):
        raise ValueError(f"d must be finite; got {d!r}")
    m = np.clip(lattice_index(d_arr, origin, step) + 1, 0, n)
    # a d below the lattice: every point is above it
    xm = origin + step * m
    value = step * t[m] + (xm - d_arr) * s[m]
    err = floor * step * (n - m) * (n - m + 1) / 2.0 + floor * np.abs(xm - d_arr) * (n - m)
    noisy = (value <= err) & (floor > 0) & (m < n)
    if np.any(noisy):
        warnings.warn(f"stop-loss below its error bound from the trust floor ({floor:.3g}): "
                      "numerically meaningless, returning nan", AccuracyWarning, stacklevel=3)
        value = np.where(noisy, np.nan, value)
    if truncated > 0 and np.any(truncated > TRUNCATION_LEVEL * (s[m] + truncated)):
        warnings.warn(f"stop-loss ignores truncated_mass {truncated:.3g} beyond the lattice: "
                      "the value is a lower bound", TruncationWarning, stacklevel=3)
    return value
