"""Severity laws built from others before discretisation: splices, mixtures, left truncation,
censoring, inflation.

Each returns a frozen scipy.stats continuous law (cdf, sf, ppf, isf, mean, moments), so
:meth:`polyconv.dist.Lattice.from_law`, :func:`polyconv.dist.check_step` and the limited
expected values of :mod:`polyconv.dist.law_moments` take it as they take scipy's own.  The
formulas are the definitions (Klugman, Panjer & Willmot, *Loss Models*, ch. 5 and 8, from memory):

* splice at ``t`` with weight ``w`` below: ``F(x) = w F_1(x) / F_1(t)`` for ``x <= t`` and
  ``w + (1 - w) (F_2(x) - F_2(t)) / S_2(t)`` above (each piece conditioned on its side);
* mixture: ``F = sum_i w_i F_i``;
* left truncation at ``d`` (losses below ``d`` never reported): ``X | X > d``, ``F(x) =
  (F(x) - F(d)) / S(d)`` for ``x > d``; with ``shift=True`` the excess ``X - d | X > d``;
* censoring at ``u`` (a policy limit): ``min(X, u)``, an atom ``S(u)`` at ``u``;
* inflation by ``r``: ``r X``, ``F(x / r)`` (scipy laws: the scale and loc multiplied).

Moments come from the components (the splice and truncation by ``expect`` of the pieces,
numerical quadrature).
"""

from __future__ import annotations

import math

import numpy as np

from .law_moments import is_scipy_continuous, tail_moment


def _check_law(law, name: str):
    if not is_scipy_continuous(law):
        raise TypeError(f"{name} must be a frozen scipy.stats continuous law; got "
                        f"{type(law).__name__}")
    if float(law.support()[0]) < 0:
        raise ValueError(f"{name} must live on [0, inf) (support starts at "
                         f"{float(law.support()[0])})")
    return law


def _positive_finite(value, name: str) -> float:
    """``value`` as a float ``> 0`` and finite (ValueError naming ``name`` otherwise)."""
    v = float(value)
    if not (v > 0 and math.isfinite(v)):
        raise ValueError(f"{name} must be positive and finite; got {value!r}")
    return v


def _built(*args):
    """A frozen :class:`polyconv.dist.built_law.BuiltLaw` (loaded on first use, so that importing
    this module does not load scipy.stats)."""
    from .built_law import BuiltLaw

    return BuiltLaw(*args).freeze()


def _is_built(dist) -> bool:
    from .built_law import BuiltLaw

    return isinstance(dist, BuiltLaw)


def _piece_moments(law, lo: float, hi: float) -> tuple[float, float]:
    """``(E[X 1{lo < X <= hi}], E[X^2 1{...}])`` by scipy's ``expect`` (quadrature)."""
    if hi <= lo:
        return 0.0, 0.0
    m1 = float(law.expect(lambda x: x, lb=lo, ub=hi))
    m2 = float(law.expect(lambda x: x * x, lb=lo, ub=hi))
    return m1, m2


def splice(below, above, threshold: float, weight_below: float | None = None):
    """Spliced severity: ``below`` conditioned on ``X <= t`` with probability ``w``, ``above``
    conditioned on ``X > t`` with ``1 - w`` (default ``w = F_below(t)``)."""
    below, above = _check_law(below, "below"), _check_law(above, "above")
    t = _positive_finite(threshold, "threshold")
    f1t, s2t = float(below.cdf(t)), float(above.sf(t))
    if f1t <= 0 or s2t <= 0:
        raise ValueError("below must have mass at or below the threshold and above mass above it")
    w = f1t if weight_below is None else float(weight_below)
    if not 0 <= w <= 1:
        raise ValueError(f"weight_below must lie in [0, 1]; got {weight_below!r}")
    f2t = float(above.cdf(t))

    def cdf(x):
        return np.where(x <= t, w * below.cdf(np.minimum(x, t)) / f1t,
                        w + (1 - w) * (above.cdf(np.maximum(x, t)) - f2t) / s2t)

    def sf(x):
        return np.where(x <= t, 1 - w * below.cdf(np.minimum(x, t)) / f1t,
                        (1 - w) * above.sf(np.maximum(x, t)) / s2t)

    def moments():
        a1, a2 = _piece_moments(below, 0.0, t)
        b1, b2 = _piece_moments(above, t, math.inf)
        return w * a1 / f1t + (1 - w) * b1 / s2t, w * a2 / f1t + (1 - w) * b2 / s2t

    def tail(b):
        if b >= t:
            return (1 - w) / s2t * tail_moment(above, b)
        inner = tail_moment(below, b) - tail_moment(below, t)
        return w / f1t * inner + (1 - w) / s2t * tail_moment(above, t)

    return _built(cdf, sf, moments, math.inf, "splice", tail)


def mixture(weights, laws):
    """``sum_i w_i F_i`` (weights summing to 1, not renormalised)."""
    laws = [_check_law(x, f"laws[{i}]") for i, x in enumerate(laws)]
    w = [float(v) for v in weights]
    if len(w) != len(laws) or not laws or any(v < 0 for v in w) or abs(math.fsum(w) - 1) > 1e-12:
        raise ValueError("weights must be one per law, >= 0, summing to 1")

    def cdf(x):
        return sum(wi * law.cdf(x) for wi, law in zip(w, laws, strict=True))

    def sf(x):
        return sum(wi * law.sf(x) for wi, law in zip(w, laws, strict=True))

    def moments():
        return (sum(wi * float(law.mean()) for wi, law in zip(w, laws, strict=True)),
                sum(wi * float(law.moment(2)) for wi, law in zip(w, laws, strict=True)))

    def tail(b):
        return sum(wi * tail_moment(law, b) for wi, law in zip(w, laws, strict=True))

    upper = max(float(law.support()[1]) for law in laws)
    return _built(cdf, sf, moments, upper, "mixture", tail)


def left_truncated(law, deductible: float, *, shift: bool = False):
    """``X | X > d`` (``shift=True``: ``X - d | X > d``, the excess per reported loss)."""
    law = _check_law(law, "law")
    d = float(deductible)
    sd = float(law.sf(d))
    if not (d >= 0 and sd > 0):
        raise ValueError(f"deductible must be >= 0 with mass above it; got {deductible!r}")
    fd = float(law.cdf(d))
    off = d if shift else 0.0

    def cdf(x):
        y = x + off
        return np.where(y <= d, 0.0, (law.cdf(np.maximum(y, d)) - fd) / sd)

    def sf(x):
        y = x + off
        return np.where(y <= d, 1.0, law.sf(np.maximum(y, d)) / sd)

    def moments():
        m1, m2 = _piece_moments(law, d, math.inf)
        m1, m2 = m1 / sd, m2 / sd
        if shift:
            return m1 - d, m2 - 2 * d * m1 + d * d
        return m1, m2

    def tail(b):
        y = max(b + off, d)
        return (tail_moment(law, y) - off * float(law.sf(y))) / sd

    upper = float(law.support()[1]) - off
    return _built(cdf, sf, moments, upper, "left_truncated", tail)


def censored(law, limit: float):
    """``min(X, u)``: the law up to ``u`` and an atom ``S(u)`` at ``u``."""
    law = _check_law(law, "law")
    u = _positive_finite(limit, "limit")
    su = float(law.sf(u))

    def cdf(x):
        return np.where(x >= u, 1.0, law.cdf(np.minimum(x, u)))

    def sf(x):
        return np.where(x >= u, 0.0, law.sf(np.minimum(x, u)))

    def moments():
        m1, m2 = _piece_moments(law, 0.0, u)
        return m1 + u * su, m2 + u * u * su

    def tail(b):
        if b >= u:
            return 0.0
        return tail_moment(law, b) - tail_moment(law, u) + u * su

    return _built(cdf, sf, moments, u, "censored", tail)


def inflated(law, factor: float):
    """``r X`` for ``r > 0``: a scipy law with ``loc`` and ``scale`` multiplied by ``r``."""
    law = _check_law(law, "law")
    r = _positive_finite(factor, "factor")
    kwds = dict(law.kwds)
    args = list(law.args)
    dist = law.dist
    n_shapes = len(dist.shapes.split(",")) if dist.shapes else 0
    loc = kwds.pop("loc", args[n_shapes] if len(args) > n_shapes else 0.0)
    scale = kwds.pop("scale", args[n_shapes + 1] if len(args) > n_shapes + 1 else 1.0)
    if _is_built(dist):
        c, s, mom, tl = dist._c, dist._s, dist._mom, dist._tail

        def moments():
            m1, m2 = mom()
            return r * m1, r * r * m2

        return _built(lambda x: c(x / r), lambda x: s(x / r), moments,
                      float(law.support()[1]) * r, "inflated", lambda b: r * tl(b / r))
    return dist(*args[:n_shapes], loc=loc * r, scale=scale * r, **kwds)
