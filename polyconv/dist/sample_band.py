"""The empirical law of measured samples on a lattice, with its DKW band (no fitted tail).

Binning rules and the band are described in :mod:`polyconv.dist.samples` (Massart 1990 for the
constant).  This module builds the masses and the ledger only; ``Lattice.from_samples`` and
:func:`polyconv.dist.samples.empirical` wrap them in a Lattice, so this module does not import
the Lattice class.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..numerics.budget import check_allocation
from .ledger import ErrorLedger
from .risk import real_value

__all__ = ["RULES", "SNAP", "as_samples", "band_inputs", "band_law", "band_ledger", "binned",
           "dkw_epsilon"]

RULES = ("nearest", "down", "up")
"""Binning rules of :func:`empirical`."""

SNAP = 1e-9
"""A sample within ``SNAP`` steps of a lattice point counts as on it (rules down / up)."""

COARSE_SPREAD = 1.0
"""Samples off the lattice whose standard deviation is below ``COARSE_SPREAD`` steps warn:
binning moves each by up to half a step, which then is of the order of the whole spread
(Sheppard's correction ``h^2 / 12`` is then above 8 % of the variance; Kendall & Stuart,
*The Advanced Theory of Statistics* vol. 1, section 3.18)."""



def dkw_epsilon(n: float, alpha: float) -> float:
    """Half-width ``eps = sqrt(ln(2/alpha) / (2 n))`` of the DKW band with Massart's constant:
    ``P(sup |F_n - F| > eps) <= alpha`` (Massart 1990, module docstring)."""
    a = real_value(alpha, "alpha")
    if not 0 < a < 1:
        raise ValueError(f"alpha must lie in (0, 1); got {alpha!r}")
    if not n > 0:
        raise ValueError(f"the number of samples must be positive; got {n!r}")
    return math.sqrt(math.log(2.0 / a) / (2.0 * n))


def as_samples(samples, name: str) -> np.ndarray:
    try:
        x = np.asarray(samples, dtype=float).ravel()
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be an array of real numbers") from None
    if x.size == 0:
        raise ValueError(f"{name} must hold at least one value")
    if not np.all(np.isfinite(x)):
        k = int(np.flatnonzero(~np.isfinite(x))[0])
        raise ValueError(f"{name} must be finite; {name}[{k}] = {x[k]!r}")
    return x


def _indices(x: np.ndarray, step: float, origin: float, rule: str) -> np.ndarray:
    """Lattice index of each sample by ``rule`` (as int64; the arithmetic ``(x - origin) /
    step`` then the rounding, in place: one temporary for 10^6 samples, not three)."""
    if origin != 0:
        v = np.subtract(x, origin)
        np.divide(v, step, out=v)
    else:
        v = np.divide(x, step)  # x - 0 is x: one pass less
    if rule == "nearest":
        v += 0.5
        np.floor(v, out=v)
    elif rule == "down":
        v += SNAP
        np.floor(v, out=v)
    else:
        v -= SNAP
        np.ceil(v, out=v)
    return v.astype(np.int64)


def _is_float_array(samples) -> bool:
    return isinstance(samples, np.ndarray) and samples.dtype == np.float64


def _weights(counts, size: int) -> np.ndarray | None:
    if counts is None:
        return None
    w = as_samples(counts, "counts")
    if w.size != size:
        raise ValueError(f"counts must have one entry per sample ({size}); got {w.size}")
    if np.any(w < 0):
        raise ValueError("counts must be non-negative")
    total = float(w.sum())
    if not total > 0:
        raise ValueError("counts must not all be zero")
    if not math.isfinite(total):
        raise ValueError("counts must have a finite sum (they overflow a float)")
    return w


def check_spread(x: np.ndarray, w: np.ndarray | None, h: float, k: np.ndarray,
                 origin: float, counts: np.ndarray | None = None,
                 krange: tuple[int, int] | None = None) -> float:
    """Warn (:class:`~polyconv.dist.step_check.CoarseStepWarning`) when the step is much coarser
    than the samples' spread (:data:`COARSE_SPREAD`) and the samples are not on the lattice;
    returns the standard deviation (``nan`` when it was not needed).

    Binning moves each sample by at most ``h / 2`` (rule ``nearest``; ``h`` for ``down`` /
    ``up``), so the standard deviation of the samples is at least that of their lattice
    points minus ``h`` (Minkowski's inequality); only when that does not settle it are the
    samples themselves looked at.  ``counts``: ``bincount(k)``, ``krange``: ``(k.min(),
    k.max())``, when already known."""
    lo, hi = (int(k.min()), int(k.max())) if krange is None else krange
    if hi - lo > 64:
        counts = (np.bincount(k - lo, weights=w) if counts is None else counts[lo:]
                  ).astype(float)
        j = np.arange(counts.size, dtype=float)
        mean = float(np.dot(counts, j) / counts.sum())
        binned_sd = h * math.sqrt(max(float(np.dot(counts, (j - mean) ** 2) / counts.sum()), 0))
        if binned_sd - h > COARSE_SPREAD * h:
            return math.nan
    sd = float(np.sqrt(np.cov(x, aweights=w, bias=True))) if x.size > 1 else 0.0
    if not (0 < sd and h > COARSE_SPREAD * sd):
        return sd
    off = np.abs((x - origin) / h - k)
    if float(off.max()) <= SNAP:
        return sd  # exact values on the lattice: binning moves nothing
    from .step_check import CoarseStepWarning, _nice_floor
    warnings.warn(f"step {h:g} is much coarser than the samples' spread (standard deviation "
                  f"{sd:.3g}): binning moves each sample by up to half a step, so the stage's "
                  f"law is mostly lost on this grid; try step={_nice_floor(sd / 10):g}",
                  CoarseStepWarning, stacklevel=4)
    return sd


def band_inputs(samples, step, origin, counts, alpha, rule, *, with_counts=False):
    """Checked samples ``x``, weights ``w`` (None: one each), step ``h``, origin ``o``, sample
    size ``n``, DKW half-width ``eps`` and the lattice index ``k`` of every sample; with
    ``with_counts`` also ``bincount(k, weights=w)`` (computed once for the spread check and
    the binned law)."""
    x = np.asarray(samples, dtype=float).ravel() if _is_float_array(samples) else \
        as_samples(samples, "samples")
    if x.size == 0:
        as_samples(x, "samples")  # raises: no value
    lo_x, hi_x = x.min(), x.max()  # NaN propagates: all finite iff both ends are
    if not (math.isfinite(lo_x) and math.isfinite(hi_x)):
        as_samples(x, "samples")  # raises, naming the first value that is not finite
    h = real_value(step, "step")
    if not h > 0:
        raise ValueError(f"step must be positive; got {step!r}")
    o = real_value(origin, "origin")
    if rule not in RULES:
        raise ValueError(f"rule must be one of {', '.join(RULES)}; got {rule!r}")
    w = _weights(counts, x.size)
    n = float(x.size if w is None else w.sum())
    eps = dkw_epsilon(n, alpha)
    k = _indices(x, h, o, rule)
    # the same operations on the two ends: (x - o) / h, the shift and the rounding are monotone
    # in x (IEEE arithmetic rounds monotonically), so these are exactly k.min() and k.max()
    k_lo, k_hi = (int(v) for v in _indices(np.array([lo_x, hi_x]), h, o, rule))
    if k_lo < 0:
        j = int(np.argmin(k))
        raise ValueError(f"samples must lie on or above the lattice origin {o!r}; "
                         f"samples[{j}] = {x[j]!r}")
    full = None
    if with_counts:
        check_allocation(8 * (k_hi + 2), "empirical lattice of the samples")
        full = np.bincount(k, weights=w)
    check_spread(x, w, h, k, o, full, (k_lo, k_hi))
    return (x, w, h, o, n, eps, k, full) if with_counts else (x, w, h, o, n, eps, k)


def binned(k: np.ndarray, w: np.ndarray | None, n: float, top: int) -> np.ndarray:
    """Masses ``counts / n`` of the lattice points ``0..top`` (budget-checked)."""
    check_allocation(8 * (top + 2), "empirical lattice of the samples")
    return np.bincount(k.astype(np.int64, copy=False), weights=w, minlength=top + 1) / n


def band_ledger(eps: float, size: int, moment: float, summed: int | None = None) -> ErrorLedger:
    """The ledger of a binned sample (module docstring of :mod:`polyconv.dist.samples`): point
    ``2 eps``, l1 2, cumulative ``eps`` plus the rounding of cumulative sums over ``summed``
    binned points (default ``size``), the first moment ``moment`` of what lies beyond the
    data."""
    u = 2.0 ** -53
    cum = min(eps + 4 * u * (1 + math.log2((size if summed is None else summed) + 1)), 1.0)
    return ErrorLedger(min(2 * eps + 4 * u, 1.0), 2.0, 0.0, size, moment, cum)


def band_law(samples, *, step, origin=0.0, counts=None, alpha=0.05, rule="nearest", upper=None):
    """The binned empirical law without a fitted tail: ``(pmf, h, o, ledger, n, eps, largest)``.

    ``upper`` (a known largest possible value) bounds the first moment of the mass the band
    allows beyond the data, ``(eps + cumulative) max(|upper|, |origin|)``; without it that moment
    is unknown (infinite) and means are refused.
    """
    x, w, h, o, n, eps, k, full = band_inputs(samples, step, origin, counts, alpha, rule,
                                              with_counts=True)
    pmf = full / n  # = binned(k, w, n, k.max())
    largest = x.max()
    moment = math.inf
    if upper is not None:
        top_value = real_value(upper, "upper")
        if top_value < float(largest):
            raise ValueError(f"upper must be at least the largest sample {largest!r}; "
                             f"got {upper!r}")
        cum = band_ledger(eps, pmf.size, 0.0).cumulative
        moment = min(eps + cum, 1.0) * max(abs(top_value), abs(o))
    return np.minimum(pmf, 1.0), h, o, band_ledger(eps, pmf.size, moment), n, eps, float(largest)
