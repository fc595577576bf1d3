"""Panjer's recursion for compound distributions of the (a, b, 0) class, with a running error bound.

``g_x = [1 / (1 - a f_0)] sum_{y=1..x} (a + b y / x) f_y g_{x-y}``, ``g_0 = P_N(f_0)`` (Panjer,
ASTIN Bulletin 12 (1981)), in scaled arithmetic (``g_0`` kept as a logarithm, values rescaled by
``1e-280`` when they grow), so a large Poisson mean whose ``e^{-lambda}`` underflows needs no
splitting.  The independent route of :func:`polyconv.dist.compound.compound` (``method=
"recursion"``); the (a, b, 1) class is in :mod:`polyconv.dist.panjer_ab1`.

Caution: a model output, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math

import numpy as np

from . import accuracy
from .counts import CountsLaw

_RESCALE = 1e280
_LOG_RESCALE = math.log(_RESCALE)


def panjer_recursion(law: CountsLaw, f: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """Panjer's recursion on ``size`` points, scaled, with a running error bound.

    Implementation: values are stored reversed (``R[size-1-k] = g_k``) so that the ``m`` values
    ``g_{x-1}, ..., g_{x-m}`` are one contiguous slice, and the two sums
    ``sum f_y g_{x-y}``, ``sum y f_y g_{x-y}`` are one small matrix product per point.  A second
    column carries ``H_x = e_x + gamma |g_x|`` where ``e_x = c sum |a + b y/x| f_y H_{x-y}`` bounds
    the absolute error of ``g_x`` to first order (``gamma = gamma_{m+3}``, Higham's dot-product
    constant; ``|a + b y/x| <= |a| + |b| y/x``).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        The pmf and the bound of each entry's absolute error.
    """
    if law.ab1 is not None:  # (a, b, 1) class: polyconv.dist.panjer_ab1 (engineer actuarial)
        from .panjer_ab1 import ab1_recursion
        return ab1_recursion(law, f, size)
    a, b = law.ab
    u = accuracy.UNIT_ROUNDOFF
    f0 = float(f[0])
    c = 1.0 / (1.0 - a * f0)
    m_max = max(0, min(f.size - 1, size - 1))
    gamma = (m_max + 3) * u / (1 - (m_max + 3) * u)
    log_scale = law.log_pgf_at(f0)
    if log_scale == -math.inf:
        return np.zeros(size), np.zeros(size)
    fy = f[1 : m_max + 1]
    y = np.arange(1, m_max + 1, dtype=float)
    signed = np.vstack([a * c * fy, b * c * y * fy])
    mixed = a < 0 or b < 0
    absw = np.vstack([abs(a) * c * fy, abs(b) * c * y * fy]) if mixed else signed
    n = size
    r = np.zeros((n, 2))
    r[n - 1, 0] = 1.0
    r[n - 1, 1] = gamma
    for x in range(1, n):
        m = x if x < m_max else m_max
        if m == 0:
            break
        seg = r[n - x : n - x + m]
        res = signed[:, :m] @ seg
        gx = res[0, 0] + res[1, 0] / x
        if mixed:
            res2 = absw[:, :m] @ seg[:, 1]
            ex = res2[0] + res2[1] / x
        else:
            ex = res[0, 1] + res[1, 1] / x
        r[n - 1 - x, 0] = gx
        r[n - 1 - x, 1] = ex + gamma * abs(gx)
        if abs(gx) > _RESCALE or ex > _RESCALE:
            r[n - 1 - x :] /= _RESCALE
            log_scale += _LOG_RESCALE
    vals = r[::-1, 0]
    errs = r[::-1, 1]
    g = _unscale(vals, log_scale)
    e = _unscale(errs, log_scale)
    final_rel = (abs(log_scale) + 2) * u  # exp of the accumulated log scale
    return np.maximum(g, 0.0), e + final_rel * np.abs(g)


def _unscale(v: np.ndarray, log_scale: float) -> np.ndarray:
    out = np.zeros_like(v)
    nz = v != 0
    out[nz] = np.sign(v[nz]) * np.exp(np.log(np.abs(v[nz])) + log_scale)
    return out
