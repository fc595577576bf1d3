"""Delay networks on lattices: stages in sequence, fork-join, races, mixtures.

* :func:`series`: stages one after another: the total delay is the sum (convolution).
* :func:`all_of`: a join that waits for every branch: the maximum, ``F = prod F_i``.
* :func:`first_of`: a race or hedged request that takes the first answer: the minimum,
  ``1 - F = prod (1 - F_i)``.
* :func:`mixture`: one of several paths at random with given weights.

Independence is an assumption of every formula here (branches that share a queue, a host or a
network path are correlated and these results are then optimistic or pessimistic in unknown
ways).  Percentiles do not add: take them from the combined distribution with ``quantile``; a
deadline-miss probability is ``sf(deadline)``.  In reliability texts a "series system" fails at
the *minimum* of lifetimes: here ``series`` means stages in sequence (a sum).  (Common practice, no
source; DESIGN.md section 6.)  Model output, not advice: check against qualified engineering
practice before committing to deadlines or capacity.

All inputs must share one ``step`` and have origins that differ by whole steps.
"""

from __future__ import annotations

import numpy as np

from .accuracy import UNIT_ROUNDOFF
from .lattice import Lattice, same_step


def _check(delays, name: str) -> list[Lattice]:
    if len(delays) == 1 and not isinstance(delays[0], Lattice) and \
            isinstance(delays[0], (list, tuple)):
        delays = tuple(delays[0])
    if len(delays) == 0:
        raise ValueError(f"{name} needs at least one delay")
    for i, d in enumerate(delays):
        if not isinstance(d, Lattice):
            raise TypeError(f"{name}: delays[{i}] must be a Lattice; got {type(d).__name__}")
    first = delays[0]
    for i, d in enumerate(delays[1:], start=1):
        if not same_step(first, d):
            raise ValueError(f"{name}: delays[{i}] has step {d.step!r}, delays[0] has "
                             f"{first.step!r}; all must share one step")
        k = (d.origin - first.origin) / first.step
        if abs(k - round(k)) > 1e-9 * max(1.0, abs(k)):
            raise ValueError(f"{name}: delays[{i}] origin {d.origin!r} is not a whole number of "
                             f"steps from delays[0] origin {first.origin!r}")
    return list(delays)


def _grid(delays: list[Lattice]) -> tuple[float, float, list[int], int]:
    """Common grid: step, base origin, each input's index offset, the common length."""
    h = delays[0].step
    base = min(d.origin for d in delays)
    offs = [int(round((d.origin - base) / h)) for d in delays]
    length = max(o + len(d) for o, d in zip(offs, delays, strict=True))
    return h, base, offs, length


def _on_grid(d: Lattice, off: int, length: int) -> tuple[np.ndarray, np.ndarray]:
    """``F`` and ``S = P(X > x)`` of ``d`` at every common grid point (mass beyond the lattice
    counted in ``S``; beyond the lattice ``S`` stays at ``truncated_mass``, an upper bound)."""
    pmf = np.zeros(length)
    pmf[off : off + len(d)] = d.pmf
    cdf = np.cumsum(pmf)
    sf = np.cumsum(pmf[::-1])[::-1] - pmf + d.truncated_mass
    return cdf, np.maximum(sf, 0.0)


def _pmf_from(cdf: np.ndarray, sf: np.ndarray) -> np.ndarray:
    """Point masses from ``F`` below the median and ``S`` above it (no cancellation in tails)."""
    prev_cdf = np.concatenate(([0.0], cdf[:-1]))
    prev_sf = np.concatenate(([1.0], sf[:-1]))
    return np.where(prev_cdf >= 0.5, prev_sf - sf, cdf - prev_cdf)


def series(*delays: Lattice) -> Lattice:
    """Total delay of stages run one after another: ``D = D_1 + ... + D_k``.

    Assumes the stage delays independent.  Percentiles do not add; read them off the result.
    """
    ds = _check(delays, "series")
    out = ds[0]
    for d in ds[1:]:
        out = out + d
    return out


def _extreme(ds: list[Lattice], offs: list[int], length: int, limit: int,
             wait_for_all: bool) -> tuple[np.ndarray, np.ndarray]:
    """CDF and survival function of the maximum (``wait_for_all``) or minimum of independent
    lattices on the common grid, to ``limit`` points.

    Maximum: ``F = prod F_i`` and ``S = 1 - prod (1 - S_i)``; minimum: ``S = prod S_i`` and
    ``F = 1 - prod (1 - F_i)``.  The complemented product is ``-expm1(sum log1p(-x_i))`` so small
    tail probabilities keep their digits.
    """
    product = np.ones(limit)
    log_rest = np.zeros(limit)
    for o, d in zip(offs, ds, strict=True):
        c, s = _on_grid(d, o, length)
        direct, other = (c, s) if wait_for_all else (s, c)
        product *= direct[:limit]
        with np.errstate(divide="ignore"):
            log_rest += np.log1p(-np.minimum(other[:limit], 1.0))
    complement = -np.expm1(log_rest)
    return (product, complement) if wait_for_all else (complement, product)


def _extreme_lattice(ds: list[Lattice], cdf: np.ndarray, sf: np.ndarray, h: float,
                     base: float) -> Lattice:
    """The Lattice of a max or min, with a trust floor from the inputs' and the rounding."""
    floor = sum(d.trust_floor * len(d) for d in ds) + 4 * len(ds) * UNIT_ROUNDOFF
    return Lattice(np.clip(_pmf_from(cdf, sf), 0.0, 1.0), h, base, trust_floor=floor)


def all_of(*delays: Lattice) -> Lattice:
    """Delay of a join that waits for all branches: ``max(D_1, ..., D_k)``, ``F = prod F_i``.

    Assumes the branches independent.  ``S = 1 - prod (1 - S_i)`` is evaluated as
    ``-expm1(sum log1p(-S_i))`` so upper-tail probabilities keep their digits.  The grid stops at
    the first point where a truncated input's law is unknown.
    """
    ds = _check(delays, "all_of")
    h, base, offs, length = _grid(ds)
    limit = length
    for o, d in zip(offs, ds, strict=True):
        if d.truncated_mass > 0:
            limit = min(limit, o + len(d))
    cdf, sf = _extreme(ds, offs, length, limit, wait_for_all=True)
    return _extreme_lattice(ds, cdf, sf, h, base)


def first_of(*delays: Lattice) -> Lattice:
    """Delay of a race or hedged request: ``min(D_1, ..., D_k)``, ``1 - F = prod (1 - F_i)``.

    Assumes the competitors independent (hedged requests to one overloaded service are not).
    The grid stops at the first input's last point (beyond it that input's law is unknown).
    """
    ds = _check(delays, "first_of")
    h, base, offs, length = _grid(ds)
    limit = min(o + len(d) for o, d in zip(offs, ds, strict=True))
    cdf, sf = _extreme(ds, offs, length, limit, wait_for_all=False)
    return _extreme_lattice(ds, cdf, sf, h, base)


def mixture(weights, delays) -> Lattice:
    """One path chosen at random: ``P(D = x) = sum_i w_i P(D_i = x)``.

    Parameters
    ----------
    weights : sequence of float
        Non-negative, summing to 1 (within ``1e-12``); not renormalised.
    delays : sequence of Lattice
        One per weight, same step, origins whole steps apart.

    Assumes the choice of path independent of the path delays.
    """
    ds = _check(tuple(delays), "mixture")
    try:
        w = np.asarray(weights, dtype=float)
    except (TypeError, ValueError):
        raise TypeError("weights must be a sequence of real numbers") from None
    if w.ndim != 1 or w.size != len(ds):
        raise ValueError(f"weights must have one entry per delay ({len(ds)}); got shape {w.shape}")
    if not np.all(np.isfinite(w)) or np.any(w < 0) or abs(float(w.sum()) - 1) > 1e-12:
        raise ValueError(f"weights must be non-negative and sum to 1; got {weights!r}")
    h, base, offs, length = _grid(ds)
    pmf = np.zeros(length)
    for wi, o, d in zip(w, offs, ds, strict=True):
        pmf[o : o + len(d)] += wi * np.asarray(d.pmf)
    floor = float(sum(wi * d.trust_floor for wi, d in zip(w, ds, strict=True))) + 4 * UNIT_ROUNDOFF
    return Lattice(np.minimum(pmf, 1.0), h, base, trust_floor=floor)
