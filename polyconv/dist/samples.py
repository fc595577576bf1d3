"""Measured delays on a lattice: samples, histograms, the DKW band, an optional fitted tail.

The empirical law of ``n`` samples is put on ``origin + step k`` by a rule (``"nearest"``: the
cell ``[x_k - h/2, x_k + h/2)``, as :func:`numpy.histogram` with those edges; ``"down"`` /
``"up"``: the point below / above, stochastic bounds).  Its probabilities are ``counts / n``.

Sample-size honesty: the Dvoretzky-Kiefer-Wolfowitz inequality with Massart's constant
(P. Massart, "The tight constant in the Dvoretzky-Kiefer-Wolfowitz inequality", Annals of
Probability 18 (1990) 1269-1283)::

    P( sup_x |F_n(x) - F(x)| > eps ) <= 2 exp(-2 n eps^2),   eps = sqrt(ln(2 / alpha) / (2 n))

gives, at confidence ``1 - alpha``, a band of half-width ``eps`` around the empirical cdf that
holds for every ``x`` at once and for any law (continuous or not).  The Lattice carries it in
its error ledger: the *exact model* is the sampled law binned by the same rule, and

* ``cumulative = eps`` (plus rounding): every cdf value is within the band;
* ``point = 2 eps`` (a point mass is the difference of two cdf values), ``l1 = 2`` (nothing
  better is known from a band alone);
* the true law may put mass ``<= eps`` beyond the largest sample: ``truncated_moment = inf``
  (or ``eps * upper`` when an upper limit of the delay is known), so tail probabilities past
  the data come out as bounds ``[0, eps]`` and means are refused rather than invented.

Every operation of :mod:`polyconv.dist` carries the cumulative bound (convolution, maximum,
minimum, order statistics, mixtures and retries add the bands of their inputs, see
:mod:`polyconv.dist.ledger`), so a network's percentile brackets and deadline-miss bounds
account for the sample sizes.  Several sampled stages hold simultaneously at confidence
``1 - sum alpha_i`` (Bonferroni's inequality); :func:`stage_alpha` splits a network-wide level.

Optional fitted tail (peaks over threshold; Pickands 1975, Balkema & de Haan 1974): beyond a
threshold ``u`` the exceedances ``x - u`` are fitted by maximum likelihood with
``scipy.stats.genpareto.fit(y, floc=0)`` (generalized Pareto) or ``scipy.stats.expon.fit(y,
floc=0)`` (exponential: the mean excess); the tail mass ``P(X > u)`` stays the empirical
fraction.  A fitted tail is a model choice, not data: the DKW band does not cover its shape.

Caution: a model output, not advice; check against engineering codes and qualified practice.
"""

from __future__ import annotations

import math
import warnings
from typing import NamedTuple

import numpy as np

from ..numerics.budget import check_allocation
from .ledger import ErrorLedger
from .risk import real_value

RULES = ("nearest", "down", "up")
"""Binning rules of :func:`empirical`."""

TAIL_LAWS = ("genpareto", "expon")
"""Laws of a fitted tail."""

TAIL_MASS_TOL = 1e-12
"""A fitted tail is laid on the grid until its remaining mass is below this (or the cap)."""

MIN_EXCEEDANCES = 20
"""Fewest samples above a threshold a tail may be fitted to."""

SNAP = 1e-9
"""A sample within ``SNAP`` steps of a lattice point counts as on it (rules down / up)."""

COARSE_SPREAD = 1.0
"""Samples off the lattice whose standard deviation is below ``COARSE_SPREAD`` steps warn:
binning moves each by up to half a step, which then is of the order of the whole spread
(Sheppard's correction ``h^2 / 12`` is then above 8 % of the variance; Kendall & Stuart,
*The Advanced Theory of Statistics* vol. 1, section 3.18)."""


class TailFit(NamedTuple):
    """A fitted parametric tail: law name, parameters, threshold, how many samples it rests on."""

    law: str
    params: dict
    threshold: float
    exceedances: int
    description: str


class Sampled(NamedTuple):
    """A sampled stage: its Lattice and what the report must say about the sample.

    Attributes
    ----------
    lattice : Lattice
        The binned empirical law (with the fitted tail, if any); the DKW band in its ledger.
    n : float
        Number of samples (the total count of a histogram).
    eps : float
        DKW half-width at confidence ``1 - alpha``.
    alpha : float
        One minus the confidence of the band.
    largest : float
        The largest sample (beyond it the data say only ``P <= eps``).
    tail : TailFit or None
        The fitted tail, when asked for.
    """

    lattice: object
    n: float
    eps: float
    alpha: float
    largest: float
    tail: TailFit | None


def dkw_epsilon(n: float, alpha: float) -> float:
    """Half-width ``eps = sqrt(ln(2/alpha) / (2 n))`` of the DKW band with Massart's constant:
    ``P(sup |F_n - F| > eps) <= alpha`` (Massart 1990, module docstring)."""
    a = real_value(alpha, "alpha")
    if not 0 < a < 1:
        raise ValueError(f"alpha must lie in (0, 1); got {alpha!r}")
    if not n > 0:
        raise ValueError(f"the number of samples must be positive; got {n!r}")
    return math.sqrt(math.log(2.0 / a) / (2.0 * n))


def stage_alpha(alpha: float, stages: int) -> float:
    """Per-stage ``alpha`` so that bands of ``stages`` sampled stages hold together at confidence
    ``1 - alpha`` (Bonferroni: ``P(any fails) <= sum alpha_i``)."""
    return alpha / max(int(stages), 1)


def samples_beyond(n: float, level: float) -> int:
    """How many of ``n`` samples lie above the empirical ``level``-quantile: ``floor(n (1 -
    level))`` (the samples that back a percentile; fewer than one: none does)."""
    return int(math.floor(n * (1.0 - level) + 1e-9))


def _as_samples(samples, name: str) -> np.ndarray:
    try:
        x = np.asarray(samples, dtype=float).ravel()
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be an array of real numbers") from None
    if x.size == 0:
        raise ValueError(f"{name} must hold at least one value")
    if not np.all(np.isfinite(x)):
        k = int(np.flatnonzero(~np.isfinite(x))[0])
        raise ValueError(f"{name} must be finite; {name}[{k}] = {x[k]!r}")
    return x


def _indices(x: np.ndarray, step: float, origin: float, rule: str) -> np.ndarray:
    """Lattice index of each sample by ``rule`` (as int64; the arithmetic ``(x - origin) /
    step`` then the rounding, in place: one temporary for 10^6 samples, not three)."""
    v = np.subtract(x, origin) if origin != 0 else np.array(x, dtype=float)
    np.divide(v, step, out=v)
    if rule == "nearest":
        v += 0.5
        np.floor(v, out=v)
    elif rule == "down":
        v += SNAP
        np.floor(v, out=v)
    else:
        v -= SNAP
        np.ceil(v, out=v)
    return v.astype(np.int64)


def _weights(counts, size: int) -> np.ndarray | None:
    if counts is None:
        return None
    w = _as_samples(counts, "counts")
    if w.size != size:
        raise ValueError(f"counts must have one entry per sample ({size}); got {w.size}")
    if np.any(w < 0):
        raise ValueError("counts must be non-negative")
    total = float(w.sum())
    if not total > 0:
        raise ValueError("counts must not all be zero")
    if not math.isfinite(total):
        raise ValueError("counts must have a finite sum (they overflow a float)")
    return w


def empirical(samples, *, step, origin=0.0, counts=None, alpha=0.05, rule="nearest",
              upper=None, tail=None, size=None, lattice_cls=None) -> Sampled:
    """The empirical law of ``samples`` on ``origin + step k`` with its DKW band.

    Parameters
    ----------
    samples : array_like
        Measured values (finite, at least ``origin - step/2``).
    step, origin : float
        The lattice.
    counts : array_like, optional
        A weight per sample (values with counts: a histogram of exact values).
    alpha : float
        The band holds with probability ``1 - alpha`` (default 0.05).
    rule : {"nearest", "down", "up"}
        Binning rule (module docstring).
    upper : float, optional
        A known largest possible value (e.g. a client timeout): bounds the first moment of the
        mass the band allows beyond the data (else it is unknown and means are refused).
    tail : dict, optional
        ``{"threshold": u, "law": "genpareto" | "expon"}``: a fitted tail beyond ``u``.
    size : int, optional
        Grid points of a fitted tail (default: until its mass is below ``TAIL_MASS_TOL``,
        capped by the memory budget).

    Returns
    -------
    Sampled
    """
    from .lattice import Lattice
    cls = lattice_cls or Lattice
    x = _as_samples(samples, "samples")
    h = real_value(step, "step")
    if not h > 0:
        raise ValueError(f"step must be positive; got {step!r}")
    o = real_value(origin, "origin")
    if rule not in RULES:
        raise ValueError(f"rule must be one of {', '.join(RULES)}; got {rule!r}")
    w = _weights(counts, x.size)
    n = float(x.size if w is None else w.sum())
    eps = dkw_epsilon(n, alpha)
    k = _indices(x, h, o, rule)
    if k.min() < 0:
        j = int(np.argmin(k))
        raise ValueError(f"samples must lie on or above the lattice origin {o!r}; "
                         f"samples[{j}] = {x[j]!r}")
    check_spread(x, w, h, k, o)
    fit = None
    if tail is not None:
        fit = fit_tail(x, w, tail)
        keep = x <= fit.threshold
        k_body = k[keep]
        w_body = None if w is None else w[keep]
    else:
        k_body, w_body = k, w
    top = int(k.max()) if fit is None else int(k_body.max(initial=0))
    check_allocation(8 * (top + 2), "empirical lattice of the samples")
    pmf = np.bincount(k_body, weights=w_body, minlength=top + 1) / n
    u = 2.0 ** -53
    cum = min(eps + 4 * u * (1 + math.log2(pmf.size + 1)), 1.0)
    if fit is not None:
        pmf, moment = _with_tail(pmf, h, o, n, w, x, fit, size)
        ledger = ErrorLedger(min(2 * eps + 4 * u, 1.0), 2.0, 0.0, pmf.size, moment, cum)
    else:
        moment = math.inf
        if upper is not None:
            top_value = real_value(upper, "upper")
            if top_value < float(x.max()):
                raise ValueError(f"upper must be at least the largest sample {x.max()!r}; "
                                 f"got {upper!r}")
            moment = min(eps + cum, 1.0) * max(abs(top_value), abs(o))
        ledger = ErrorLedger(min(2 * eps + 4 * u, 1.0), 2.0, 0.0, pmf.size, moment, cum)
    lat = cls(np.minimum(pmf, 1.0), h, o, errors=ledger)
    return Sampled(lat, n, eps, float(alpha), float(x.max()), fit)


def check_spread(x: np.ndarray, w: np.ndarray | None, h: float, k: np.ndarray,
                 origin: float) -> float:
    """Warn (:class:`~polyconv.dist.step_check.CoarseStepWarning`) when the step is much coarser
    than the samples' spread (:data:`COARSE_SPREAD`) and the samples are not on the lattice;
    returns the standard deviation (``nan`` when it was not needed).

    Binning moves each sample by at most ``h / 2`` (rule ``nearest``; ``h`` for ``down`` /
    ``up``), so the standard deviation of the samples is at least that of their lattice
    points minus ``h`` (Minkowski's inequality); only when that does not settle it are the
    samples themselves looked at."""
    lo, hi = int(k.min()), int(k.max())
    if hi - lo > 64:
        counts = np.bincount(k - lo, weights=w).astype(float)
        j = np.arange(counts.size, dtype=float)
        mean = float(np.dot(counts, j) / counts.sum())
        binned_sd = h * math.sqrt(max(float(np.dot(counts, (j - mean) ** 2) / counts.sum()), 0))
        if binned_sd - h > COARSE_SPREAD * h:
            return math.nan
    sd = float(np.sqrt(np.cov(x, aweights=w, bias=True))) if x.size > 1 else 0.0
    if not (0 < sd and h > COARSE_SPREAD * sd):
        return sd
    off = np.abs((x - origin) / h - k)
    if float(off.max()) <= SNAP:
        return sd  # exact values on the lattice: binning moves nothing
    from .step_check import CoarseStepWarning, _nice_floor
    warnings.warn(f"step {h:g} is much coarser than the samples' spread (standard deviation "
                  f"{sd:.3g}): binning moves each sample by up to half a step, so the stage's "
                  f"law is mostly lost on this grid; try step={_nice_floor(sd / 10):g}",
                  CoarseStepWarning, stacklevel=3)
    return sd


def from_histogram(edges, counts, *, step, origin=0.0, alpha=0.05, rule="up",
                   upper=None, lattice_cls=None) -> Sampled:
    """A histogram of measured values (``counts[i]`` samples in ``[edges[i], edges[i+1])``) on
    the lattice, with the DKW band of ``sum(counts)`` samples.

    Each bin's count goes to one lattice point: ``"up"`` (default) its upper edge rounded up to
    the lattice (a stochastic upper bound: delays never understated), ``"down"`` its lower edge
    rounded down, ``"nearest"`` the point nearest the bin's midpoint.  The band holds at the
    bin edges, where the empirical cdf is known.
    """
    e = _as_samples(edges, "edges")
    c = _as_samples(counts, "counts")
    if e.size != c.size + 1:
        raise ValueError(f"edges must have one entry more than counts ({c.size + 1}); got "
                         f"{e.size}")
    if np.any(np.diff(e) <= 0):
        raise ValueError("edges must increase strictly")
    if rule not in RULES:
        raise ValueError(f"rule must be one of {', '.join(RULES)}; got {rule!r}")
    where = {"up": e[1:], "down": e[:-1], "nearest": 0.5 * (e[1:] + e[:-1])}[rule]
    return empirical(where, step=step, origin=origin, counts=c, alpha=alpha, rule=rule,
                     upper=upper, lattice_cls=lattice_cls)


def fit_tail(x: np.ndarray, w: np.ndarray | None, tail) -> TailFit:
    """Fit the exceedances over ``tail["threshold"]`` by maximum likelihood (module docstring)."""
    if not isinstance(tail, dict):
        raise TypeError(f"tail must be a dict with 'threshold' and 'law'; got {tail!r}")
    unknown = set(tail) - {"threshold", "law"}
    if unknown:
        raise ValueError(f"tail takes only 'threshold' and 'law'; got {sorted(unknown)}")
    if "threshold" not in tail:
        raise ValueError("tail needs a 'threshold'")
    u = real_value(tail["threshold"], "tail threshold")
    law = tail.get("law", "genpareto")
    if law not in TAIL_LAWS:
        raise ValueError(f"tail law must be one of {', '.join(TAIL_LAWS)}; got {law!r}")
    if w is not None:
        raise ValueError("a fitted tail needs raw samples, not values with counts")
    y = x[x > u] - u
    if y.size < MIN_EXCEEDANCES:
        raise ValueError(f"tail threshold {u!r} leaves {y.size} samples above it; at least "
                         f"{MIN_EXCEEDANCES} are needed to fit a tail")
    from scipy import stats
    if law == "genpareto":
        c, _, scale = stats.genpareto.fit(y, floc=0.0)
        params = {"c": float(c), "scale": float(scale)}
        how = (f"generalized Pareto (shape {c:.4g}, scale {scale:.4g}) fitted by maximum "
               "likelihood (scipy.stats.genpareto.fit, location fixed at 0)")
    else:
        _, scale = stats.expon.fit(y, floc=0.0)
        params = {"scale": float(scale)}
        how = (f"exponential (mean excess {scale:.4g}) fitted by maximum likelihood "
               "(scipy.stats.expon.fit, location fixed at 0)")
    desc = f"tail beyond {u:g}: {how} to the {y.size} exceedances"
    return TailFit(law, params, u, int(y.size), desc)


def _tail_law(fit: TailFit):
    from scipy import stats
    if fit.law == "genpareto":
        return stats.genpareto(fit.params["c"], loc=0.0, scale=fit.params["scale"])
    return stats.expon(loc=0.0, scale=fit.params["scale"])


def _with_tail(pmf, h, o, n, w, x, fit: TailFit, size):
    """Body pmf plus ``P(X > u) * excess law`` on the nearest-rule cells above ``u``; returns
    the pmf and the first-moment bound of the mass left beyond the grid."""
    law = _tail_law(fit)
    p_u = float(np.sum(x > fit.threshold)) / n
    start = (fit.threshold - o) / h
    if size is None:
        far = float(law.isf(TAIL_MASS_TOL))
        if not math.isfinite(far):
            far = float(law.isf(1e-9))
        end = int(math.ceil(start + far / h)) + 2
    else:
        end = int(size)
    end = max(end, pmf.size, int(math.ceil(start)) + 2)
    check_allocation(8 * end * 3, "grid of the fitted tail")
    k = np.arange(end, dtype=float)
    lo_edge = np.maximum((k - 0.5) * h + o - fit.threshold, 0.0)
    hi_edge = np.maximum((k + 0.5) * h + o - fit.threshold, 0.0)
    cells = p_u * np.maximum(law.sf(lo_edge) - law.sf(hi_edge), 0.0)
    out = np.zeros(end)
    out[: pmf.size] = pmf
    out += cells
    rest_y = float(hi_edge[-1])
    rest = p_u * float(law.sf(rest_y))
    c = fit.params.get("c", 0.0)
    if rest == 0:
        moment = 0.0
    elif c >= 1:
        moment = math.inf
    else:
        excess = (fit.params["scale"] + c * rest_y) / (1 - c)
        moment = rest * (abs(fit.threshold) + rest_y + excess)
    return out, max(moment, 1e-300) if rest > 0 else moment


