"""More claim-count laws: zero-truncated and zero-modified ``(a, b, 0)`` laws, mixed Poisson,
empirical tables.

Each constructor returns a frozen scipy.stats discrete law (``pmf``, ``cdf``, ``sf``, ``mean``,
``stats`` work as usual) that also carries its :class:`~polyconv.dist.counts.CountsLaw` (the
attribute ``polyconv_counts``), so :func:`polyconv.dist.compound` uses the right generating
function and, for the ``(a, b, 1)`` class, the recursion of :mod:`polyconv.dist.panjer_ab1`.

* Zero-modified (Klugman, Panjer & Willmot, *Loss Models*, section 6.6, from memory): from an
  ``(a, b, 0)`` law ``p_k`` and a new ``p_0^M``: ``p_k^M = (1 - p_0^M) / (1 - p_0) p_k`` for
  ``k >= 1``; the ratios ``p_k / p_{k-1} = a + b / k`` still hold for ``k >= 2`` (the ``(a, b, 1)``
  class).  PGF ``P^M(z) = p_0^M + (1 - p_0^M) (P(z) - p_0) / (1 - p_0)``.  Zero-truncated:
  ``p_0^M = 0``.
* Mixed Poisson ``N | Theta ~ Poisson(lambda Theta)``, ``E[Theta] = 1``: gamma mixing gives the
  negative binomial exactly (``r = 1 / cv^2``; Greenwood & Yule 1920, from memory); inverse
  Gaussian and lognormal mixing by Gauss-Hermite quadrature in ``log Theta`` (for the inverse
  Gaussian with importance weights, the density ratio to the lognormal of the same cv), i.e. a
  finite Poisson mixture ``sum_i w_i Poisson(lambda theta_i)`` that *is* the law computed (its
  PGF, pmf and moments are those of the mixture; the quadrature error against the continuous
  mixing is reported by :func:`mixed_poisson` as ``quadrature_gap``, the difference of the
  variances).
* Empirical tables: observed counts per year as a law (each year weight ``1/n``) or values with
  probabilities.
"""

from __future__ import annotations

import math

import numpy as np

from .counts import CountsLaw, classify
from .transform import TransformLaw

QUADRATURE_NODES = 64
"""Nodes of the Gauss rule used for inverse Gaussian and lognormal mixing."""


def _table_counts(pmf_fn, mean: float, var: float, name: str):
    """A frozen scipy.stats discrete law given by a pmf function, mean and variance (the class
    is built on first use so that importing this module does not load scipy.stats)."""
    global _TABLE_COUNTS
    if _TABLE_COUNTS is None:
        from scipy import stats

        class _TableCounts(stats.rv_discrete):
            """A count law given by a pmf function, mean and variance (internal)."""

            def __new__(cls, *args, **kwds):  # rv_discrete.__new__ inspects 'values' only
                return object.__new__(cls)

            def __init__(self, pmf_fn=None, mean: float = 0.0, var: float = 0.0,
                         name: str = "counts", **kw):
                kw.pop("a", None)
                super().__init__(a=0, name=name, **kw)
                self._fn, self._m, self._v = pmf_fn, mean, var

            def _updated_ctor_param(self):  # scipy re-creates the instance when freezing
                d = super()._updated_ctor_param()
                d.update(pmf_fn=self._fn, mean=self._m, var=self._v)
                return d

            def _pmf(self, k):
                return self._fn(np.asarray(k, dtype=float))

            def _stats(self):
                return self._m, self._v, None, None

        _TABLE_COUNTS = _TableCounts
    return _TABLE_COUNTS(pmf_fn, mean, var, name)()


_TABLE_COUNTS = None


def _attach(frozen, law: CountsLaw):
    frozen.polyconv_counts = law
    return frozen


def zero_modified(counts, p0: float):
    """The ``(a, b, 1)`` law with ``P(N = 0) = p0`` from an ``(a, b, 0)`` law (module docstring).

    Parameters
    ----------
    counts : frozen scipy.stats poisson, nbinom or binom (``loc = 0``)
    p0 : float
        New probability of no claim, ``0 <= p0 < 1``.

    Returns
    -------
    frozen scipy.stats discrete law carrying its CountsLaw (``polyconv_counts``).
    """
    base = classify(counts)
    if base.ab is None:
        raise ValueError(f"counts must be an (a, b, 0) law (poisson, nbinom, binom with loc 0) "
                         f"to be zero-modified; got {base.name}")
    if not (isinstance(p0, (int, float)) and 0 <= p0 < 1):
        raise ValueError(f"p0 must lie in [0, 1); got {p0!r}")
    q0 = float(counts.pmf(0))
    if q0 >= 1:
        raise ValueError("counts has all its mass at 0: nothing to modify")
    scale = (1.0 - p0) / (1.0 - q0)
    a, b = base.ab
    p1 = scale * float(counts.pmf(1))
    pgf0, t0 = base.transform, base.transform

    def pgf(z):
        return p0 + scale * (pgf0.pgf(z) - q0)

    def log_pgf_real(s: float) -> float:
        v = t0.log_pgf_real(s)
        if not math.isfinite(v):
            return v
        return math.log(p0 + scale * (math.exp(v) - q0)) if v < 700 else v + math.log(scale)

    mean = scale * float(counts.mean())
    second = scale * float(counts.var() + counts.mean() ** 2)
    tl = TransformLaw(pgf, None, log_pgf_real, mean, pgf_rel=pgf0.pgf_rel + 4,
                      pgf_abs=pgf0.pgf_abs + 4)

    def log_p0_at(f0: float) -> float:
        v = p0 + scale * (math.exp(base.log_pgf_at(f0)) - q0)
        return math.log(v) if v > 0 else -math.inf

    name = "zero-truncated " if p0 == 0 else "zero-modified "
    law = CountsLaw(name + base.name, (a, b), tl, log_p0_at, 0.0,
                    ab1=p1 - (a + b) * p0)

    def pmf_fn(k):
        return np.where(k == 0, p0, scale * counts.pmf(k))

    frozen = _table_counts(pmf_fn, mean, second - mean * mean, law.name.replace(" ", "_"))
    return _attach(frozen, law)


def zero_truncated(counts):
    """``N | N >= 1`` for an ``(a, b, 0)`` law: :func:`zero_modified` with ``p0 = 0``."""
    return zero_modified(counts, 0.0)


def poisson_mixture(weights, means, name: str = "poisson_mixture"):
    """``sum_i w_i Poisson(mu_i)`` as a count law (PGF ``sum_i w_i exp(mu_i (z - 1))``)."""
    from scipy import stats
    from scipy.special import logsumexp

    w = np.asarray(weights, dtype=float)
    mu = np.asarray(means, dtype=float)
    if w.shape != mu.shape or w.ndim != 1 or w.size == 0:
        raise ValueError("weights and means must be 1-D arrays of one length")
    if np.any(w < 0) or abs(float(w.sum()) - 1) > 1e-12 or np.any(mu < 0) or \
            not np.all(np.isfinite(mu)):
        raise ValueError("weights must be >= 0 summing to 1 and means finite and >= 0")
    keep = w > 0
    w, mu = w[keep], mu[keep]
    logw = np.log(w)
    mean = float(np.dot(w, mu))
    second = float(np.dot(w, mu + mu * mu))

    def pgf(z):
        out = np.zeros(z.shape, dtype=complex)
        for wi, mi in zip(w, mu, strict=True):
            out += wi * np.exp(mi * (z - 1.0))
        return out

    def log_pgf_real(s: float) -> float:
        if s >= 700:
            return math.inf
        return float(logsumexp(logw + mu * math.expm1(s)))

    tl = TransformLaw(pgf, None, log_pgf_real, mean, pgf_rel=2 * float(mu.max()) + 4 + w.size)
    law = CountsLaw(name, None, tl, lambda f0: float(logsumexp(logw - mu * (1.0 - f0))))

    def pmf_fn(k):
        return np.sum(w[:, None] * stats.poisson.pmf(np.atleast_1d(k)[None, :], mu[:, None]),
                      axis=0).reshape(np.shape(k))

    frozen = _table_counts(pmf_fn, mean, second - mean * mean, name)
    return _attach(frozen, law)


def mixed_poisson(mean: float, mixing: str, cv: float):
    """Mixed Poisson law with mean ``mean`` and mixing coefficient of variation ``cv``.

    ``mixing = "gamma"``: ``scipy.stats.nbinom(r, r / (r + mean))``, ``r = 1 / cv^2`` (exact).
    ``"inverse-gaussian"`` / ``"lognormal"``: a :func:`poisson_mixture` on the nodes of a Gauss
    rule for the mixing law with mean 1 and the given ``cv`` (module docstring); the returned
    law has the attribute ``quadrature_gap`` (its variance minus the exact mixed variance
    ``mean + mean^2 cv^2``).
    """
    from scipy import special, stats

    if not (mean > 0 and math.isfinite(mean) and cv > 0 and math.isfinite(cv)):
        raise ValueError(f"mean and cv must be positive and finite; got {mean!r}, {cv!r}")
    if mixing == "gamma":
        r = 1.0 / (cv * cv)
        return stats.nbinom(r, r / (r + mean))
    if mixing not in ("lognormal", "inverse-gaussian"):
        raise ValueError(f"mixing must be 'gamma', 'inverse-gaussian' or 'lognormal'; got "
                         f"{mixing!r}")
    # Gauss-Hermite (probabilists') nodes for log Theta of the lognormal with mean 1 and this
    # cv; for inverse Gaussian mixing the weights are multiplied by the density ratio
    # g_IG / g_LN at the nodes (importance weights), then normalised
    sigma = math.sqrt(math.log1p(cv * cv))
    x, wq = special.roots_hermitenorm(QUADRATURE_NODES)
    theta = np.exp(sigma * x - sigma * sigma / 2)
    weights = wq / wq.sum()
    if mixing == "inverse-gaussian":
        lam = 1.0 / (cv * cv)
        ratio = stats.invgauss(cv * cv, scale=lam).pdf(theta) / \
            stats.lognorm(sigma, scale=math.exp(-sigma * sigma / 2)).pdf(theta)
        weights = weights * ratio
        weights = weights / weights.sum()
        theta = theta / float(np.dot(weights, theta))  # keep E[Theta] = 1 exactly
    out = poisson_mixture(weights, mean * theta, name=f"poisson_{mixing}_mixture")
    out.quadrature_gap = float(out.var()) - (mean + mean * mean * cv * cv)
    return out


def empirical_counts(values, probabilities=None):
    """A count law from observed counts per year (each weight ``1/n``) or from ``values`` with
    their ``probabilities`` (summing to 1, not renormalised)."""
    from scipy import stats

    v = np.asarray(values)
    if v.ndim != 1 or v.size == 0 or np.any(v < 0) or np.any(v != np.round(v)):
        raise ValueError("values must be a non-empty list of non-negative whole numbers")
    v = v.astype(np.int64)
    if probabilities is None:
        uniq, cnt = np.unique(v, return_counts=True)
        probs = cnt / v.size
    else:
        probs = np.asarray(probabilities, dtype=float)
        if probs.shape != v.shape or np.any(probs < 0) or abs(float(probs.sum()) - 1) > 1e-9:
            raise ValueError("probabilities must be one per value, >= 0, summing to 1")
        uniq, inv = np.unique(v, return_inverse=True)
        probs = np.bincount(inv, weights=probs)
    return stats.rv_discrete(name="empirical_counts", values=(uniq, probs))()
