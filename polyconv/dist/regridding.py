"""Re-gridding kernel: a law moved to the grid ``H j`` with its mass and mean kept.

Mass ``p`` at ``x`` with ``a = H floor(x / H)`` goes ``p (a + H - x) / H`` to ``a`` and
``p (x - a) / H`` to ``a + H`` (the "method of rounding" with linear weights, first-order local
moment matching; Klugman, Panjer & Willmot, *Loss Models*, ch. 9, from memory).  Mean and mass
are unchanged, the variance grows by at most ``H^2 / 4``.  The map is a Markov kernel, so the
computed error (L1, cumulative) does not grow beyond the rounding of the split; each new point
receives mass from at most ``ceil(H / h) + 1`` old points (its point bound scales so).

This module returns the parts ``(pmf, step, origin, ledger)`` and imports no Lattice, so that
:meth:`polyconv.dist.Lattice.regrid` and :func:`polyconv.dist.portfolio.regrid` share it
without an import cycle.
"""

from __future__ import annotations

import math

import numpy as np

from .ledger import ErrorLedger, cum_bound

_U = 2.0 ** -53


def same_grid(lat, step: float) -> bool:
    """Whether ``lat`` already lies on the grid ``step * j`` with that step."""
    return abs(step - lat.step) <= 1e-12 * lat.step and \
        abs(lat.origin / step - round(lat.origin / step)) < 1e-9


def regrid_parts(lat, step: float) -> tuple[np.ndarray, float, float, ErrorLedger]:
    """``(pmf, step, origin, ledger)`` of ``lat`` on the grid ``step * j`` (module docstring).

    The origin becomes ``H floor(origin / H)``; the truncated part stays beyond (from the image
    of its first index), its moment bounds raised as by a shift of ``H``:
    ``m1 + H t`` and ``m2 + 2 H m1 + H^2 t`` (``t`` its mass bound).
    """
    h_new = float(step)
    if not (h_new > 0 and math.isfinite(h_new)):
        raise ValueError(f"step must be positive and finite; got {step!r}")
    x = lat.values
    pos = x / h_new
    base = math.floor(float(pos[0]) + 1e-12)
    lo = np.floor(pos + 1e-12).astype(np.int64)
    w = np.clip(pos - lo, 0.0, 1.0)
    lo -= base
    n = int(lo[-1]) + 2
    out = np.zeros(n)
    np.add.at(out, lo, lat.pmf * (1.0 - w))
    np.add.at(out, lo + 1, lat.pmf * w)
    if out[-1] == 0 and n > 1:
        out = out[:-1]
    e = lat.errors
    fan_in = math.ceil(h_new / lat.step) + 1
    rounding = 2 * _U * float(np.max(out))
    point = min(e.l1, fan_in * e.point) + rounding
    l1 = e.l1 + 2 * _U * float(np.sum(lat.pmf))
    tf = out.size if e.truncated_from >= len(lat) else int(lo[min(e.truncated_from, len(lo) - 1)])
    moment, moment2 = e.truncated_moment, e.truncated_moment2
    if moment not in (0.0, math.inf):  # the truncated part moves up by less than H
        mass = min(1.0, e.truncated + e.l1)
        moment2 = moment2 + 2 * h_new * moment + h_new * h_new * mass \
            if math.isfinite(moment2) else math.inf
        moment += h_new * mass
    led = ErrorLedger(min(point, 2.0), min(l1, 2.0), 0.0, min(tf, out.size), moment,
                      min(cum_bound(e) + 2 * _U, 2.0), moment2)
    return out, h_new, base * h_new, led
