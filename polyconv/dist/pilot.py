"""Pilot estimates of a compound: a cheap, uncertified look at where its mass lies.

A goal-oriented plan (:mod:`polyconv.dist.tail_splice`, :mod:`polyconv.dist.goals`) needs rough
values of the aggregate's VaR, TVaR and survival function before it can choose a step and the
grids; nothing certified is taken from them (the answers are certified afterwards by the error
ledger of the real computation).  A pilot is therefore one transform ``g = IFFT(P(FFT(f)))``
(common practice, no source; Klugman, Panjer & Willmot, *Loss Models*, ch. 9) of the severity
put on a coarse step by the rule ``"up"`` (stochastically larger than the law, so its survival
function errs high: a plan sized from it errs on the safe side), tilted (Grubel & Hermesmeier,
ASTIN Bulletin 29 (1999)) against wrap-around, without the error bounds of
:func:`polyconv.dist.transform.transform_compound` and without the step check of
``Lattice.from_law``.

Caution: estimates for planning only; a model output, not advice (see :mod:`polyconv.dist`).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from ..numerics import transforms as tf
from .accuracy import dot
from .from_law import LawAccess, rule_pmf

PILOT_POINTS = 1 << 15
"""Points of a pilot grid."""

PILOT_TILT = 25.0
"""Tilt of a pilot's transform, ``theta M`` (aliased mass shrinks by ``e^{-25}``)."""


class Pilot(NamedTuple):
    """A pilot compound: ``pmf`` on ``0, step, ..., (len - 1) step`` and the mass beyond."""

    pmf: np.ndarray
    step: float
    beyond: float

    def sf(self, x: float) -> float:
        """Estimate of ``P(S > x)`` (mass beyond the pilot grid included)."""
        k = int(math.floor(x / self.step + 1e-9))
        if k < 0:
            return 1.0
        return float(np.sum(self.pmf[k + 1:])) + self.beyond

    def var(self, p: float) -> float:
        """Estimate of ``VaR_p`` (``inf`` beyond the pilot grid)."""
        k = int(np.searchsorted(np.cumsum(self.pmf), p))
        return k * self.step if k < self.pmf.size else math.inf

    def tvar(self, p: float, tail_moment: float = 0.0) -> float:
        """Estimate of ``TVaR_p``; ``tail_moment`` is the first moment of the mass beyond."""
        v = self.var(p)
        if not math.isfinite(v):
            return math.inf
        x = np.arange(self.pmf.size) * self.step
        excess = dot(self.pmf, np.maximum(x - v, 0.0)) + max(tail_moment, 0.0)
        return v + excess / (1 - p)


def pilot_compound(transform_law, law, step: float, size: int = PILOT_POINTS) -> Pilot:
    """The pilot of ``S = X_1 + ... + X_N`` on ``size`` points of ``step`` (module docstring).

    Parameters
    ----------
    transform_law : polyconv.dist.transform.TransformLaw
        The counting law (``classify(counts).transform``).
    law : frozen scipy.stats continuous law on ``[0, inf)``
        The severity.
    step : float
        Pilot step (coarse: the pilot should reach the far tail).
    size : int
        Pilot points.
    """
    f, _, _, _ = rule_pmf(LawAccess(law), 0.0, step, size, "up")
    m = tf.fast_length(2 * size, real=True)
    theta = PILOT_TILT / m
    ft = f * np.exp(-theta * np.arange(size))
    g = tf.irfft(transform_law.pgf(tf.rfft(tf.zero_padded(ft, m), -1, 1)), m, -1, 1)[:size]
    g = np.maximum(g * np.exp(theta * np.arange(size)), 0.0)
    return Pilot(g, float(step), max(1.0 - float(np.sum(g)), 0.0))
