"""Componentwise enclosures of a lattice's exact model, and the signed error sums they give.

A route that knows, per point, an extended-precision value ``c_k`` (numpy.longdouble) and a
radius ``r_k`` with ``|q_k - c_k| <= r_k`` for the exact model ``q`` (an *enclosure*, e.g. a
longdouble Panjer recursion with its running bound, or a longdouble product with the
dot-product bound ``gamma_m``) attaches it to its Lattice.  The error of the returned pmf
``p^`` then splits into a *known signed* part and a small bounded one:

    ``e_k = p^_k - q_k = d_k + (c_k - q_k)``, ``d_k = p^_k - c_k`` (computed),
    ``|c_k - q_k| <= r_k``,

so every linear functional of the error is bounded by its value on ``d`` plus its absolute
value on ``r`` (triangle inequality):

* cumulative sums ``|sum_{j <= k} e_j| <= |sum_{j <= k} d_j| + sum_{j <= k} r_j``,
* tail sums ``|sum_{j >= m} e_j| <= |sum_{j >= m} d_j| + sum_{j >= m} r_j``,
* stop-loss sums ``|sum_{j >= m} (j - m) e_j| <= |T_m(d)| + T_m(r)`` (``T`` as in
  :func:`polyconv.dist.risk.tail_sums`),

which keep the cancellation of rounding errors that per-point bounds lose (a float pmf rounded
from a longdouble one has ``|d_k| <= u p^_k`` of random sign).  The sums of ``d`` run in
longdouble; recursive summation of ``N`` terms errs by at most ``N u_L sum |terms|`` (Higham,
*Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2), charged as
``(N + 2) u_L`` times the same sums of ``|d|`` (twice for the double sums ``T``).  The
subtraction ``p^ - c`` itself errs by at most ``u_L |d|``.
"""

from __future__ import annotations

from functools import cached_property
from typing import NamedTuple

import numpy as np

L = np.longdouble
_U = 2.0 ** -53
_UL = float(np.finfo(L).eps) / 2


class Enclosure(NamedTuple):
    """``|q_k - center_k| <= radius_k`` for the exact model ``q`` at every point."""

    center: np.ndarray
    """Extended-precision values (numpy.longdouble)."""
    radius: np.ndarray
    """Non-negative float radii."""


def pick(a: Enclosure | None, b: Enclosure | None) -> Enclosure | None:
    """Per point, the enclosure of smaller radius (both are valid, so is either choice)."""
    if a is None or b is None:
        return a if b is None else b
    take_a = a.radius <= b.radius
    return Enclosure(np.where(take_a, a.center, b.center), np.minimum(a.radius, b.radius))


def _tails(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``S_m = sum_{k >= m} x_k`` and ``T_m = sum_{k >= m} (k - m) x_k``, ``m = 0..n``, in the
    dtype of ``x`` (``T_m = T_{m+1} + S_{m+1}``)."""
    n = x.size
    s = np.zeros(n + 1, dtype=x.dtype)
    s[:n] = np.cumsum(x[::-1])[::-1]
    t = np.zeros(n + 1, dtype=x.dtype)
    t[:n] = np.cumsum(s[1:][::-1])[::-1]
    return s, t


class EnclosureSums:
    """Bounds of the cumulative, tail and stop-loss sums of the error of ``pmf`` from an
    :class:`Enclosure` (module docstring); arrays built on first use."""

    def __init__(self, pmf: np.ndarray, enclosure: Enclosure):
        self.pmf = pmf
        self.center = np.asarray(enclosure.center, dtype=L)
        self.radius = np.asarray(enclosure.radius, dtype=float)

    @cached_property
    def d(self) -> np.ndarray:
        """``p^ - c`` in longdouble."""
        return np.asarray(self.pmf, dtype=L) - self.center

    @cached_property
    def profile(self) -> np.ndarray:
        """Per-point bound ``|d_k| (1 + u_L) + r_k``, rounded up."""
        return (np.abs(self.d).astype(float) * (1 + 2 * _UL) + self.radius) * (1 + 4 * _U)

    @cached_property
    def cum(self) -> np.ndarray:
        """Bound of ``|sum_{j <= k} e_j|``, ``k = 0..n-1``."""
        n = self.pmf.size
        k = np.arange(n, dtype=float)
        signed = np.abs(np.cumsum(self.d)).astype(float)
        absd = np.cumsum(np.abs(self.d)).astype(float)
        rad = np.cumsum(self.radius) * (1 + (k + 2) * _U)
        return (signed + (k + 3) * _UL * absd + rad) * (1 + 4 * _U)

    @cached_property
    def _tail_sums(self) -> tuple[np.ndarray, np.ndarray]:
        """Bounds of ``|sum_{k >= m} e_k|`` and ``|sum_{k >= m} (k - m) e_k|``, ``m = 0..n``."""
        n = self.pmf.size
        m = np.arange(n + 1, dtype=float)
        s_d, t_d = _tails(self.d)
        s_a, t_a = _tails(np.abs(self.d))
        s_r, t_r = _tails(self.radius)
        grow = 1 + 2 * (n - m + 2) * _U  # float sums of non-negative radii
        tail = np.abs(s_d).astype(float) + (n - m + 3) * _UL * s_a.astype(float) + s_r * grow
        ramp = np.abs(t_d).astype(float) + 3 * (n - m + 3) * _UL * t_a.astype(float) \
            + t_r * grow
        return tail * (1 + 4 * _U), ramp * (1 + 4 * _U)

    @property
    def tail(self) -> np.ndarray:
        """Bound of ``|sum_{k >= m} e_k|``, ``m = 0..n``."""
        return self._tail_sums[0]

    @property
    def ramp(self) -> np.ndarray:
        """Bound of ``|sum_{k >= m} (k - m) e_k|``, ``m = 0..n``."""
        return self._tail_sums[1]

    def ledger_numbers(self) -> tuple[float, float, float]:
        """``(point, l1, cumulative)`` for an :class:`~polyconv.dist.ledger.ErrorLedger`."""
        prof = self.profile
        n = prof.size
        l1 = float(np.sum(prof)) * (1 + (n + 2) * _U)
        return float(np.max(prof)), l1, min(float(np.max(self.cum)), l1)
