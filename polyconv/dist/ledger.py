"""The error ledger of a Lattice: what is known about how far it is from the exact model.

A Lattice holds computed probabilities ``p^_k`` on ``origin + step * k``, ``k = 0..n-1``.  The
*exact model* it stands for (the exact computation on this lattice) is a probability distribution
``p = q + t`` split into

* a *represented* part ``q`` on the same ``n`` points, with the computed error ``e = p^ - q``
  bounded per point (``|e_k| <= point``) and in L1 (``sum |e_k| <= l1``): rounding, aliasing and
  every input error carried through the operations;
* a *truncated* part ``t >= 0``, the mass not represented on the grid.  Its total is
  ``1 - sum(q)``, so it is known up to the L1 error: ``|sum(t) - truncated| <= l1`` with
  ``truncated = 1 - sum(p^)`` (kept, never renormalised away).  It lies at indices
  ``>= truncated_from`` (``n`` means "entirely beyond the last point"; sums and joins can bring it
  lower), and ``sum_x |x| t(x) <= truncated_moment`` (``inf`` when unknown; ``0`` means nothing
  is truncated: ``truncated`` is then only float noise of ``1 - sum(p^)``).

Discretisation of a continuous law is *not* in the ledger: it is a modelling error bracketed by
the rules "down" / "up" of :meth:`polyconv.dist.Lattice.from_law`.

Propagation (derived here; each is an inequality between norms of measures):

* independent sum ``Z = X + Y`` (convolution, Young's inequality ``||a * b||_1 <= ||a||_1
  ||b||_1`` and ``||a * b||_inf <= ||a||_inf ||b||_1``)::

      l1_Z    <= l1_X Q_Y + l1_Y Q_X + l1_X l1_Y + rounding_l1
      point_Z <= point_X Q_Y + point_Y Q_X + min(point_X l1_Y, l1_X point_Y) + rounding_point

  with ``Q = min(1, sum p^ + l1)`` a bound of ``||q||_1``.  Truncated: ``q_X * t_Y + t_X * q_Y
  + t_X * t_Y`` lies at ``>= min(from_X, from_Y)``; its first absolute moment is at most
  ``M_X + M_Y + A_X T_Y + A_Y T_X`` (``A`` the absolute first moment of the represented part,
  ``|x + y| <= |x| + |y|``).
* the law of a maximum or minimum of independent inputs is the push-forward of their product
  measure: push-forwards do not increase total variation, and the product measure is multilinear,
  so ``l1_out <= sum_i l1_i prod_{j != i} (1 + l1_j)`` (telescoping).
"""

from __future__ import annotations

import math
from typing import NamedTuple


class ErrorLedger(NamedTuple):
    """What is known about the distance of a Lattice from its exact model (module docstring).

    Attributes
    ----------
    point : float
        Bound on ``|p_k(computed) - p_k(exact lattice model)|`` for every ``k``.
    l1 : float
        Bound on ``sum_k |p_k(computed) - p_k(exact)|``.
    truncated : float
        Exact-model probability mass not represented on the grid, ``1 - sum(pmf)`` (known up to
        ``l1``).
    truncated_from : int
        Lowest grid index at or above which the truncated mass may lie (``len(pmf)``: entirely
        beyond the last point).
    truncated_moment : float
        Upper bound on ``E[|X| 1{X in the truncated part}]`` (``inf`` if unknown).
    cumulative : float
        Bound on ``max_k |sum_{j <= k} e_j|``, the largest error of a cumulative sum (a
        Kolmogorov distance; ``inf``: not known beyond ``l1``).  Signed errors may cancel in
        sums, so this can be far below ``l1``: a pmf made as differences of an accurately
        evaluated cdf has ``cumulative`` of a few roundoffs whatever its length.
    truncated_moment2 : float
        Upper bound on ``E[X^2 1{X in the truncated part}]`` (``inf`` if unknown).
    """

    point: float
    l1: float
    truncated: float
    truncated_from: int
    truncated_moment: float
    cumulative: float = math.inf
    truncated_moment2: float = math.inf
    """Upper bound on ``E[X^2 1{X in the truncated part}]`` (``inf`` if unknown: the standard
    deviation is then refused when mass is truncated)."""


class Bounded(NamedTuple):
    """One answer with its certified range.

    Attributes
    ----------
    value : float
        The lattice's own answer (from the computed pmf); ``nan`` when refused.
    low, high : float
        Certified range of the exact computation's answer on this lattice.
    refused : bool
        True when the range exceeds the stated tolerance or the grid cannot answer.
    reason : str
        ``""`` or one sentence: why refused or warned.
    """

    value: float
    low: float
    high: float
    refused: bool
    reason: str


def exact(n: int) -> ErrorLedger:
    """Ledger of an exactly known pmf of ``n`` points with all its mass on the grid."""
    return ErrorLedger(0.0, 0.0, 0.0, int(n), 0.0)


def _non_negative(ledger: ErrorLedger, name: str) -> float:
    """Field ``name`` of ``ledger`` as a float >= 0 (TypeError / ValueError naming it)."""
    v = getattr(ledger, name)
    try:
        v = float(v)
    except (TypeError, ValueError, OverflowError):
        raise TypeError(f"errors.{name} must be a real number; got {v!r}") from None
    if not v >= 0:
        raise ValueError(f"errors.{name} must be >= 0; got {v!r}")
    return v


def validate(ledger: ErrorLedger, n: int) -> ErrorLedger:
    """Check a ledger's fields (non-negative bounds, index in ``[0, n]``); ValueError naming the
    field otherwise.  Returns it as floats/ints."""
    if not isinstance(ledger, ErrorLedger):
        raise TypeError(f"errors must be an ErrorLedger; got {type(ledger).__name__}")
    point, l1, truncated, moment = (_non_negative(ledger, name) for name in
                                    ("point", "l1", "truncated", "truncated_moment"))
    if point > 1 or truncated > 1 or not math.isfinite(l1):
        raise ValueError("errors.point and errors.truncated must be at most 1 and errors.l1 "
                         f"finite; got {ledger!r}")
    cumulative = _non_negative(ledger, "cumulative")
    tf = ledger.truncated_from
    if isinstance(tf, bool) or not isinstance(tf, int) and not hasattr(tf, "__index__"):
        raise TypeError(f"errors.truncated_from must be an integer; got {tf!r}")
    tf = int(tf)
    if not 0 <= tf <= n:
        raise ValueError(f"errors.truncated_from must lie in [0, {n}]; got {tf}")
    moment2 = _non_negative(ledger, "truncated_moment2")
    return ErrorLedger(point, min(l1, 2.0), truncated, tf, moment, min(cumulative, l1, 2.0),
                       moment2)


def cum_bound(ledger: ErrorLedger) -> float:
    """Bound of every cumulative error ``|sum_{j <= k} e_j|``: ``min(cumulative, l1)``."""
    return min(ledger.cumulative, ledger.l1)


def mass_bound(mass: float, l1: float) -> float:
    """``||q||_1 <= min(1, sum p^ + l1)``: the exact represented part has at most unit mass."""
    return min(1.0, mass + l1)


def sum_errors(x: ErrorLedger, mass_x: float, max_x: float, y: ErrorLedger, mass_y: float,
               max_y: float, rounding_point: float, rounding_l1: float,
               rounding_cum: float | None = None) -> tuple[float, float, float]:
    """``(point, l1, cumulative)`` of a convolution ``p^_X * p^_Y`` computed with the given
    rounding (``rounding_cum``: a bound of its cumulative sums, default ``rounding_l1``).

    ``max_*`` are the largest computed probabilities (``||q||_inf <= max + point``).
    See the module docstring for the inequalities; the cumulative sums of ``a * b`` are
    ``sum_j b_j A_{k-j}`` (``A`` the cumulative sums of ``a``), so
    ``K_Z <= K_X ||p^_Y||_1 + K_Y Q_X + rounding_l1`` (from ``p^_X * p^_Y - q_X * q_Y =
    e_X * p^_Y + q_X * e_Y``).
    """
    qx, qy = mass_bound(mass_x, x.l1), mass_bound(mass_y, y.l1)
    l1 = x.l1 * qy + y.l1 * qx + x.l1 * y.l1 + rounding_l1
    px = min(x.point * qy, x.l1 * (max_y + y.point))
    py = min(y.point * qx, y.l1 * (max_x + x.point))
    point = px + py + min(x.point * y.l1, x.l1 * y.point) + rounding_point
    kx, ky = cum_bound(x), cum_bound(y)
    # p^_X * p^_Y - q_X * q_Y = e_X * p^_Y + q_X * e_Y: no cross term (p^_Y >= 0 has L1 norm
    # mass_y, q_X at most qx), so the cumulative bounds of sampled inputs (DKW bands, l1 = 2) add
    cum = kx * mass_y * (1 + 1e-12) + ky * qx + \
        (rounding_l1 if rounding_cum is None else rounding_cum)
    return min(point, l1, 2.0), min(l1, 2.0), min(cum, l1, 2.0)


def sum_moment(x: ErrorLedger, abs_x: float, y: ErrorLedger, abs_y: float) -> float:
    """First absolute moment bound of the truncated part of ``X + Y`` (module docstring)."""
    tx = _t_high(x)
    ty = _t_high(y)
    if tx == 0 and ty == 0:
        return 0.0
    return _mul(x.truncated_moment + y.truncated_moment, 1.0) + _mul(abs_x, ty) + _mul(abs_y, tx)


def untruncated(ledger: ErrorLedger) -> bool:
    """True when the exact model has no truncated part (``truncated_moment == 0`` means that,
    by convention: a zero first-moment bound leaves no room for mass off the grid)."""
    return ledger.truncated_moment == 0


def _t_high(ledger: ErrorLedger) -> float:
    """Upper bound of the exact truncated mass (0 when :func:`untruncated`)."""
    return 0.0 if untruncated(ledger) else min(1.0, ledger.truncated + cum_bound(ledger))


def _mul(a: float, b: float) -> float:
    """``a * b`` with ``inf * 0 = 0`` (a zero mass has a zero moment whatever its location)."""
    return 0.0 if b == 0 or a == 0 else a * b


def power_errors(x: ErrorLedger, n: int, rounding_point: float, rounding_l1: float,
                 rounding_cum: float | None = None) -> tuple[float, float, float]:
    """``(point, l1, cumulative)`` of ``p^^{*n}`` against ``q^{*n}`` (telescoping
    ``sum_i p^^{*i} * e * q^{*(n-1-i)}``, each factor of L1 norm at most ``1 + l1``);
    ``rounding_cum`` bounds the rounding's cumulative sums (default ``rounding_l1``)."""
    growth = math.exp((n - 1) * math.log1p(x.l1)) if x.l1 > 0 else 1.0
    l1 = math.expm1(n * math.log1p(x.l1)) if x.l1 > 0 else 0.0
    point = n * x.point * growth
    cum = n * cum_bound(x) * growth + (rounding_l1 if rounding_cum is None else rounding_cum)
    l1 = min(l1 + rounding_l1, 2.0)
    return min(point + rounding_point, l1), l1, min(cum, l1)


def power_moment(x: ErrorLedger, abs_x: float, n: int) -> float:
    """Truncated-moment bound of the ``n``-fold sum: ``n M + n (n-1) A T`` (repeated
    :func:`sum_moment`)."""
    tx = _t_high(x)
    if tx == 0:
        return 0.0
    return n * x.truncated_moment + _mul(n * (n - 1) * abs_x, tx)


def t_bounds(ledger: ErrorLedger, mass: float, n_terms: int,
             unit: float = 2.0 ** -53) -> tuple[float, float]:
    """``(low, high)`` of the exact truncated total ``1 - sum(q)``, with the summation rounding
    of ``sum p^`` (``n_terms`` additions in unit roundoff ``unit``, plus two float64
    roundings: the sum's and ``1 - mass``)."""
    rnd = ((n_terms + 2) * unit + 2 * 2.0 ** -53) * max(mass, 1.0)
    t = 1.0 - mass
    k = cum_bound(ledger)
    return max(0.0, t - k - rnd), min(1.0, max(t, 0.0) + k + rnd)
