"""Operations on lattices with their error ledgers: independent sum, shift, n-fold sum, layer.

Each function takes Lattice-like inputs (``pmf``, ``step``, ``origin``, ``errors``) and returns
the parts ``(pmf, step, origin, ledger)`` of the result; :class:`polyconv.dist.Lattice` wraps
them (this module does not import it, so there is no import cycle).  The ledger rules are those
of :mod:`polyconv.dist.ledger`; rounding of each product comes from the engine's published bound
(:mod:`polyconv.dist.accuracy`).
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from ..pipeline.execute import convolve_prepared
from . import accuracy, long_route
from .enclosure import Enclosure, EnclosureSums, pick
from .ledger import (
    ErrorLedger,
    cum_bound,
    power_errors,
    power_moment,
    sum_errors,
    sum_moment,
    t_bounds,
    untruncated,
)
from .risk import real_value
from .transform import check_transform_budget, power_law, transform_compound

STEP_RTOL = 1e-9
"""Relative tolerance within which two lattice steps count as equal."""

MAX_LAYER_PAD = 1 << 24
"""Most points a layer may add below the lattice (a deductible far below the origin)."""

_U = accuracy.UNIT_ROUNDOFF


def steps_equal(h1: float, h2: float) -> bool:
    """Steps equal within :data:`STEP_RTOL`."""
    return abs(h1 - h2) <= STEP_RTOL * max(h1, h2)


def abs_moment(pmf: np.ndarray, step: float, origin: float, ledger: ErrorLedger) -> float:
    """Upper bound of ``sum |x_k| q_k``, the represented part's absolute first moment."""
    x = np.abs(origin + step * np.arange(pmf.size))
    return float(np.dot(pmf, x)) * (1 + (pmf.size + 2) * _U) + ledger.l1 * float(np.max(x))


def truncated_from(parts: list[tuple[ErrorLedger, int]], n_out: int) -> int:
    """Lowest index of the result at which truncated mass of any input may lie: the minimum of
    ``offset + truncated_from`` over inputs with a truncated part (``n_out`` if none)."""
    lows = [off + e.truncated_from for e, off in parts if not untruncated(e)]
    return int(min([n_out] + lows))


def second_moment_high(x) -> float:
    """Certified upper bound of ``E[X^2]`` of a Lattice's exact model (on-grid part and its
    error, plus the ledger's truncated second moment; ``inf`` when unknown)."""
    e = x.errors
    if not untruncated(e) and not math.isfinite(e.truncated_moment2):
        return math.inf
    pmf = np.asarray(x.pmf)
    vals = x.values
    with np.errstate(over="ignore", invalid="ignore"):
        m2 = float(np.dot(pmf, vals * vals))
        return float(x._br().second_moment_range(pmf, m2)[1])


def independent_sum(x, y) -> tuple[np.ndarray, float, float, ErrorLedger]:
    """``X + Y`` for independent ``X``, ``Y``: ``polyconv.convolve`` of the pmfs.

    Rounding: the engine's bound per point (:func:`polyconv.dist.accuracy.convolution_bound`);
    in L1, ``gamma_m ||a||_1 ||b||_1`` for the direct engine (Higham, section 3.1) and the
    output length times the per-point bound for transform engines.
    """
    if not steps_equal(x.step, y.step):
        raise ValueError(f"cannot add lattices with different steps ({x.step!r} and {y.step!r}); "
                         "re-discretise one of them on the other's step")
    a, b = np.asarray(x.pmf), np.asarray(y.pmf)
    ma, mb = float(a.sum()), float(b.sum())
    if a.size * b.size <= long_route.LONG_MAX_PRODUCT and long_route.available():
        return _long_sum(x, y, a, b, ma, mb)
    c, the_plan = convolve_prepared(a, b)  # prepared once: the plan is the one that ran
    c = np.clip(c, 0.0, 1.0)
    r_point = accuracy.convolution_bound(the_plan.engine, a, b, the_plan.transform_length)
    if the_plan.engine == "direct":
        m = min(a.size, b.size)
        r_l1 = m * _U / (1 - m * _U) * ma * mb * (1 + 1e-12)
    else:
        r_l1 = c.size * r_point
    ex, ey = x.errors, y.errors
    point, l1, cum = sum_errors(ex, ma, float(a.max()), ey, mb, float(b.max()), r_point, r_l1)
    moment = sum_moment(ex, abs_moment(a, x.step, x.origin, ex), ey,
                        abs_moment(b, y.step, y.origin, ey))
    tf = truncated_from([(ex, 0), (ey, 0)], c.size)
    moment2 = 0.0 if untruncated(ex) and untruncated(ey) else _sum_moment2(x, y, c, l1, moment)
    return c, x.step, x.origin + y.origin, ErrorLedger(point, l1, 0.0, tf, moment, cum,
                                                       moment2)


def _long_sum(x, y, a: np.ndarray, b: np.ndarray, ma: float, mb: float):
    """:func:`independent_sum` of short inputs: the product in longdouble, rounded once, with
    its enclosure (:func:`polyconv.dist.long_route.convolve`) plus the inputs' carried
    per-point errors."""
    enc = long_route.convolve(a, b)
    c = np.clip(enc.center, 0, 1).astype(float)
    sums = EnclosureSums(c, enc)
    r_point, r_l1, r_cum = sums.ledger_numbers()
    ex, ey = x.errors, y.errors
    point, l1, cum = sum_errors(ex, ma, float(a.max()), ey, mb, float(b.max()), r_point, r_l1,
                                r_cum)
    if ex.l1 > 0 or ey.l1 > 0:  # the enclosure is of the computed inputs' product
        enc = Enclosure(enc.center, enc.radius + max(point - r_point, 0.0) * (1 + 4 * _U))
    moment = sum_moment(ex, abs_moment(a, x.step, x.origin, ex), ey,
                        abs_moment(b, y.step, y.origin, ey))
    tf = truncated_from([(ex, 0), (ey, 0)], c.size)
    moment2 = 0.0 if untruncated(ex) and untruncated(ey) else _sum_moment2(x, y, c, l1, moment)
    return c, x.step, x.origin + y.origin, ErrorLedger(point, l1, 0.0, tf, moment, cum,
                                                       moment2), None, None, enc


def _sum_moment2(x, y, c: np.ndarray, l1: float, moment: float) -> float:
    """Truncated second moment of ``X + Y``: the truncated part lies on paths where ``X`` or
    ``Y`` is in its own truncated part ``T``, and by independence
    ``E[(X + Y)^2 1{T_X}] <= m2_X + 2 m1_X E|Y| + t_X E[Y^2]`` (and the same with the roles
    exchanged), ``m1``, ``m2``, ``t`` the ledgers' bounds."""
    parts = 0.0
    for a, b in ((x, y), (y, x)):
        e = a.errors
        if untruncated(e):
            continue
        if not (math.isfinite(e.truncated_moment2) and math.isfinite(e.truncated_moment)):
            return math.inf
        ab = abs_moment(np.asarray(b.pmf), b.step, b.origin, b.errors) + \
            b.errors.truncated_moment
        t = min(1.0, e.truncated + e.l1)
        parts += e.truncated_moment2 + 2 * e.truncated_moment * ab + t * second_moment_high(b)
    return parts * (1 + 8 * _U)


def shifted(x, c: float) -> tuple[np.ndarray, float, float, ErrorLedger]:
    """``X + c``: same pmf; the truncated part's first moment may grow by ``|c| T``, its second
    by ``2 |c| M + c^2 T`` (``(X + c)^2 <= X^2 + 2 |c| |X| + c^2``)."""
    e = x.errors
    moment, moment2 = e.truncated_moment, e.truncated_moment2
    if not untruncated(e):
        t = min(1.0, e.truncated + e.l1)
        moment2 = (moment2 + 2 * abs(c) * moment + c * c * t) * (1 + 4 * accuracy.UNIT_ROUNDOFF)
        moment += abs(c) * t
    return np.asarray(x.pmf), x.step, x.origin + c, e._replace(truncated_moment=moment,
                                                                 truncated_moment2=moment2)


def nfold(x, n: int) -> tuple[np.ndarray, float, float, ErrorLedger]:
    """Sum of ``n`` independent copies by transform powering (no wrap-around)."""
    if n == 0:
        return np.array([1.0]), x.step, 0.0, ErrorLedger(0.0, 0.0, 0.0, 1, 0.0)
    f = np.asarray(x.pmf)
    e = x.errors
    if n == 1:
        return f, x.step, x.origin, e
    full = n * (f.size - 1) + 1
    check_transform_budget(full, f"nfold(n={n}) (a result of {full} points)")
    from scipy import fft as sfft
    res = transform_compound(power_law(n), f, full, n_fft=sfft.next_fast_len(full, real=True),
                             theta=0.0, log_alias_mass=-math.inf)
    r_l1, r_point, r_cum = min(res.l1_bound, full * res.trust_floor), res.trust_floor, None
    enc = res.enclosure
    if enc is not None:  # also certified by direct longdouble products where they are cheap
        enc = pick(enc, long_route.power(f, n))
        r_point, r_l1, r_cum = EnclosureSums(res.pmf, enc).ledger_numbers()
    elif res.cumulative is not None:
        r_cum = min(res.cumulative, r_l1)
    point, l1, cum = power_errors(e, n, r_point, r_l1, r_cum)
    moment = power_moment(e, abs_moment(f, x.step, x.origin, e), n)
    tf = truncated_from([(e, 0)], full)
    ledger = ErrorLedger(point, l1, 0.0, tf, moment, cum)
    if enc is None:
        return res.pmf, x.step, n * x.origin, ledger
    # longdouble route: its enclosure plus the input's carried per-point error
    carried = power_errors(e, n, 0.0, 0.0)[0] * (1 + 1e-12)
    if carried > 0:
        enc = Enclosure(enc.center, enc.radius + carried)
    return res.pmf, x.step, n * x.origin, ledger, None, None, enc


def _whole(value: float, name: str, what: str) -> int:
    if abs(value - round(value)) > 1e-9 * max(1.0, abs(value)):
        raise ValueError(f"{name} must {what}")
    return int(round(value))


def layer(x, deductible, limit) -> tuple[np.ndarray, float, float, ErrorLedger]:
    """``min(max(X - d, 0), limit)`` on a lattice from 0 (see :meth:`Lattice.layer`).

    Ledger: the atom at 0 gathers the points ``<= d`` (error at most the cumulative bound
    ``min(l1, count * point)``), the atom at the limit the points above it; L1 does not grow.
    Truncated mass lying entirely at or above ``d + limit`` joins the limit atom (its total is
    known to within ``l1``); otherwise it stays truncated, from ``max(from - shift, 0)``, with
    first moment at most ``M + max(-d, 0) T`` (and at most ``limit * T``).
    """
    d = real_value(deductible, "deductible")
    if isinstance(limit, numbers.Real) and not isinstance(limit, bool) and limit == math.inf:
        lim = math.inf
    else:
        lim = real_value(limit, "limit")
    if lim <= 0:
        raise ValueError(f"limit must be positive; got {limit!r}")
    h, o = x.step, x.origin
    pmf = np.asarray(x.pmf)
    n = pmf.size
    e = x.errors
    shift = _whole((d - o) / h, "deductible", f"lie on the lattice origin + step * k; got {d!r} "
                   f"with origin {o!r}, step {h!r}")
    if -shift > MAX_LAYER_PAD:
        raise ValueError(f"deductible {d!r} lies {-shift} steps below the lattice origin: the "
                         f"layer would need more than {MAX_LAYER_PAD} extra points")
    natural = max(n - 1 - shift, 0) + 1  # points of the unlimited layer
    w = None
    if not math.isinf(lim):
        w = _whole(lim / h, "limit", f"be a whole multiple of step {h!r}; got {limit!r}")
        if w + 1 > natural:  # the limit is not reached on the grid
            w = None
    width = natural if w is None else w + 1
    out = np.zeros(width)
    pos = np.clip(np.arange(n) - min(shift, n), 0, width - 1)
    np.add.at(out, pos, pmf)
    merged_low = min(max(shift + 1, 0), n)
    point = max(e.point, min(e.l1, merged_low * e.point))
    if w is not None:
        merged_high = max(n - min(shift + w, n), 0)
        point = max(point, min(e.l1, merged_high * e.point))
    l1, cum = e.l1, cum_bound(e)  # merging keeps every cumulative sum of the pmf
    if untruncated(e):
        return out, h, 0.0, ErrorLedger(point, l1, 0.0, width, 0.0, cum)
    t_low, t_high = t_bounds(e, float(pmf.sum()), n)
    if w is not None and e.truncated_from >= shift + w:
        out[-1] += e.truncated
        slack = max(t_high - e.truncated, e.truncated - t_low)
        return out, h, 0.0, ErrorLedger(point + slack, l1 + slack, 0.0, width, 0.0, cum + slack)
    moment = e.truncated_moment + max(-d, 0.0) * t_high
    if not math.isinf(lim):
        moment = min(moment, lim * t_high)
    tf = min(max(e.truncated_from - shift, 0), width)
    return out, h, 0.0, ErrorLedger(point, l1, 0.0, tf, moment, cum)
