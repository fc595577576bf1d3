"""Partial first moments of a continuous law: ``E[X 1{X > b}]`` and ``E[min(X, u)]``.

They fill a discretised lattice's ledger (the first moment of the mass beyond the grid) and check
a step against the law (limited expected values).  Closed forms, for ``X = loc + scale Y`` and
``z = (b - loc) / scale``, ``E[X 1{X > b}] = loc P(Y > z) + scale G(z)`` with
``G(z) = E[Y 1{Y > z}]`` (derivations: integrate the density; e.g. Klugman, Panjer & Willmot,
*Loss Models*, appendix A, for the limited expected values of these families):

* ``expon``: ``G = (z + 1) e^{-z}``; ``gamma(a)``: ``G = a Q(a + 1, z)`` (``Q`` the regularised
  upper incomplete gamma function); ``weibull_min(c)``: ``G = Gamma(1 + 1/c) Q(1 + 1/c, z^c)``.
* ``lognorm(s)``: ``G = e^{s^2/2} Phi(s - ln(z) / s)``.
* ``pareto(b)`` (support ``y >= 1``): ``G = b/(b-1) max(z, 1)^{1-b}``; ``lomax(c)``:
  ``G = z (1+z)^{-c} + (1+z)^{1-c} / (c-1)`` (infinite for a tail index ``<= 1``).
* ``invgamma(a)``: ``G = P(a - 1, 1/z) / (a - 1)`` (``P`` the regularised lower incomplete gamma).
* ``halfnorm``: ``G = 2 phi(z)``; ``norm``: ``G = phi(z)``; ``uniform``: ``G = (1 - z^2) / 2``.

Other laws get a rigorous upper bound: ``E[X 1{X > b}] = b S(b) + int_b^inf S``, the integral
bounded above by a left Riemann sum of the decreasing ``S`` on a geometric grid up to ``c`` and
``int_c^inf S <= E[X^2] / c`` (Markov's inequality ``S(x) <= E[X^2] / x^2``); without a finite
second moment, scipy's numerical ``expect`` (not a certificate: said where used).
"""

from __future__ import annotations

import math

import numpy as np

GENERIC_POINTS = 2048
"""Riemann-sum points of the generic tail-moment bound."""


def _standard(frozen):
    """``(name, shapes, loc, scale)`` of a frozen scipy law."""
    shapes, loc, scale = frozen.dist._parse_args(*frozen.args, **frozen.kwds)
    return frozen.dist.name, tuple(float(s) for s in shapes), float(loc), float(scale)


def _family_tail(name: str, shapes: tuple, z: float, k: int) -> float | None:
    """``E[Y^k 1{Y > z}]`` (``k`` = 1 or 2) for the standard gamma, weibull_min, lognorm, pareto
    and invgamma members, or None for another family: ``gamma(a)``:
    ``a (a+1)..(a+k-1) Q(a + k, z)``; ``weibull_min(c)``: ``Gamma(1 + k/c) Q(1 + k/c, z^c)``;
    ``lognorm(s)``: ``e^{k^2 s^2 / 2} Phi(k s - ln(z) / s)``; ``pareto(b)``:
    ``b/(b-k) max(z, 1)^{k-b}``; ``invgamma(a)``: ``P(a - k, 1/z) / ((a-1)..(a-k))`` (infinite
    where the ``k``-th moment is)."""
    from scipy import special  # on first use (import cost: tests/test_import_light.py)

    if name == "gamma":
        (a,) = shapes
        m = a * (a + 1.0) if k == 2 else a
        return m if z <= 0 else m * float(special.gammaincc(a + k, z))
    if name == "weibull_min":
        (c,) = shapes
        m = math.gamma(1.0 + k / c)
        if z <= 0:
            return m
        with np.errstate(over="ignore"):  # z^c beyond the float range: inf, the tail is 0 there
            zc = float(np.power(z, c))
        return m * float(special.gammaincc(1.0 + k / c, zc))
    if name == "lognorm":
        (s,) = shapes
        m = math.exp(k * k * s * s / 2.0)
        return m if z <= 0 else m * float(special.ndtr(k * s - math.log(z) / s))
    if name == "pareto":
        (b,) = shapes
        return math.inf if b <= k else b / (b - k) * max(z, 1.0) ** (k - b)
    if name == "invgamma":
        (a,) = shapes
        if a <= k:
            return math.inf
        d = (a - 1.0) * (a - 2.0) if k == 2 else a - 1.0
        return (1.0 if z <= 0 else float(special.gammainc(a - k, 1.0 / z))) / d
    return None


def _standard_tail(name: str, shapes: tuple, z: float) -> float | None:
    """``G(z) = E[Y 1{Y > z}]`` for the standard member, or None without a closed form."""
    if name == "expon":
        return 1.0 if z <= 0 else (z + 1.0) * math.exp(-z)
    if name == "lomax":
        (c,) = shapes
        if c <= 1:
            return math.inf
        z = max(z, 0.0)
        return z * (1.0 + z) ** (-c) + (1.0 + z) ** (1.0 - c) / (c - 1.0)
    if name == "halfnorm":
        z = max(z, 0.0)
        return 2.0 * math.exp(-z * z / 2.0) / math.sqrt(2.0 * math.pi)
    if name == "norm":
        return math.exp(-z * z / 2.0) / math.sqrt(2.0 * math.pi)
    if name == "uniform":
        z = min(max(z, 0.0), 1.0)
        return (1.0 - z * z) / 2.0
    return _family_tail(name, shapes, z, 1)


def _standard_tail2(name: str, shapes: tuple, z: float) -> float | None:
    """``G2(z) = E[Y^2 1{Y > z}]`` for the standard member, or None without a closed form
    (integrals of ``y^2`` against the densities: incomplete gamma functions for expon, gamma,
    weibull_min and invgamma, ``E[e^{2sZ} 1{Z > c}] = e^{2 s^2} Phi(2s - c)`` for lognorm, powers
    for pareto and lomax; common practice, no source)."""
    from scipy import special  # on first use (import cost: tests/test_import_light.py)

    if name == "expon":
        return 2.0 if z <= 0 else (z * z + 2.0 * z + 2.0) * math.exp(-z)
    if name == "lomax":
        (c,) = shapes
        if c <= 2:
            return math.inf
        w = 1.0 + max(z, 0.0)  # substitute w = 1 + y: c int (w - 1)^2 w^(-c-1) dw
        return c * (w ** (2.0 - c) / (c - 2.0) - 2.0 * w ** (1.0 - c) / (c - 1.0) + w ** (-c) / c)
    if name in ("halfnorm", "norm"):
        zz = max(z, 0.0) if name == "halfnorm" else z
        val = zz * math.exp(-zz * zz / 2.0) / math.sqrt(2.0 * math.pi) + float(special.ndtr(-zz))
        return 2.0 * val if name == "halfnorm" else val
    if name == "uniform":
        z = min(max(z, 0.0), 1.0)
        return (1.0 - z ** 3) / 3.0
    return _family_tail(name, shapes, z, 2)


TAIL2_SLACK = 1e-12
"""Relative slack added to the closed-form second tail moments (their float evaluation)."""


def tail_moment2(frozen, b: float) -> float:
    """Upper bound of ``E[X^2 1{X > b}]`` for ``b >= 0`` (closed forms of the standard member
    with ``X = loc + scale Y``: ``loc^2 S(b) + 2 loc scale G1 + scale^2 G2``); ``inf`` without a
    closed form or a finite second moment."""
    if b < 0:
        raise ValueError(f"b must be >= 0; got {b!r}")
    name, shapes, loc, scale = _standard(frozen)
    z = (b - loc) / scale
    g2 = _standard_tail2(name, shapes, z)
    g1 = _standard_tail(name, shapes, z)
    if g2 is None or g1 is None or math.isinf(g2) or math.isinf(g1):
        return math.inf
    s_b = float(frozen.sf(b))
    value = loc * loc * s_b + 2.0 * loc * scale * g1 + scale * scale * g2
    spread = loc * loc * s_b + 2.0 * abs(loc) * scale * g1 + scale * scale * g2
    return max(value + TAIL2_SLACK * spread, 0.0)


def tail_moment(frozen, b: float) -> float:
    """``E[X 1{X > b}]`` for ``b >= 0`` (closed form, else a rigorous upper bound).

    Parameters
    ----------
    frozen : scipy.stats frozen continuous law
    b : float
        Threshold, ``b >= 0`` (so ``X 1{X > b} = |X| 1{X > b}``).

    Returns
    -------
    float
        ``inf`` when the law has no finite mean.
    """
    if b < 0:
        raise ValueError(f"b must be >= 0; got {b!r}")
    own = getattr(getattr(frozen, "dist", None), "tail_moment", None)  # dist.law_ops laws
    if callable(own):
        return float(own(b))
    name, shapes, loc, scale = _standard(frozen)
    z = (b - loc) / scale
    g = _standard_tail(name, shapes, z)
    if g is not None:
        if math.isinf(g):
            return math.inf
        return max(loc * float(frozen.sf(b)) + scale * g, 0.0)
    return _generic_tail_bound(frozen, b)


def _generic_tail_bound(frozen, b: float) -> float:
    """Upper bound of ``b S(b) + int_b^inf S`` (see the module docstring)."""
    sb = float(frozen.sf(b))
    if sb == 0.0:
        return 0.0
    start = b if b > 0 else max(float(frozen.ppf(1e-3)), 1e-300)
    top = float(frozen.isf(1e-17))
    if not math.isfinite(top) or top <= start:
        top = 2.0 * start
    x = np.geomspace(start, top, GENERIC_POINTS)
    s = frozen.sf(x)
    riemann = float(np.sum(np.diff(x) * s[:-1])) + (start - b) * sb
    second = float(frozen.moment(2))
    if math.isfinite(second):
        beyond = second / top
    else:  # numerical, not a certificate
        beyond = float(frozen.expect(lambda t: t - top, lb=top))
        if not math.isfinite(beyond):
            return math.inf
    return b * sb + riemann + beyond


def law_mean(frozen) -> float:
    """``E[X]`` of a law on ``[0, inf)`` (``inf`` when infinite), from :func:`tail_moment`."""
    return tail_moment(frozen, 0.0) + _mass_below_zero_moment(frozen)


def _mass_below_zero_moment(frozen) -> float:
    lo = float(frozen.support()[0])
    if lo >= 0:
        return 0.0
    return float(frozen.expect(lambda t: t, ub=0.0))


def limited_mean(frozen, u: float) -> float:
    """Limited expected value ``E[min(X, u)]`` of a law on ``[0, inf)``, ``u >= 0``.

    ``E[X] - E[X 1{X > u}] + u S(u)`` with a finite mean; by quadrature of ``int_0^u S``
    otherwise (scipy.integrate.quad, numerical).
    """
    mean = law_mean(frozen)
    if math.isfinite(mean):
        return mean - tail_moment(frozen, u) + u * float(frozen.sf(u))
    from scipy import integrate
    val, _ = integrate.quad(lambda t: float(frozen.sf(t)), 0.0, u, limit=200)
    return float(val)


def is_scipy_continuous(obj) -> bool:
    """A frozen scipy.stats continuous law."""
    from scipy import stats  # on first use: about a second cold (tests/test_import_light.py)

    return isinstance(getattr(obj, "dist", None), stats.rv_continuous)
