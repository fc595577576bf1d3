"""Distortion risk measures and layer pricing tables on a lattice.

A distortion ``g`` (increasing, concave, ``g(0) = 0``, ``g(1) = 1``) prices a non-negative loss as
``rho_g(X) = int_0^inf g(S(x)) dx`` (Wang, "Premium calculation by transforming the layer premium
density", ASTIN Bulletin 26 (1996)):

* Wang transform ``g(u) = Phi(Phi^{-1}(u) + lambda)``, ``lambda >= 0`` (Wang, J. Risk and
  Insurance 67 (2000));
* proportional hazard ``g(u) = u^{1/r}``, ``r >= 1`` (Wang 1995, Insurance: Math. Econ. 17).

On a lattice from ``origin = o`` with step ``h`` the survival function is a step function, so
``rho_g = o + h sum_{k >= 0} g(S(x_k))`` exactly (``S(x_k) = P(X > x_k)``); a layer
``l xs a`` costs ``int_a^{a+l} g(S(x)) dx``, the same sum over the cells it covers (linear
within a cell).  ``g = identity`` gives the expected layer loss.  Increased-limit factors:
``ILF(l) = E[min(X, l)] / E[min(X, b)]`` for a basic limit ``b`` (common practice, no source).

Certified ranges: ``g`` is increasing, so the sf bounds of the lattice's error ledger give
bounds of each term; past the grid the truncated mass contributes at most
``g(t) * (truncated first moment bound) / t``, at least 0 (the range then may be wide:
answered, with its range).

Caution: a model output, not advice; loadings belong to the pricing actuary.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .lattice import Lattice


def wang(lam: float) -> Callable[[np.ndarray], np.ndarray]:
    """Wang transform ``g(u) = Phi(Phi^{-1}(u) + lam)``, ``lam >= 0``."""
    if not (lam >= 0 and math.isfinite(lam)):
        raise ValueError(f"lam must be finite and >= 0; got {lam!r}")

    from scipy import special  # on first use (test_import_light)

    def g(u):
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        return special.ndtr(special.ndtri(u) + lam)

    return g


def proportional_hazard(r: float) -> Callable[[np.ndarray], np.ndarray]:
    """Proportional hazard ``g(u) = u^{1/r}``, ``r >= 1``."""
    if not (r >= 1 and math.isfinite(r)):
        raise ValueError(f"r must be finite and >= 1; got {r!r}")
    return lambda u: np.clip(np.asarray(u, dtype=float), 0.0, 1.0) ** (1.0 / r)


def identity(u):
    """``g(u) = u``: the expected value."""
    return np.clip(np.asarray(u, dtype=float), 0.0, 1.0)


@dataclass(frozen=True)
class Priced:
    """A distorted price with its certified range (from the ledger's sf bounds)."""

    value: float
    low: float
    high: float


def _sf_arrays(lat: Lattice):
    br = lat._br()
    s = np.clip(1.0 - br.cum, 0.0, 1.0)  # P(X > x_k), truncated mass above the grid
    return s, br.S_low, br.S_high


def layer_price(lat: Lattice, attachment: float = 0.0, limit: float = math.inf,
                g: Callable = identity) -> Priced:
    """``int_a^{a+l} g(S(x)) dx`` on the lattice (module docstring), with its range.

    ``lat`` must be non-negative (``origin >= 0``).  Below the origin ``S = 1``.
    """
    if lat.origin < 0:
        raise ValueError("the loss must be non-negative (origin >= 0)")
    a = float(attachment)
    top = a + float(limit)
    if not (a >= 0 and top > a):
        raise ValueError(f"need attachment >= 0 and limit > 0; got {attachment!r}, {limit!r}")
    h, o, n = lat.step, lat.origin, len(lat)
    s, s_lo, s_hi = _sf_arrays(lat)
    # cell k covers [x_k, x_k + h) where S = S(x_k); below the origin S = 1
    lefts = o + h * np.arange(n)
    cover = np.clip(np.minimum(lefts + h, top) - np.maximum(lefts, a), 0.0, h)
    below = max(0.0, min(o, top) - a)
    value = below + float(np.dot(cover, g(s)))
    low = below + float(np.dot(cover, g(s_lo)))
    high = below + float(np.dot(cover, g(s_hi)))
    grid_end = o + h * n
    if top > grid_end:  # beyond the grid: S <= truncated mass (ledger)
        br = lat._br()
        t_hi = min(1.0, br.t_high)
        if t_hi > 0:
            span = top - max(grid_end, a)
            moment = lat.errors.truncated_moment
            far = float(g(t_hi)) * (min(span, moment / t_hi) if math.isfinite(moment) else span)
            high += far
    return Priced(value, low, high)


def distorted_mean(lat: Lattice, g: Callable) -> Priced:
    """``rho_g(X) = int_0^inf g(S(x)) dx`` (a whole-distribution price)."""
    return layer_price(lat, 0.0, math.inf, g)


@dataclass(frozen=True)
class LayerRow:
    """One row of a layer pricing table."""

    attachment: float
    limit: float
    expected: float
    priced: dict
    ilf: float | None


def layer_table(lat: Lattice, layers, distortions: dict[str, Callable] | None = None,
                basic_limit: float | None = None) -> list[LayerRow]:
    """Expected layer loss (and distorted prices) for each ``(limit, attachment)`` layer.

    Parameters
    ----------
    lat : Lattice
        Loss per claim (for ILFs) or per year.
    layers : sequence of (limit, attachment)
        Layers ``limit xs attachment``.
    distortions : dict name -> g, optional
        Extra price columns (e.g. ``{"wang 0.25": wang(0.25)}``).
    basic_limit : float, optional
        For ``ILF = E[min(X, attachment + limit)] / E[min(X, basic)]`` on each row.
    """
    distortions = distortions or {}
    base = layer_price(lat, 0.0, basic_limit).value if basic_limit else None
    rows = []
    for limit, attach in layers:
        expected = layer_price(lat, attach, limit).value
        priced = {name: layer_price(lat, attach, limit, g).value
                  for name, g in distortions.items()}
        ilf = None
        if base:
            ilf = layer_price(lat, 0.0, attach + limit).value / base
        rows.append(LayerRow(float(attach), float(limit), expected, priced, ilf))
    return rows
