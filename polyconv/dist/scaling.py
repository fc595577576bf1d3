"""Time scaling of a lattice: the law of ``c X`` on the lattice of ``X`` (speed-up, inflation).

``X`` lives on ``o + h k``; ``c X`` puts the mass of ``x_k`` at ``c x_k``, which is in general
between two points of the same lattice (``o + h j``, ``j`` extended below 0 or past the end as
needed).  The rule decides where it goes, with the names of :meth:`Lattice.from_law`:

* ``"nearest"``: the nearest point (ties upward);
* ``"down"`` / ``"up"``: the point below / above (a stochastic lower / upper bound of ``c X``);
* ``"moments"``: split between the two neighbours in proportion to the distance, so the mean
  is kept exactly (the first-order local moment matching of Gerber 1982 applied to atoms).

Error ledger (:mod:`polyconv.dist.ledger`): every rule is a linear map taking each point mass to
at most two neighbouring points with non-negative weights summing to 1, and it is monotone (a
point further right never sends mass further left), so the L1 error does not grow and every
cumulative sum of the output is a sum ``sum_k a_k p_k`` with ``a_k`` non-increasing in ``[0, 1]``:
by summation by parts its error is at most the input's cumulative bound.  A point of the output
gathers at most ``ceil(1/c) + 1`` inputs, so its error is at most that many times the input's
per-point bound (and at most the L1 bound).  Truncated mass lying at or above ``x_from`` lies at
or above ``c x_from`` afterwards, with first moment ``c M``.
"""

from __future__ import annotations

import math

import numpy as np

from .ledger import ErrorLedger, untruncated
from .risk import real_value

RULES = ("nearest", "down", "up", "moments")
"""Rules of :func:`scale_parts`."""

MAX_SCALED_POINTS = 1 << 26
"""Most points a scaled lattice may have (a huge factor on a long lattice)."""


def _positions(n: int, h: float, o: float, c: float) -> np.ndarray:
    """Positions of ``c x_k`` in steps from ``o``: ``((c - 1) o + c h k) / h``."""
    return ((c - 1.0) * o) / h + c * np.arange(n, dtype=float)


def scale_parts(x, factor, rule: str = "nearest") -> tuple[np.ndarray, float, float, ErrorLedger]:
    """``(pmf, step, origin, ledger)`` of ``factor * X`` on ``X``'s lattice (module docstring).

    Parameters
    ----------
    x : Lattice
        The distribution of ``X``.
    factor : float
        ``c > 0`` (``c < 1``: faster, ``c > 1``: slower or inflated).
    rule : {"nearest", "down", "up", "moments"}
        Where mass between two lattice points goes.

    Raises
    ------
    ValueError
        ``factor`` not positive and finite, an unknown rule, or a result longer than
        :data:`MAX_SCALED_POINTS`.
    """
    c = real_value(factor, "factor")
    if not c > 0:
        raise ValueError(f"factor must be positive; got {factor!r}")
    if rule not in RULES:
        raise ValueError(f"rule must be one of {', '.join(RULES)}; got {rule!r}")
    pmf = np.asarray(x.pmf)
    h, o, e = x.step, x.origin, x.errors
    n = pmf.size
    if c == 1.0:
        return pmf, h, o, e
    pos = _positions(n, h, o, c)
    snap = np.rint(pos)
    on_point = np.abs(pos - snap) <= 1e-9 * np.maximum(1.0, np.abs(pos))
    lo = np.where(on_point, snap, np.floor(pos))
    hi = np.where(on_point, snap, np.ceil(pos))
    if rule == "nearest":
        near = np.where(pos - lo < 0.5, lo, hi)
        lo = hi = near
    elif rule == "down":
        hi = lo
    elif rule == "up":
        lo = hi
    base = int(min(lo.min(), 0.0))
    top = int(hi.max())
    width = top - base + 1
    if width > MAX_SCALED_POINTS:
        raise ValueError(f"factor {c!r} would spread {n} points over {width} points "
                         f"(more than {MAX_SCALED_POINTS}); coarsen the step first")
    out = np.zeros(width)
    if rule == "moments":
        w_hi = np.where(hi > lo, (pos - lo) / np.where(hi > lo, hi - lo, 1.0), 0.0)
        np.add.at(out, (lo - base).astype(np.int64), pmf * (1.0 - w_hi))
        np.add.at(out, (hi - base).astype(np.int64), pmf * w_hi)
        split = 2
    else:
        np.add.at(out, (lo - base).astype(np.int64), pmf)
        split = 1
    gathered = math.ceil(1.0 / c) + 1
    u = 2.0 ** -53
    point = min(e.l1, gathered * split * e.point) + 2 * u * float(out.max(initial=0.0))
    l1 = e.l1 + 2 * u * float(pmf.sum())
    cum = e.cumulative + (width + 2) * u
    if untruncated(e):
        return out, h, o + h * base, ErrorLedger(point, l1, 0.0, width, 0.0, cum)
    tf_pos = ((c - 1.0) * o) / h + c * e.truncated_from
    tf = int(min(max(math.floor(tf_pos) - base, 0), width))
    return out, h, o + h * base, ErrorLedger(point, l1, 0.0, tf, c * e.truncated_moment, cum)
