"""``BivariateLattice``: a joint distribution of two amounts on ``(step * i, step * j)``.

The joint law of two dependent amounts ``(X, Y)`` on one common step ``h`` (so ``X + Y`` is on the
same lattice), ``i = 0..n1-1``, ``j = 0..n2-1``.  Mass outside the rectangle is not represented
(the error ledger's ``truncated``); it lies where ``X >= n1 h`` or ``Y >= n2 h``, with bounds
``tails = (P(X >= n1 h), P(Y >= n2 h))``.  A rectangle that deliberately stops early on ``Y``
(a *window*, e.g. an aggregate layer cut just past its aggregate limit) is legitimate: then the
``Y`` marginal is exact on its grid and the ``X`` marginal is refused as inaccurate by its ledger.

Operations (each carries the :class:`~polyconv.dist.ledger.ErrorLedger` on the flattened pmf):

* :func:`compound2` -- ``(S_X, S_Y) = sum_{i <= N} (X_i, Y_i)``, the generating function
  ``P_N(F(u, v))`` evaluated on a 2-D grid of roots of unity: ``g = IFFT2(P_N(FFT2(f)))``, with
  exponential tilting per axis and padding ``M_a >= 2 n_a`` against wrap-around (Grubel &
  Hermesmeier, ASTIN Bulletin 29 (1999), the 1-D route of :mod:`polyconv.dist.transform` done on
  each axis).  The 2-D transform is the row-column algorithm over the project's one FFT module
  (:mod:`polyconv.transforms`: ``rfft`` along ``j``, ``fft`` along ``i``), ``log2 M1 + log2 M2``
  butterfly levels: the rounding bound of a length ``M1 M2`` transform applies (derived here).
* :meth:`BivariateLattice.marginal`, :meth:`~BivariateLattice.total` (``X + Y``),
  :meth:`~BivariateLattice.columns_pushed` (``X + phi(Y)`` for an index map ``phi``),
  :meth:`~BivariateLattice.conditional_mean` (``E[Y | X = x]`` or ``E[X | Y = y]``),
  ``+`` (independent sum, 2-D convolution).

Push-forwards (marginals, sums) do not increase the L1 error (total variation); a marginal's
point error is at most ``min(l1, count * point)`` of the cells merged into it.

Caution: a model output, not advice; see :mod:`polyconv.dist`.
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics import transforms as tf
from ..numerics.budget import check_allocation
from . import accuracy
from .counts import CountsLaw, classify
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, sum_errors
from .transform import reduced_severity

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


class BivariateLattice:
    """Joint pmf ``P(X = i h, Y = j h)`` on an ``n1 x n2`` rectangle from the origin.

    Parameters
    ----------
    pmf : array_like
        Non-negative 2-D probabilities summing to at most 1 (the rest is truncated: outside).
    step : float
        Common step ``h > 0`` of both axes.
    errors : ErrorLedger, optional
        Ledger of the flattened pmf (default: exact, ``point = l1 = 0``).
    tails : (float, float), optional
        Bounds of ``P(X >= n1 h)`` and ``P(Y >= n2 h)`` (default: ``1 - sum(pmf)`` each).
    means : (float, float), optional
        Upper bounds of ``E[X]`` and ``E[Y]`` of the exact model (give the marginals a finite
        truncated first moment, so their TVaR is answerable); default unknown.
    """

    __slots__ = ("pmf", "step", "errors", "tails", "means")

    def __init__(self, pmf, step: float = 1.0, *, errors: ErrorLedger | None = None,
                 tails: tuple[float, float] | None = None,
                 means: tuple[float, float] | None = None):
        arr = np.array(pmf, dtype=float)
        if arr.ndim != 2 or arr.size == 0:
            raise ValueError(f"pmf must be a non-empty 2-D array; got shape {arr.shape}")
        if not np.all(np.isfinite(arr)) or np.min(arr) < 0:
            raise ValueError("pmf must be finite and non-negative")
        total = float(np.sum(arr))
        if total > 1 + 1e-9:
            raise ValueError(f"pmf sums to {total!r} > 1; probabilities are not renormalised")
        if not (isinstance(step, (int, float)) and step > 0 and math.isfinite(step)):
            raise ValueError(f"step must be a positive finite number; got {step!r}")
        missing = max(0.0, 1.0 - total)
        if missing < (math.log2(arr.size) + 4) * _U:
            missing = 0.0
        if errors is None:
            errors = ErrorLedger(0.0, 0.0, missing, arr.size, 0.0 if missing == 0 else math.inf,
                                 0.0)
        arr.flags.writeable = False
        self.pmf = arr
        self.step = float(step)
        self.errors = errors._replace(truncated=missing)
        self.tails = (missing, missing) if tails is None else (float(tails[0]), float(tails[1]))
        self.means = (math.inf, math.inf) if means is None else (float(means[0]),
                                                                  float(means[1]))

    @property
    def shape(self) -> tuple[int, int]:
        """``(n1, n2)``."""
        return self.pmf.shape

    def __repr__(self) -> str:
        e = self.errors
        return (f"BivariateLattice(shape={self.shape}, step={self.step!r}, "
                f"truncated_mass={e.truncated:.3g}, l1_error={e.l1:.3g})")

    # -- construction ----------------------------------------------------------------------
    @classmethod
    def from_split(cls, ground_up: Lattice, ceded_index) -> BivariateLattice:
        """Joint law of ``(X - c(X), c(X))`` for one claim ``X`` and a cession ``c``.

        ``ceded_index(k)`` maps ground-up indices ``k`` (amount ``origin + k h``, on the lattice
        from 0) to ceded indices, ``0 <= c(k) <= k``.  The pmf of ``X`` is carried cell by cell
        (a push-forward: errors unchanged, truncated mass stays beyond, where ``X`` is).
        """
        h = ground_up.step
        k0 = round(ground_up.origin / h)
        if k0 < 0 or abs(ground_up.origin / h - k0) > 1e-9 * max(1.0, abs(k0)):
            raise ValueError("ground_up origin must be a non-negative whole multiple of its step")
        k = k0 + np.arange(len(ground_up))
        c = np.asarray(ceded_index(k), dtype=np.int64)
        if c.shape != k.shape or np.any(c < 0) or np.any(c > k):
            raise ValueError("ceded_index must map each index k to an integer in [0, k]")
        r = k - c
        pmf = np.zeros((int(r.max()) + 1, int(c.max()) + 1))
        np.add.at(pmf, (r, c), ground_up.pmf)
        e = ground_up.errors
        out = cls(pmf, h, tails=(ground_up.truncated_mass, ground_up.truncated_mass))
        out.errors = ErrorLedger(e.point, e.l1, out.errors.truncated, pmf.size,
                                 e.truncated_moment, cum_bound(e))
        mean_hi = ground_up._br().mean_range(ground_up._mean())[1]
        out.means = (mean_hi, mean_hi)
        return out

    # -- push-forwards ---------------------------------------------------------------------
    def _lattice(self, vec: np.ndarray, extra: float, truncated_from: int, mean: float
                 ) -> Lattice:
        """A Lattice from a pushed-forward vector: ``extra`` is mass that belongs on the grid
        but is outside the rectangle (a computed error)."""
        e = self.errors
        merged = self.pmf.size // max(vec.size, 1) + 1
        point = min(e.l1, merged * e.point) + extra
        l1 = e.l1 + extra
        cum = cum_bound(e) + extra
        on_grid = self.step * float(np.dot(np.arange(vec.size), vec))
        moment = math.inf if not math.isfinite(mean) else max(
            mean * (1 + 4 * _U) - on_grid + l1 * self.step * vec.size, 1e-300)
        if e.truncated_moment == 0 and extra == 0:
            moment = 0.0
        led = ErrorLedger(min(point, 2.0), min(l1, 2.0), 0.0, int(min(truncated_from, vec.size)),
                          moment, min(cum, 2.0))
        return Lattice._make(vec, self.step, 0.0, led)

    def marginal(self, axis: int) -> Lattice:
        """Law of ``X`` (``axis = 0``) or ``Y`` (``axis = 1``).

        Mass with the other coordinate beyond the rectangle is missing from this marginal's
        grid: its bound (``tails``) is added to the ledger's errors.
        """
        if axis not in (0, 1):
            raise ValueError(f"axis must be 0 or 1; got {axis!r}")
        vec = self.pmf.sum(axis=1 - axis)
        return self._lattice(vec, self.tails[1 - axis], vec.size, self.means[axis])

    def total(self) -> Lattice:
        """Law of ``X + Y`` on ``n1 + n2 - 1`` points (sums of the anti-diagonals).

        Mass outside the rectangle has ``X + Y >= min(n1, n2) h``: it is the truncated part,
        lying from there (ledger ``truncated_from``).
        """
        n1, n2 = self.shape
        return self._lattice(self.columns_pushed(np.arange(n2)), 0.0, min(n1, n2),
                             self.means[0] + self.means[1])

    def columns_pushed(self, offsets: np.ndarray, size: int | None = None) -> np.ndarray:
        """``v[i + offsets[j]] += pmf[i, j]``: the pmf of ``X + phi(Y)`` on the grid (a raw
        vector; ``size`` points, default ``n1 + max(offsets)``)."""
        n1, n2 = self.shape
        off = np.asarray(offsets, dtype=np.int64)
        if off.shape != (n2,) or np.any(off < 0):
            raise ValueError(f"offsets must be {n2} non-negative integers")
        size = int(n1 + off.max()) if size is None else int(size)
        out = np.zeros(size)
        for j in range(n2):
            o = int(off[j])
            if o >= size:
                continue
            stop = min(n1, size - o)
            out[o:o + stop] += self.pmf[:stop, j]
        return out

    def conditional_mean(self, axis: int) -> np.ndarray:
        """``E[Y | X = i h]`` per row (``axis = 0``) or ``E[X | Y = j h]`` per column
        (``axis = 1``), over the rectangle; ``nan`` where the conditioning cell has no mass."""
        if axis not in (0, 1):
            raise ValueError(f"axis must be 0 or 1; got {axis!r}")
        p = self.pmf if axis == 0 else self.pmf.T
        mass = p.sum(axis=1)
        num = p @ (self.step * np.arange(p.shape[1]))
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(mass > 0, num / np.where(mass > 0, mass, 1.0), np.nan)

    def __add__(self, other: BivariateLattice) -> BivariateLattice:
        """Independent sum ``(X1 + X2, Y1 + Y2)``: full 2-D convolution (zero-padded FFT).

        Ledger: :func:`polyconv.dist.ledger.sum_errors` (Young's inequality holds on ``Z^2``);
        rounding per point: Percival's bound at the level count of a length ``M1 M2``
        transform (row-column algorithm).
        """
        if not isinstance(other, BivariateLattice):
            return NotImplemented
        if abs(self.step - other.step) > 1e-9 * self.step:
            raise ValueError(f"steps differ ({self.step!r}, {other.step!r})")
        a, b = self.pmf, other.pmf
        s1, s2 = a.shape[0] + b.shape[0] - 1, a.shape[1] + b.shape[1] - 1
        m1, m2 = tf.fast_length(s1, real=False), tf.fast_length(s2, real=True)
        check_allocation(3 * 16 * m1 * (m2 // 2 + 1), f"a 2-D convolution of {s1} x {s2} points")
        fa = _fft2(a, m1, m2)
        fa *= _fft2(b, m1, m2)
        c = np.clip(_ifft2(fa, m1, m2)[:s1, :s2], 0.0, 1.0)
        r_point = accuracy.fft_product_bound(float(np.linalg.norm(a)), float(np.linalg.norm(b)),
                                             m1 * m2)
        ea, eb = self.errors, other.errors
        ma, mb = float(a.sum()), float(b.sum())
        point, l1, cum = sum_errors(ea, ma, float(a.max()), eb, mb, float(b.max()), r_point,
                                    c.size * r_point)
        out = BivariateLattice(np.minimum(c, 1.0), self.step,
                               tails=(self.tails[0] + other.tails[0],
                                      self.tails[1] + other.tails[1]),
                               means=(self.means[0] + other.means[0],
                                      self.means[1] + other.means[1]))
        moment = 0.0 if out.errors.truncated == 0 and ea.truncated_moment == 0 and \
            eb.truncated_moment == 0 else math.inf
        out.errors = ErrorLedger(point, l1, out.errors.truncated, c.size, moment, cum)
        return out


def _fft2(a: np.ndarray, m1: int, m2: int) -> np.ndarray:
    """Zero-padded real 2-D transform: ``rfft`` along axis 1, ``fft`` along axis 0."""
    padded = np.zeros((m1, m2))
    padded[: a.shape[0], : a.shape[1]] = a
    half = tf.rfft(padded, -1, 1)
    del padded
    return tf.fft(half, 0, 1)


def _ifft2(spec: np.ndarray, m1: int, m2: int) -> np.ndarray:
    return tf.irfft(tf.ifft(spec, 0, 1), m2, -1, 1)


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
    # rfft along the short axis of the (small) severity, then column blocks: fft along the
    # long axis, P_N, inverse fft, keep the n1 rows wanted (memory ~ n1 x m2 / 2, not m1 x m2)
    cols = np.empty((half, f.shape[0]), dtype=complex)  # half x rows: blocks of rows, each
    for r0 in range(0, f.shape[0], 4 * ROW_BLOCK):     # transposed, transformed along axis 0
        cols[:, r0:r0 + 4 * ROW_BLOCK] = tf.rfft(np.pad(ft[r0:r0 + 4 * ROW_BLOCK].T,
                                                        ((0, m2 - f.shape[1]), (0, 0))), 0, 1)
    del ft
    spec = np.empty((half, n1), dtype=complex)
    sq = lip_sq = 0.0
    for c0 in range(0, half, COLUMN_BLOCK):
        c1 = min(half, c0 + COLUMN_BLOCK)
        buf = np.zeros((c1 - c0, m1), dtype=complex)  # contiguous along the long axis
        buf[:, : cols.shape[1]] = cols[c0:c1]
        phi = tf.fft(buf, -1, 1)
        del buf
        big = law.transform.pgf(phi)
        weight = np.full(c1 - c0, 2.0)
        weight[(np.arange(c0, c1) == 0) | ((np.arange(c0, c1) == m2 // 2) & (m2 % 2 == 0))] = 1
        mag = big.real ** 2 + big.imag ** 2
        sq += float(weight @ mag.sum(axis=1))
        if law.transform.ratio is not None:  # |P'(phi)|^2 = |r(phi)|^2 |P(phi)|^2
            lip_sq += float(weight @ (np.abs(law.transform.ratio(phi)) ** 2 * mag
                                      ).sum(axis=1))
        else:
            lip_sq = math.inf
        del phi
        spec[c0:c1] = tf.ifft(big, -1, 1)[:, :n1]
        del big
    del cols
    l2_out = math.sqrt(sq / (m1 * m2))  # Parseval over the full (Hermitian) spectrum
    u1, u2 = np.exp(th1 * np.arange(n1)), np.exp(th2 * np.arange(n2))
    out = np.empty((n1, n2))
    for r0 in range(0, n1, ROW_BLOCK):
        r1 = min(n1, r0 + ROW_BLOCK)
        g = tf.irfft(np.ascontiguousarray(spec[:, r0:r1].T), m2, -1, 1)[:, :n2]
        out[r0:r1] = np.clip(g * u1[r0:r1, None] * u2[None, :], 0.0, 1.0)
    del spec
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
