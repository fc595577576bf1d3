"""Bivariate lattices: :class:`BivariateLattice` and the compound sum :func:`compound2`.

The class (joint pmf, marginals, conditional expectations, independent sums by the N-D
convolution of :mod:`polyconv.pipeline.nd`) lives in :mod:`polyconv.dist.bivariate_lattice`
and is re-exported here.

:func:`compound2` -- ``(S_X, S_Y) = sum_{i <= N} (X_i, Y_i)``: the generating function
``P_N(F(u, v))`` evaluated on a 2-D grid of roots of unity, ``g = IFFT2(P_N(FFT2(f)))``, with
exponential tilting per axis and padding ``M_a >= 2 n_a`` against wrap-around (Grubel &
Hermesmeier, ASTIN Bulletin 29 (1999), the 1-D route of :mod:`polyconv.dist.transform` done on
each axis).  The 2-D transform is the shared pruned row-column transform of
:func:`polyconv.engines.fft_nd.mapped_spectrum_2d` (``rfft`` along ``j``, ``fft`` along ``i``, a
block of frequency columns at a time), ``log2 M1 + log2 M2`` butterfly levels: the rounding
bound of a length ``M1 M2`` transform applies (:mod:`polyconv.pipeline.nd`).

Caution: a model output, not advice; defer to local regulation and licensed practice.
"""

from __future__ import annotations

import math

import numpy as np

from ..engines.fft_nd import mapped_spectrum_2d
from ..numerics import transforms as tf
from ..numerics.budget import check_allocation
from . import accuracy
from .bivariate_lattice import BivariateLattice
from .counts import CountsLaw, classify
from .ledger import ErrorLedger
from .transform import reduced_severity

__all__ = ["BivariateLattice", "compound2"]

_U = accuracy.UNIT_ROUNDOFF
MIN_TRANSFORM = 64
"""Shortest transform per axis: a short axis (a window) is padded at least this far, so the
mass wrapped onto it is damped by the tilt over enough points."""

COLUMN_BLOCK = 32
"""Frequency columns of the short axis transformed along the long axis at a time."""

ROW_BLOCK = 4096
"""Rows inverse-transformed at a time along the short axis."""

DEFAULT_TAIL = 1e-13
"""Default grid per axis: Chernoff-bounded mass beyond it below this."""


def _axis_tail(law: CountsLaw, marginal: np.ndarray, x: float) -> float:
    """log of a Chernoff bound of ``P(S_axis >= x)``: ``min_t log P_N(M_X(t)) - t x`` over the
    same log-spaced ``t`` grid as :func:`polyconv.dist.transform.log_chernoff_tail`, evaluated
    at once (any ``t`` gives a valid bound), on the axis' marginal severity reduced to block
    upper ends (stochastically larger, so the bound stays rigorous)."""
    idx, mass = reduced_severity(marginal)
    if x <= 0 or idx.size == 0:
        return 0.0
    t = np.geomspace(1e-3, 1e3, 61)[:, None] / float(x)
    expo = t * idx[None, :] + np.log(mass)[None, :]
    top = expo.max(axis=1)
    s = top + np.log(np.exp(expo - top[:, None]).sum(axis=1))
    vals = [law.transform.log_pgf_real(float(si)) - float(ti) * x
            for si, ti in zip(s, t[:, 0], strict=True)]
    return min(0.0, min(vals))


def _axis_size(law: CountsLaw, marginal: np.ndarray, tol: float, cap: int) -> int:
    """Smallest grid length in ``[len(marginal), cap]`` with :func:`_axis_tail` below ``tol``
    (bisection; ``cap`` when none is)."""
    lo, hi, logtol = marginal.size, cap, math.log(tol)
    if _axis_tail(law, marginal, lo) <= logtol:
        return lo
    if _axis_tail(law, marginal, hi) > logtol:
        return hi
    while hi - lo > max(1, lo // 256):
        mid = (lo + hi) // 2
        lo, hi = (lo, mid) if _axis_tail(law, marginal, mid) <= logtol else (mid, hi)
    return hi


def _pgf_slope(law: CountsLaw, l1: float, mean_n: float) -> float:
    """Bound of ``P_N'(1 + l1)`` by a difference quotient (a PGF is convex on the reals)."""
    if l1 <= 0:
        return mean_n
    delta = max(l1, 1e-8)
    lp = law.transform.log_pgf_real
    slope = (math.expm1(lp(math.log1p(2 * delta))) - math.expm1(lp(math.log1p(delta)))) / delta
    return max(slope * (1 + 1e-6), mean_n) if math.isfinite(slope) else math.inf


def compound2(counts, severity: BivariateLattice, shape: tuple[int, int] | None = None, *,
              pad: float | tuple = 2.0, cap: int = 1 << 16) -> BivariateLattice:
    """Joint law of ``(sum_{i <= N} X_i, sum_{i <= N} Y_i)`` for i.i.d. pairs ``(X_i, Y_i)``.

    ``g = IFFT2(P_N(FFT2(f e^{-theta1 i - theta2 j}))) e^{theta1 i + theta2 j}`` on transform
    lengths ``M_a >= pad * n_a`` (module docstring).

    Parameters
    ----------
    counts : scipy.stats frozen discrete law
        Law of ``N`` (any law :func:`polyconv.dist.compound` accepts).
    severity : BivariateLattice
        Joint law of one pair (e.g. :meth:`BivariateLattice.from_split`).
    shape : (int, int), optional
        Rectangle of the result.  Default per axis: the smallest grid whose Chernoff-bounded
        tail is below :data:`DEFAULT_TAIL`, at most ``cap``.  A short second axis is a window.
    pad : float or (float, float)
        Transform length per axis (or each) relative to the result (``>= 1``; 2: DESIGN.md s. 6).

    Returns
    -------
    BivariateLattice
        ``tails`` hold the Chernoff bounds of each aggregate beyond its axis; ``errors``: the
        route's rounding (:func:`polyconv.dist.accuracy.transform_compound_floor` at length
        ``M1 M2``) untilted per axis, the aliasing bound of each axis, and the severity's errors
        carried through the PGF (``P_N(1 + l1) - 1`` in L1, as in
        :func:`polyconv.dist.compound.compound_ledger`).

    Notes
    -----
    Assumes ``N`` independent of the pairs; within a pair any dependence.  A model output, not
    advice.
    """
    law = classify(counts)
    if not isinstance(severity, BivariateLattice):
        raise TypeError(f"severity must be a BivariateLattice; got {type(severity).__name__}")
    f = severity.pmf
    fx, fy = f.sum(axis=1), f.sum(axis=0)
    if shape is None:
        shape = (_axis_size(law, fx, DEFAULT_TAIL, cap), _axis_size(law, fy, DEFAULT_TAIL, cap))
    n1, n2 = (int(s) for s in shape)
    if n1 < 1 or n2 < 1:
        raise ValueError(f"shape must be two positive integers; got {shape!r}")
    if not min(pads := pad if isinstance(pad, tuple) else (pad, pad)) >= 1:
        raise ValueError(f"pad must be >= 1 (or a pair of them); got {pad!r}")
    m1 = tf.fast_length(max(int(math.ceil(pads[0] * n1)), f.shape[0], MIN_TRANSFORM), real=False)
    m2 = tf.fast_length(max(int(math.ceil(pads[1] * n2)), f.shape[1], MIN_TRANSFORM), real=True)
    half = m2 // 2 + 1
    check_allocation(16 * n1 * half + 8 * n1 * n2 + 16 * f.shape[0] * half
                     + 16 * m1 * COLUMN_BLOCK * 3,
                     f"a bivariate compound on {n1} x {n2} points (transform {m1} x {m2})")
    la, lb = _axis_tail(law, fx, m1), _axis_tail(law, fy, m2)
    eta = accuracy.fft_relative_error(m1 * m2)
    pre = eta * (law.transform.mean + 1) + (law.transform.pgf_rel + law.transform.pgf_abs) * _U
    th1 = accuracy.choose_tilt(m1, n1, la, pre)  # the second axis' tilt sees the first's
    th2 = accuracy.choose_tilt(m2, n2, lb, pre * math.exp(th1 * max(n1 - 1, 0)))
    w1 = np.exp(-th1 * np.arange(f.shape[0]))
    w2 = np.exp(-th2 * np.arange(f.shape[1]))
    ft = f * w1[:, None] * w2[None, :]
    l1_tilted = float(np.sum(ft))
    # the shared pruned 2-D transform (engines.fft_nd) with P_N applied per column block:
    # memory ~ n1 x m2 / 2, not m1 x m2; the block sums give ||P_N(phi)||_2 and ||P_N'(phi)||_2
    sums = {"sq": 0.0, "lip_sq": 0.0}

    def pgf_of_block(phi: np.ndarray, c0: int, c1: int) -> np.ndarray:
        big = law.transform.pgf(phi)
        cols = np.arange(c0, c1)
        weight = np.where((cols == 0) | ((cols == m2 // 2) & (m2 % 2 == 0)), 1.0, 2.0)
        mag = big.real ** 2 + big.imag ** 2
        sums["sq"] += float(weight @ mag.sum(axis=1))
        if law.transform.ratio is not None:  # |P'(phi)|^2 = |r(phi)|^2 |P(phi)|^2
            sums["lip_sq"] += float(weight @ (np.abs(law.transform.ratio(phi)) ** 2 * mag
                                              ).sum(axis=1))
        else:
            sums["lip_sq"] = math.inf
        return big

    g = mapped_spectrum_2d(ft, (m1, m2), (n1, n2), pgf_of_block, COLUMN_BLOCK, ROW_BLOCK)
    del ft
    u1, u2 = np.exp(th1 * np.arange(n1)), np.exp(th2 * np.arange(n2))
    out = g  # untilted in place, a block of rows at a time
    for r0 in range(0, n1, ROW_BLOCK):
        r1 = min(n1, r0 + ROW_BLOCK)
        np.clip(out[r0:r1] * u1[r0:r1, None] * u2[None, :], 0.0, 1.0, out=out[r0:r1])
    sq, lip_sq = sums["sq"], sums["lip_sq"]
    l2_out = math.sqrt(sq / (m1 * m2))  # Parseval over the full (Hermitian) spectrum
    # Lipschitz factor ||P'(phi)||_2 / sqrt(M) over the whole spectrum (at most E[N])
    lip = min(math.sqrt(lip_sq / (m1 * m2)), law.transform.mean)
    rounding = accuracy.transform_compound_floor(m1 * m2, l1_tilted, lip,
                                                 law.transform.pgf_rel * _U,
                                                 law.transform.pgf_abs * _U, l2_out)
    r_point = rounding * math.exp(th1 * (n1 - 1) + th2 * (n2 - 1))
    alias = math.exp(min(0.0, la) - th1 * m1) + math.exp(min(0.0, lb) - th2 * m2)
    r_l1 = accuracy.untilted_l1(rounding, th1, n1) * accuracy.untilted_l1(1.0, th2, n2) \
        + alias * min(1.0, float(out.sum()) + alias)
    e = severity.errors
    if e.l1 > 0:
        log1 = law.transform.log_pgf_real(math.log1p(e.l1))
        l1_in = math.expm1(log1) if math.isfinite(log1) else math.inf
    else:
        l1_in = 0.0
    mean_n = float(counts.mean())
    point = r_point + alias + e.point * _pgf_slope(law, e.l1, mean_n)
    l1 = min(r_l1 + l1_in, 2.0)
    res = BivariateLattice(out, severity.step,
                           tails=(math.exp(_axis_tail(law, fx, n1)),
                                  math.exp(_axis_tail(law, fy, n2))),
                           means=(mean_n * severity.means[0], mean_n * severity.means[1]))
    res.errors = ErrorLedger(min(point, l1), l1, res.errors.truncated, out.size,
                             math.inf if res.errors.truncated > 0 else 0.0, l1)
    return res
