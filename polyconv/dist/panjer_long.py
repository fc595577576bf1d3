"""Panjer's recursion in extended precision: a componentwise enclosure of a compound.

``g_x = c sum_{y=1..x} (a + b y / x) f_y g_{x-y}``, ``c = 1 / (1 - a f_0)``, ``g_0 = P_N(f_0)``
(Panjer, ASTIN Bulletin 12 (1981)), run in numpy.longdouble (unit roundoff ``u_L = 2^-64`` on
x86) with a running bound carried beside each value:

    ``H_x = c sum_y |a + b y / x| f_y H_{x-y} + gamma c sum_y |a + b y / x| f_y |g_{x-y}|``,

the first sum the errors of earlier values carried through the (linear) recursion, the second
this step's rounding: a dot product of ``m`` terms errs by at most ``gamma_m`` times the sum of
their moduli (Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 3.1),
with ``gamma = gamma_{m+10}`` also covering the coefficients' own rounding (``a``, ``b`` from the
law's parameters within ``3 u_L``, ``b y / x``, ``c`` and the products: at most 7 more roundings
per term).  ``H_0`` is the rounding of ``P_N(f_0)``, evaluated by the law's PGF in longdouble
(relative ``pgf_rel u_L`` plus ``pgf_abs u_L``, :class:`polyconv.dist.transform.TransformLaw`).
The bound is first order; the neglected terms are ``O((size m u_L)^2)`` relative, covered by a
factor ``1 + 1e-9`` for the sizes allowed here (``size m <= 2^20``).

A count bounded by ``n_max`` (binomial) and a severity whose last positive entry is at ``top``
give ``g_x = 0`` exactly for ``x > n_max top``; those entries are set to 0 with radius 0 (the
recursion would otherwise grow noise there: it is unstable for ``a < 0``).

Returns an :class:`polyconv.dist.enclosure.Enclosure` of the exact compound of the given
(computed) severity vector; the severity's own errors are carried separately by the caller.
"""

from __future__ import annotations

import math

import numpy as np

from .enclosure import Enclosure
from .long_route import LONG_MAX_PRODUCT, available

L = np.longdouble
_UL = float(np.finfo(L).eps) / 2

LONG_MAX_STEPS = 8192
"""Most points the extended-precision recursion runs (one small product per point)."""


def long_recursion(law, f: np.ndarray, size: int, n_max: float = math.inf
                   ) -> Enclosure | None:
    """Enclosure of the compound of ``f`` on ``size`` points (module docstring), or None when
    the law has no longdouble coefficients, the grid is too long, or values leave the range."""
    if law.ab_long is None or law.ab1 is not None or not available():
        return None
    m_max = max(0, min(f.size - 1, size - 1))
    if size > LONG_MAX_STEPS or size * max(m_max, 1) > LONG_MAX_PRODUCT:
        return None
    a, b = law.ab_long
    tl = law.transform
    if not tl.long_ok:
        return None
    g0 = tl.pgf(np.array([complex(float(f[0]), 0.0)], dtype=np.clongdouble))[0].real
    if not (np.isfinite(g0) and g0 > L(1e-4900)):
        return None
    c = 1 / (1 - a * L(f[0]))
    gamma = (m_max + 10) * _UL / (1 - (m_max + 10) * _UL)
    fy = np.asarray(f[1: m_max + 1], dtype=L)
    y = np.arange(1, m_max + 1, dtype=L)
    signed = np.vstack([a * c * fy, b * c * y * fy])
    absw = np.abs(signed)
    nz = np.flatnonzero(f)
    top = int(nz[-1]) if nz.size else 0
    last = size - 1 if not math.isfinite(n_max) else min(size - 1, int(n_max) * top)
    n = size
    r = np.zeros((n, 3), dtype=L)  # reversed: value, bound, |value|
    r[n - 1] = (g0, g0 * (L(tl.pgf_rel) * _UL + gamma) + L(tl.pgf_abs) * _UL, g0)
    for x in range(1, last + 1):
        m = x if x < m_max else m_max
        if m == 0:
            break
        seg = r[n - x: n - x + m]
        res = signed[:, :m] @ seg[:, 0]
        gx = res[0] + res[1] / x
        mod = absw[:, :m] @ seg[:, 1:]
        ex = mod[0, 0] + mod[1, 0] / x
        rnd = gamma * (mod[0, 1] + mod[1, 1] / x)
        r[n - 1 - x] = (gx, ex + rnd, abs(gx))
        if not abs(gx) + ex < L(1e4000):
            return None
    center = np.maximum(r[::-1, 0], L(0))  # the exact values are >= 0
    radius = r[::-1, 1].astype(float) * (1 + 1e-9) + 1e-320  # float rounding, underflow
    return Enclosure(center, radius)
