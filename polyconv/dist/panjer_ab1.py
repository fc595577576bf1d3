"""Panjer's recursion for the ``(a, b, 1)`` class (zero-modified and zero-truncated counts).

For counts with ``p_k = (a + b / k) p_{k-1}`` only from ``k >= 2`` (Klugman, Panjer & Willmot,
*Loss Models*, Theorem 9.8, from memory; Sundt & Jewell, ASTIN Bulletin 12 (1981)):

    ``g_x = ([p_1 - (a + b) p_0] f_x + sum_{y=1..x} (a + b y / x) f_y g_{x-y}) / (1 - a f_0)``,
    ``g_0 = P_N(f_0)``.

Computed with a running first-order error bound as in
:func:`polyconv.dist.panjer.panjer_recursion`: a second column carries
``H_x = c (|extra| f_x u + sum |a + b y/x| f_y H_{x-y}) + gamma |g_x|`` (``gamma = gamma_{m+4}``,
Higham's dot-product constant).  Plain (unscaled) arithmetic: ``g_0`` must not underflow
(``P_N(f_0) > 1e-300``), else use the transform route.
"""

from __future__ import annotations

import math

import numpy as np

from .accuracy import UNIT_ROUNDOFF


def ab1_recursion(law, f: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """``(pmf, error bound per entry)`` of the compound on ``size`` points (module docstring).

    ``law`` is a :class:`~polyconv.dist.counts.CountsLaw` with ``ab`` and ``ab1`` (the
    coefficient ``p_1 - (a + b) p_0``).
    """
    a, b = law.ab
    extra = float(law.ab1)
    u = UNIT_ROUNDOFF
    f0 = float(f[0])
    c = 1.0 / (1.0 - a * f0)
    log_g0 = law.log_pgf_at(f0)
    g0 = math.exp(log_g0) if log_g0 > -math.inf else 0.0
    if log_g0 > -math.inf and g0 < 1e-300:
        raise ValueError(f"{law.name}: P(S = 0) = {g0:.3g} underflows; use method='fft'")
    m_max = max(0, min(f.size - 1, size - 1))
    gamma = (m_max + 4) * u / (1 - (m_max + 4) * u)
    fy = np.zeros(m_max + 1)
    fy[: min(f.size, m_max + 1)] = f[: m_max + 1]
    y = np.arange(1, m_max + 1, dtype=float)
    g = np.zeros(size)
    e = np.zeros(size)
    g[0] = g0
    e[0] = (4 + abs(log_g0 if g0 > 0 else 0.0)) * u * g0
    for x in range(1, size):
        m = min(x, m_max)
        fx = float(f[x]) if x < f.size else 0.0
        coef = a + b * y[:m] / x
        prev = g[x - 1 :: -1][:m] if x - 1 >= 0 else g[:0]
        prev_e = e[x - 1 :: -1][:m]
        w = coef * fy[1 : m + 1]
        val = c * (extra * fx + float(np.dot(w, prev)))
        err = c * (abs(extra) * fx * u + float(np.dot(np.abs(w), prev_e)))
        g[x] = val
        e[x] = err + gamma * (abs(val) + c * (abs(extra) * fx + float(np.dot(np.abs(w),
                                                                              np.abs(prev)))))
    return np.maximum(g, 0.0), e
