"""Which stage matters: percentiles with a stage sped up or removed, and the speed-up a target
needs.

For a :class:`~polyconv.dist.network.Network`, :func:`stage_effects` re-evaluates the network
with each stage's delay scaled by ``1 - speedup`` (:meth:`Lattice.scaled`: the law of ``c D``
on the same grid) and with the stage removed (a zero delay), and reports the chosen
percentiles of the end-to-end delay.  :func:`required_speedup` solves "how much faster must
stage S be for the ``level``-quantile to fall below ``target``": every block (sum, maximum,
minimum, order statistic, mixture, retry response up to its fixed timeouts) is non-decreasing
in each stage's delay, and ``c -> c D`` is stochastically increasing, so the quantile is
non-decreasing in the factor ``c`` and bisection on ``c in [0, 1]`` finds the largest factor
that meets the target (to ``tol``).  Percentiles are the lattices' own quantiles (never below
the exact computation's bracket); with sampled stages read the bracket too.

Model output, not advice: a stage sped up in a model may not be speedable in practice, and
speeding it changes load elsewhere; check against qualified engineering practice.
"""

from __future__ import annotations

import math
import warnings
from typing import NamedTuple

import numpy as np

from .lattice import Lattice
from .ledger import ErrorLedger
from .network import Network
from .risk import check_level, real_value


class StageEffect(NamedTuple):
    """Percentiles of the end-to-end delay: as is, with the stage faster, without it."""

    stage: str
    level: float
    base: float
    faster: float
    removed: float


class Target(NamedTuple):
    """Solution of :func:`required_speedup`.

    Attributes
    ----------
    stage : str
    factor : float
        Largest delay factor ``c`` meeting the target (``nan`` when even removal does not).
    speedup : float
        ``1 - factor``: the stage must be this fraction faster.
    quantile : float
        The quantile at ``factor``.
    reachable : bool
        False when the target is missed even with the stage removed.
    iterations : int
        Network evaluations of the bisection.
    """

    stage: str
    factor: float
    speedup: float
    quantile: float
    reachable: bool
    iterations: int


def _zero_like(lat: Lattice) -> Lattice:
    """A zero delay on ``lat``'s grid (origin 0 must lie on it)."""
    k = -lat.origin / lat.step
    if abs(k - round(k)) > 1e-9 * max(1.0, abs(k)):
        raise ValueError("a stage can be removed only when 0 lies on its grid")
    return Lattice._make(np.array([1.0]), lat.step, 0.0, ErrorLedger(0.0, 0.0, 0.0, 1, 0.0, 0.0))


def _quantiles(network: Network, replace, levels) -> list[float]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        total = network.evaluate(replace)
        return [float(total.quantile(p)) for p in levels]


def leaf_stages(network: Network) -> list[str]:
    """Stages of the network given as laws (not blocks), in evaluation order."""
    return [n for n in network._order if isinstance(network.nodes[n], Lattice)]


def stage_effects(network: Network, levels, *, speedup: float = 0.1, stages=None,
                  rule: str = "nearest") -> list[StageEffect]:
    """Each stage's effect on the ``levels``-quantiles (module docstring).

    Parameters
    ----------
    network : Network
    levels : sequence of float
        Quantile levels in ``(0, 1)``, e.g. ``[0.99]``.
    speedup : float
        Fraction in ``(0, 1)`` by which a stage is made faster (0.1: 10 % faster).
    stages : sequence of str, optional
        Which stages (default: every stage given as a law).
    rule : str
        Scaling rule of :meth:`Lattice.scaled`.
    """
    lv = [float(p) for p in np.atleast_1d(check_level(levels, "levels"))]
    x = real_value(speedup, "speedup")
    if not 0 < x < 1:
        raise ValueError(f"speedup must lie in (0, 1) (0.1 = 10 % faster); got {speedup!r}")
    names = leaf_stages(network) if stages is None else list(stages)
    laws = network.evaluate_all()
    base = _quantiles(network, None, lv)
    out = []
    for s in names:
        if s not in laws:
            raise ValueError(f"stages names {s!r}, which the network does not use")
        fast = _quantiles(network, {s: laws[s].scaled(1 - x, rule=rule)}, lv)
        gone = _quantiles(network, {s: _zero_like(laws[s])}, lv)
        out += [StageEffect(s, p, b, f, g) for p, b, f, g in zip(lv, base, fast, gone,
                                                                  strict=True)]
    return out


def required_speedup(network: Network, stage: str, *, level: float, target: float,
                     tol: float = 1e-3, rule: str = "nearest") -> Target:
    """Largest factor ``c`` on stage ``stage``'s delay with ``quantile(level) < target``.

    Bisection on ``c in [0, 1]`` (the quantile is non-decreasing in ``c``, module docstring),
    stopping when the bracket is narrower than ``tol``; at most ``ceil(log2(1/tol)) + 2``
    network evaluations.
    """
    p = float(check_level(level, "level"))
    t = real_value(target, "target")
    tol = real_value(tol, "tol")
    if not 0 < tol < 1:
        raise ValueError(f"tol must lie in (0, 1); got {tol!r}")
    laws = network.evaluate_all()
    if stage not in laws:
        raise ValueError(f"stage {stage!r} is not used by the network")
    law = laws[stage]

    def q(c: float) -> float:
        repl = {stage: _zero_like(law) if c == 0 else law.scaled(c, rule=rule)}
        return _quantiles(network, repl, [p])[0]

    top = q(1.0)
    if top < t:
        return Target(stage, 1.0, 0.0, top, True, 1)
    bottom = q(0.0)
    if not bottom < t:
        return Target(stage, math.nan, math.nan, bottom, False, 2)
    lo, hi, q_lo, n = 0.0, 1.0, bottom, 2
    while hi - lo > tol:
        mid = 0.5 * (lo + hi)
        v = q(mid)
        n += 1
        if v < t:
            lo, q_lo = mid, v
        else:
            hi = mid
    return Target(stage, lo, 1.0 - lo, q_lo, True, n)
