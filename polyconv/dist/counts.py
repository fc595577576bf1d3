"""Counting laws for compound distributions: Panjer ``(a, b)`` coefficients and PGFs.

The ``(a, b, 0)`` class (Panjer, "Recursive evaluation of a family of compound distributions",
ASTIN Bulletin 12 (1981) 22-26): ``p_k = (a + b / k) p_{k-1}`` for ``k >= 1``.  In scipy.stats'
parametrisations (checked against the pmf ratios ``p_k / p_{k-1}``):

=====================  ===============  ====================  ==============================
scipy law              ``a``            ``b``                 PGF ``P(z)``
=====================  ===============  ====================  ==============================
``poisson(mu)``        ``0``            ``mu``                ``exp(mu (z - 1))``
``nbinom(n, p)``       ``1 - p``        ``(n - 1)(1 - p)``    ``(p / (1 - (1 - p) z))^n``
``binom(n, p)``        ``-p / (1 - p)`` ``(n + 1) p/(1 - p)`` ``(1 - p + p z)^n``
=====================  ===============  ====================  ==============================

(scipy's ``nbinom(n, p)`` counts failures before the ``n``-th success, success probability
``p``; DESIGN.md's ``NB(r, beta)`` is ``n = r``, ``p = 1 / (1 + beta)``.)  Any other frozen
discrete law (or one of these with ``loc != 0``) is used through its pmf, summed to a polynomial
PGF on the support up to where the remaining mass is below ``1e-17``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .transform import TransformLaw, integer_power

GENERIC_TAIL = 1e-17
"""Counts beyond the point where ``P(N > n) < GENERIC_TAIL`` are dropped for a generic law (their
mass is reported as truncated)."""

GENERIC_MAX_TERMS = 200_000
"""Largest support a generic counting law may have (its PGF costs one pass per term)."""


@dataclass(frozen=True)
class CountsLaw:
    """A frozen scipy counting law, classified.

    Attributes
    ----------
    name : str
        scipy's name of the law.
    ab : tuple of float or None
        Panjer's ``(a, b)`` when the law is in the ``(a, b, 0)`` class, else None.
    transform : TransformLaw
        PGF and companions for the transform route.
    log_pgf_at : callable
        ``log P(f0)`` for real ``0 <= f0 <= 1`` (start of the recursion, in logs so large means
        do not underflow).
    tail_mass : float
        Count mass dropped (generic laws only).
    ab1 : float or None
        For the ``(a, b, 1)`` class (zero-modified laws, :mod:`polyconv.dist.count_laws`):
        ``p_1 - (a + b) p_0``, the extra term of its recursion (:mod:`polyconv.dist.panjer_ab1`);
        None for the ``(a, b, 0)`` class.
    ab_long : tuple of numpy.longdouble or None
        Panjer's ``(a, b)`` computed in longdouble from the law's own parameters (relative
        error at most ``3 u_L`` each), for the extended-precision recursion
        (:mod:`polyconv.dist.panjer_long`); None when not available.
    """

    name: str
    ab: tuple[float, float] | None
    transform: TransformLaw
    log_pgf_at: object
    tail_mass: float = 0.0
    ab1: float | None = None
    ab_long: tuple | None = None


def _bind(frozen) -> dict:
    dist = frozen.dist
    names = [s.strip() for s in dist.shapes.split(",")] if dist.shapes else []
    names.append("loc")
    values = dict(zip(names, frozen.args, strict=False))
    values.update(frozen.kwds)
    values.setdefault("loc", 0)
    return values


def classify(counts) -> CountsLaw:
    """Turn a scipy.stats frozen discrete distribution into a :class:`CountsLaw`.

    Raises
    ------
    TypeError
        If ``counts`` is not a frozen discrete scipy distribution.
    ValueError
        If its support is not within the non-negative integers or too long.
    """
    carried = getattr(counts, "polyconv_counts", None)  # laws of polyconv.dist.count_laws
    if isinstance(carried, CountsLaw):
        return carried
    from scipy import stats  # on first use: about a second cold (tests/test_import_light.py)

    dist = getattr(counts, "dist", None)
    if isinstance(dist, stats.rv_continuous):
        raise TypeError(f"counts must be a discrete law of claim counts (values 0, 1, 2, ...), "
                        f"e.g. scipy.stats.poisson(3.0); got the continuous law "
                        f"scipy.stats.{dist.name}(...)")
    if not isinstance(dist, stats.rv_discrete) or not hasattr(counts, "pmf"):
        raise TypeError("counts must be a frozen scipy.stats discrete distribution, e.g. "
                        f"scipy.stats.poisson(3.0); got {type(counts).__name__}")
    params = _bind(counts)
    name = dist.name
    loc = params.get("loc", 0)
    if loc == 0:
        if name == "poisson":
            return _poisson(float(params["mu"]))
        if name == "nbinom":
            return _nbinom(float(params["n"]), float(params["p"]))
        if name == "binom":
            return _binom(int(params["n"]), float(params["p"]))
    return _generic(counts, name)


def _poisson(mu: float) -> CountsLaw:
    if not (math.isfinite(mu) and mu >= 0):
        raise ValueError(f"counts: poisson mean must be finite and >= 0; got {mu!r}")
    law = TransformLaw(
        pgf=lambda z: np.exp(mu * (z - 1.0)),  # in z's precision (longdouble too)
        ratio=lambda z: np.full(z.shape, mu),
        log_pgf_real=lambda s: mu * math.expm1(s) if s < 700 else math.inf,
        mean=mu,
        pgf_rel=2 * mu + 4,  # exp of w = mu (z - 1), |w| <= 2 mu: relative error ~ (|w| + 2) u
        long_ok=True,
    )
    return CountsLaw("poisson", (0.0, mu), law, lambda f0: -mu * (1.0 - f0),
                     ab_long=(np.longdouble(0), np.longdouble(mu)))


def _nbinom(n: float, p: float) -> CountsLaw:
    if not (n > 0 and 0 < p <= 1):
        raise ValueError(f"counts: nbinom needs n > 0 and 0 < p <= 1; got n={n!r}, p={p!r}")
    q = 1.0 - p

    def log_pgf_real(s: float) -> float:
        if s >= 700 or q * math.exp(s) >= 1:
            return math.inf
        return n * (math.log(p) - math.log1p(-q * math.exp(s)))

    def pgf(z):
        # constants in z's precision (a longdouble route must not meet float64 log(p))
        real = z.real.dtype.type
        pz, qz = real(p), real(1) - real(p)
        return np.exp(n * (np.log(pz) - np.log(1 - qz * z)))

    law = TransformLaw(
        pgf=pgf,
        ratio=lambda z: n * q / (1.0 - q * z),
        log_pgf_real=log_pgf_real,
        mean=n * q / p,
        pgf_rel=2 * n * q / p + 6,  # conservative: exp(n log(..)) with |n log| ~ n q|z-1|/p
        long_ok=True,
    )
    def log_pgf_at(f0: float) -> float:
        # 1 - q f0 = p + q (1 - f0): no cancellation near f0 = 1 (with q rounded to 1 for a
        # tiny p, log1p(-q f0) at f0 = 1 was a math domain error); log1p where q f0 is small
        x = q * f0
        return n * (math.log(p) - (math.log1p(-x) if x < 0.5 else math.log(p + q * (1.0 - f0))))

    ql = np.longdouble(1) - np.longdouble(p)
    return CountsLaw("nbinom", (q, (n - 1.0) * q), law, log_pgf_at,
                     ab_long=(ql, (np.longdouble(n) - 1) * ql))


def _binom(m: int, p: float) -> CountsLaw:
    if not (m >= 0 and 0 <= p <= 1):
        raise ValueError(f"counts: binom needs n >= 0 and 0 <= p <= 1; got n={m!r}, p={p!r}")
    def pgf(z):
        real = z.real.dtype.type  # constants in z's precision (longdouble too)
        return integer_power(real(1) - real(p) + real(p) * z, m)

    law = TransformLaw(
        pgf=pgf,
        ratio=lambda z: m * p / np.where(1.0 - p + p * z == 0, 1.0, 1.0 - p + p * z),
        log_pgf_real=lambda s: m * math.log1p(p * math.expm1(s)) if s < 700 else math.inf,
        mean=m * p,
        pgf_rel=m * math.sqrt(5.0) + 4,
        long_ok=True,
    )
    ab = None if p >= 1 else (-p / (1 - p), (m + 1) * p / (1 - p))

    def log_p0(f0: float) -> float:
        base = 1.0 - p + p * f0
        return m * math.log(base) if base > 0 else -math.inf

    ab_long = None
    if p < 1:
        pl = np.longdouble(p)
        ab_long = (-pl / (1 - pl), (m + 1) * pl / (1 - pl))
    return CountsLaw("binom", ab, law, log_p0, ab_long=ab_long)


def _generic(counts, name: str) -> CountsLaw:
    lo, hi = counts.support()
    if not (math.isfinite(lo) and lo >= 0):
        raise ValueError(f"counts: support must be within the non-negative integers; {name} "
                         f"starts at {lo}")
    top = hi
    stalled = False
    if not math.isfinite(hi):
        top = lo + 16
        last = math.inf
        while True:
            sf = float(counts.sf(top))
            if not sf >= GENERIC_TAIL or top - lo > GENERIC_MAX_TERMS:
                break
            # a law without its own sf gets scipy's 1 - cdf, which stops falling at a rounding
            # floor (~1e-14) while the pmf has long vanished: stop there
            if sf <= 1e-12 and sf >= 0.5 * last and \
                    float(counts.pmf(top)) * max(top, 1) < GENERIC_TAIL:
                stalled = True
                break
            last = sf
            top = lo + 2 * (top - lo)
    if top - lo > GENERIC_MAX_TERMS:
        raise ValueError(f"counts: {name} still has P(N > {top:g}) = {float(counts.sf(top)):.3g}"
                         f" after {GENERIC_MAX_TERMS} terms, so its PGF cannot be summed: a law "
                         "this heavy-tailed (or one whose pmf does not sum to 1) is not "
                         "supported; use poisson, nbinom, binom or polyconv.dist.count_laws")
    lo, top = int(lo), int(top)
    ns = np.arange(lo, top + 1)
    pn = counts.pmf(ns)
    tail = max(0.0, 1.0 - math.fsum(pn)) if stalled else float(counts.sf(top))
    mean = float(np.dot(ns, pn))
    logp = np.log(np.where(pn > 0, pn, 1.0))
    logp[pn <= 0] = -np.inf

    def pgf(z):
        acc = np.zeros_like(z)
        for c in pn[::-1]:
            acc = acc * z + c
        return acc * integer_power(z, lo) if lo else acc

    from scipy.special import logsumexp  # on first use (tests/test_import_light.py)

    def log_pgf_real(s: float) -> float:
        return float(logsumexp(logp + ns * s))

    law = TransformLaw(pgf, None, log_pgf_real, mean, pgf_rel=2.0 * lo + 2,
                       pgf_abs=2.0 * (top - lo + 1), long_ok=True)  # Horner in z's precision
    return CountsLaw(name, None, law, lambda f0: log_pgf_real(math.log(f0)) if f0 > 0
                     else (math.log(pn[0]) if lo == 0 and pn[0] > 0 else -math.inf), tail)
