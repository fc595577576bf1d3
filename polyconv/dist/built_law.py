"""The law class behind :mod:`polyconv.dist.law_ops`: a scipy.stats continuous law given by its
cdf and sf callables and its first two moments (splices, mixtures, truncations, censoring and
inflation of other laws).  Kept apart so that ``import polyconv.dist`` does not load scipy.stats.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, stats

__all__ = ["BuiltLaw"]


class BuiltLaw(stats.rv_continuous):
    """A law given by cdf and sf callables and its first two moments (internal)."""

    def __init__(self, cdf=None, sf=None, moments=None, upper: float = math.inf,
                 name: str = "built", tail=None, **kw):
        kw.pop("a", None)
        kw.pop("b", None)
        super().__init__(a=0.0, b=upper, name=name, **kw)
        self._c, self._s, self._mom, self._upper, self._tail = cdf, sf, moments, upper, tail

    def _updated_ctor_param(self):  # scipy re-creates the instance when freezing
        d = super()._updated_ctor_param()
        d.update(cdf=self._c, sf=self._s, moments=self._mom, upper=self._upper, tail=self._tail)
        return d

    def tail_moment(self, b: float) -> float:
        """``E[X 1{X > b}]`` from the components' own (closed forms where scipy's laws have
        them, :func:`polyconv.dist.law_moments.tail_moment`); read by that function."""
        return float(self._tail(float(b)))

    def _cdf(self, x):
        return np.clip(self._c(np.asarray(x, dtype=float)), 0.0, 1.0)

    def _sf(self, x):
        return np.clip(self._s(np.asarray(x, dtype=float)), 0.0, 1.0)

    def _ppf(self, q):
        return np.vectorize(self._invert)(q, False)

    def _isf(self, q):
        return np.vectorize(self._invert)(q, True)

    def _invert(self, q: float, upper: bool) -> float:
        fn = (lambda x: float(self._s(np.array([x]))[0]) - q) if upper else \
            (lambda x: float(self._c(np.array([x]))[0]) - q)
        if (upper and q >= 1) or (not upper and q <= 0):
            return 0.0
        hi = 1.0
        while (fn(hi) > 0 if upper else fn(hi) < 0):
            hi *= 2.0
            if hi > 1e300:
                return math.inf
        lo = 0.0
        if (fn(lo) <= 0 if upper else fn(lo) >= 0):
            return 0.0
        return float(optimize.brentq(fn, lo, hi, xtol=1e-12 * hi, rtol=1e-13))

    def _pdf(self, x):
        h = 1e-6 * np.maximum(np.abs(x), 1e-6)
        return np.maximum((self._cdf(x + h) - self._cdf(x - h)) / (2 * h), 0.0)

    def _stats(self):
        m1, m2 = self.tail_moment(0.0), self._mom()[1]
        return m1, m2 - m1 * m1, None, None

    def _munp(self, n):
        if n == 1:
            return self.tail_moment(0.0)
        if n == 2:
            return self._mom()[1]
        return super()._munp(n)
