"""Reinsurance on a lattice: proportional shares and excess-of-loss layers with aggregate terms.

One claim ``X`` (on the step ``h`` from 0) is split into a retained and a ceded part; ``N`` claims
give the joint aggregate ``(R, L) = sum (X_i - c(X_i), c(X_i))`` (:func:`polyconv.dist.bivariate.
compound2`), from which gross ``G = R + L``, ceded and net come as functions of one joint law.

Excess of loss (per risk, or per occurrence when each claim is one occurrence): the layer ``W xs
D`` cedes ``c(x) = min(max(x - D, 0), W)`` per claim.  On the aggregate layer loss ``L``:

* annual aggregate deductible ``AAD`` and aggregate limit ``AAL``; ``k`` reinstatements cap the
  aggregate at ``(k + 1) W`` (``AL = min(AAL, (k + 1) W)``); the recovery is
  ``C = min(max(L - AAD, 0), AL)``.
* reinstatement premium, pro rata as to amount (common practice, no source):
  ``RP = P sum_{i=1..k} c_i min(max(C - (i - 1) W, 0), W) / W`` for the upfront premium ``P``
  and rates ``c_i``; when ``P`` is not given, the pure premium with reinstatements solves
  ``P + E[RP] = E[C]``: ``P = E[C] / (1 + sum_i c_i E[min(max(C - (i-1)W, 0), W)] / W)``.
* net ``G - C = R + phi(L)`` with ``phi(l) = l`` below ``AAD``, ``AAD`` up to ``A = AAD + AL``,
  ``l - AL`` beyond.  So only the window ``L <= A`` of the joint law is needed:
  ``P(net = t) = sum_{j < A} J(t - phi(j), j) + P(G = t + AL) - sum_{j < A} J(t + AL - j, j)``
  (the last two terms: ``G = t + AL`` with ``L >= A``), with ``G`` the 1-D compound of ``X``.

Proportional shares: a quota share ``q`` of an aggregate ``S`` cedes ``q S`` exactly (the same pmf
on the step ``q h``): :func:`quota_share`.  A surplus treaty cedes, of a risk with sum insured
``V``, the share ``min(lines * retention, max(V - retention, 0)) / V`` (:func:`surplus_share`;
common practice, no source): per band of sums insured it is a quota share.

Caution: a model output, not advice.  Assumes claim counts independent of amounts, amounts
i.i.d.; one claim is one occurrence.  Defer to local regulation and qualified actuarial practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..numerics.budget import check_allocation
from .bivariate import BivariateLattice, compound2
from .compound import compound
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound

_U = 2.0 ** -53
ROW_TAIL = 1e-10
"""Gross mass beyond the grid under which the joint's retained axis is transformed unpadded."""


@dataclass(frozen=True)
class XoLLayer:
    """An excess-of-loss layer ``limit xs deductible`` per claim, with aggregate terms.

    Attributes
    ----------
    deductible, limit : float
        Per-claim retention ``D`` and layer width ``W`` (whole multiples of the lattice step).
    reinstatements : int or None
        Number ``k`` of reinstatements (aggregate cap ``(k + 1) W``); None: unlimited.
    rates : tuple of float
        Premium rate of each reinstatement as a fraction of the upfront premium (one value is
        used for all ``k``); 0 for free reinstatements.
    aggregate_deductible, aggregate_limit : float
        Annual aggregate deductible and limit on the layer's losses (multiples of the step).
    premium : float or None
        Upfront layer premium ``P``; None: the pure premium with reinstatements.
    """

    deductible: float
    limit: float
    reinstatements: int | None = None
    rates: tuple[float, ...] = (1.0,)
    aggregate_deductible: float = 0.0
    aggregate_limit: float = math.inf
    premium: float | None = None

    def __post_init__(self):
        if not (self.deductible >= 0 and math.isfinite(self.deductible)):
            raise ValueError(f"deductible must be finite and >= 0; got {self.deductible!r}")
        if not (self.limit > 0 and math.isfinite(self.limit)):
            raise ValueError(f"limit must be finite and > 0; got {self.limit!r}")
        k = self.reinstatements
        if k is not None and (isinstance(k, bool) or not isinstance(k, int) or k < 0):
            raise ValueError(f"reinstatements must be None or an integer >= 0; got {k!r}")
        if any(not (r >= 0 and math.isfinite(r)) for r in self.rates) or not self.rates:
            raise ValueError(f"rates must be finite, >= 0 and not empty; got {self.rates!r}")
        if k is not None and len(self.rates) not in (1, k) and k > 0:
            raise ValueError(f"rates must give one rate or one per reinstatement ({k}); got "
                             f"{len(self.rates)}")
        if not self.aggregate_deductible >= 0 or not self.aggregate_limit > 0:
            raise ValueError("aggregate_deductible must be >= 0 and aggregate_limit > 0")
        if self.premium is not None and not (self.premium >= 0 and math.isfinite(self.premium)):
            raise ValueError(f"premium must be finite and >= 0; got {self.premium!r}")

    def aggregate_cap(self) -> float:
        """``min(aggregate_limit, (k + 1) limit)``."""
        cap = self.aggregate_limit
        if self.reinstatements is not None:
            cap = min(cap, (self.reinstatements + 1) * self.limit)
        return cap

    def rate_list(self) -> list[float]:
        """One rate per reinstatement."""
        k = self.reinstatements or 0
        return list(self.rates) * k if len(self.rates) == 1 else list(self.rates)[:k]


@dataclass
class ProgrammeResult:
    """Gross, ceded (layer recovery) and net aggregate laws of one line with one layer."""

    layer: XoLLayer
    gross: Lattice
    ceded: Lattice
    net: Lattice
    layer_loss: Lattice
    joint: BivariateLattice | None
    premium: float
    expected_reinstatement_premium: float
    notes: list[str] = field(default_factory=list)

    @property
    def expected_ceded(self) -> float:
        """``E[C]`` on the lattice."""
        return self.ceded._mean()

    def side_by_side(self, levels) -> list[dict]:
        """Mean, VaR and TVaR of gross, ceded and net at each level (the lattices' own)."""
        rows = [{"measure": "mean", "gross": self.gross._mean(), "ceded": self.ceded._mean(),
                 "net": self.net._mean()}]
        for p in levels:
            for name, fn in (("VaR", "value_at_risk"), ("TVaR", "tail_value_at_risk")):
                rows.append({"measure": f"{name} {p:g}",
                             **{k: getattr(lat, fn)(p) for k, lat in
                                (("gross", self.gross), ("ceded", self.ceded),
                                 ("net", self.net))}})
        return rows


def _index(value: float, h: float, name: str) -> int:
    k = value / h
    if not math.isfinite(k) or abs(k - round(k)) > 1e-9 * max(1.0, abs(k)):
        raise ValueError(f"{name} must be a whole multiple of the lattice step {h:g}; got "
                         f"{value!r}")
    return int(round(k))


def layer_split(severity: Lattice, deductible: float, limit: float) -> BivariateLattice:
    """Joint law of ``(X - c(X), c(X))`` for ``c(x) = min(max(x - D, 0), W)`` (one claim)."""
    h = severity.step
    d, w = _index(deductible, h, "deductible"), _index(limit, h, "limit")
    split = BivariateLattice.from_split(severity, lambda k: np.clip(k - d, 0, w))
    if severity.truncated_mass > 0 and round(severity.origin / h) + len(severity) > d + w:
        # mass beyond the grid cedes exactly W: its Y coordinate is known
        split.means = (split.means[0], min(split.means[1], _on_grid_mean(split, 1)
                                           + w * h * min(1.0, severity.truncated_mass
                                                         + severity.errors.l1)))
    else:
        split.means = (split.means[0], _on_grid_mean(split, 1) * (1 + 4 * _U)
                       + w * h * severity.errors.l1)
    return split


def _on_grid_mean(b: BivariateLattice, axis: int) -> float:
    vec = b.pmf.sum(axis=1 - axis)
    return b.step * float(np.dot(np.arange(vec.size), vec))


def xol_programme(counts, severity: Lattice, layer: XoLLayer, *, size: int | None = None,
                  pad: float = 2.0, cluster=None, basis: str = "per-occurrence"
                  ) -> ProgrammeResult:
    """Gross, ceded and net aggregate laws of a line protected by one XoL layer (module
    docstring), with the expected reinstatement premium.

    Parameters
    ----------
    counts : scipy.stats frozen discrete law
        Number of claims (occurrences) in the year.
    severity : Lattice
        One claim's amount, origin a non-negative whole multiple of the step.
    layer : XoLLayer
        The layer and its aggregate terms.
    size : int, optional
        Points of the gross (and net) grid; default that of :func:`polyconv.dist.compound`.
    pad : float
        Transform padding of the joint compound.
    cluster : scipy.stats frozen discrete law, optional
        Claims per occurrence ``K`` (i.i.d. over occurrences, independent of the amounts);
        ``counts`` then counts occurrences.  Default: one claim per occurrence.
    basis : {"per-occurrence", "per-risk"}
        With a ``cluster``: the layer applies to each occurrence's total ``sum_{j <= K} X_j``
        (its severity is that 1-D compound), or to each claim (the occurrence's pair of
        retained and ceded sums is the joint compound of ``K`` per-claim splits, windowed at
        ``L <= A`` like the year's: an occurrence beyond the window puts the year beyond it).

    Returns
    -------
    ProgrammeResult
        ``gross`` (the 1-D compound), ``layer_loss`` (the joint's ``L`` marginal on the window),
        ``ceded`` (``min(max(L - AAD, 0), AL)``), ``net`` (``G - C``, ledger: the joint's L1 error
        twice plus the gross one; its truncated part lies from ``len(gross) - AL / h``, with the
        gross truncated part's first moment), ``joint`` (the window ``L <= A``), ``premium``
        and ``expected_reinstatement_premium``.

    Notes
    -----
    A model output, not advice (see :mod:`polyconv.dist`).
    """
    if not isinstance(layer, XoLLayer):
        raise TypeError(f"layer must be an XoLLayer; got {type(layer).__name__}")
    if basis not in ("per-occurrence", "per-risk"):
        raise ValueError(f"basis must be 'per-occurrence' or 'per-risk'; got {basis!r}")
    h = severity.step
    aad = _index(layer.aggregate_deductible, h, "aggregate_deductible")
    cap = layer.aggregate_cap()
    _index(layer.limit, h, "limit")
    per_claim = severity
    if cluster is not None:
        severity = compound(cluster, severity, size=size)  # one occurrence's total
    gross = compound(counts, severity, size=size)
    n1 = len(gross)
    if math.isinf(cap):
        al = None
        window = aad + 1
    else:
        al = _index(cap, h, "aggregate cap")
        window = aad + al + 1
    notes: list[str] = []
    per_risk = cluster is not None and basis == "per-risk"
    if per_risk:
        notes.append("per-risk layer on clustered claims: the occurrence's retained and ceded "
                     "sums are the joint compound of its claims' splits")
    if al is None and aad == 0:  # no aggregate terms: C = L and net = R, two 1-D compounds
        split = layer_split(per_claim if per_risk else severity, layer.deductible, layer.limit)
        parts = [split.marginal(0), split.marginal(1)]
        if per_risk:
            parts = [compound(cluster, x, size=n1) for x in parts]
        layer_loss = compound(counts, parts[1], size=n1)
        net = compound(counts, parts[0], size=n1)
        joint = None
        notes.append("no aggregate terms: ceded and net are the compounds of the per-claim "
                     "split's two parts (their joint law is not needed)")
    else:
        # rows (retained R <= G): when the gross law's mass beyond its grid is negligible, so is
        # R's, and the rows need no padding (the wrapped mass is in the joint's ledger)
        rows_pad = 1.0 if gross.errors.truncated <= ROW_TAIL else pad
        split = compound2(cluster, layer_split(per_claim, layer.deductible, layer.limit),
                          (n1, window), pad=(rows_pad, pad)) if per_risk \
            else layer_split(severity, layer.deductible, layer.limit)
        joint = compound2(counts, split, (n1, window), pad=(rows_pad, pad))
        layer_loss = joint.marginal(1)
        if al is None:  # R and L in full from 1-D compounds (the window holds only L <= AAD)
            full = layer_split(per_claim, layer.deductible, layer.limit) if per_risk else split
            kept, ceded_part = full.marginal(0), full.marginal(1)
            if per_risk:
                kept, ceded_part = (compound(cluster, x, size=n1) for x in (kept, ceded_part))
            retained = compound(counts, kept, size=n1)
            layer_loss = compound(counts, ceded_part, size=n1)
            net = _net_uncapped(joint, retained, gross, aad)
        else:
            net = _net(joint, gross, aad, al)
    ceded = layer_loss.layer(aad * h, math.inf if al is None else al * h) \
        if (aad > 0 or al is not None) else layer_loss
    premium, erp = reinstatement_terms(ceded, layer)
    return ProgrammeResult(layer, gross, ceded, net, layer_loss, joint, premium, erp, notes)


def _net_uncapped(joint: BivariateLattice, retained: Lattice, gross: Lattice, aad: int
                  ) -> Lattice:
    """``net = R + min(L, AAD)``: ``sum_{j <= AAD} J(t - j, j) + P(R = t - AAD) -
    sum_{j <= AAD} J(t - AAD, j)`` (``R`` the 1-D compound of the retained parts)."""
    n1 = joint.shape[0]
    j = np.arange(aad + 1)
    sub = BivariateLattice(joint.pmf[:, :aad + 1], joint.step)
    first = sub.columns_pushed(j, n1)
    rows = sub.pmf.sum(axis=1)
    vec = first.copy()
    vec[aad:] += retained.pmf[:n1 - aad] - rows[:n1 - aad]
    lj, lr = joint.errors, retained.errors
    neg = float(-np.sum(vec[vec < 0]))
    led = ErrorLedger(min(2 * min(lj.l1, (aad + 1) * lj.point) + lr.point + neg, 2.0),
                      min(2 * lj.l1 + lr.l1 + neg, 2.0), 0.0, max(n1 - 0, 0),
                      gross.errors.truncated_moment,
                      min(2 * cum_bound(lj) + cum_bound(lr) + neg, 2.0))
    return Lattice._make(np.maximum(vec, 0.0), joint.step, 0.0, led)


def _net(joint: BivariateLattice, gross: Lattice, aad: int, al: int) -> Lattice:
    """``P(net = t)`` from the window and the gross law (module docstring)."""
    n1 = joint.shape[0]
    a = aad + al  # window columns 0..a
    sub = joint.pmf[:, :a]  # a view: no copy of the window
    first = _diagonal_sums(sub[:, :aad], n1)  # columns j < AAD pushed by j ...
    first[aad:] += sub[:n1 - aad, aad:].sum(axis=1)  # ... the others by AAD
    diag = _diagonal_sums(sub, n1 + al)  # P(G = s, L < A)
    g = np.zeros(n1 + al)
    g[:n1] = gross.pmf
    vec = first + (g[al:al + n1] - diag[al:al + n1])
    lj, lg = joint.errors, gross.errors
    point = 2 * min(lj.l1, a * lj.point) + lg.point
    l1 = 2 * lj.l1 + lg.l1
    neg = float(-np.sum(vec[vec < 0]))
    tf = max(n1 - al, 0)
    led = ErrorLedger(min(point + neg, 2.0), min(l1 + neg, 2.0), 0.0, tf,
                      lg.truncated_moment, min(2 * cum_bound(lj) + cum_bound(lg) + neg, 2.0))
    return Lattice._make(np.maximum(vec, 0.0), joint.step, 0.0, led)


def _diagonal_sums(pmf: np.ndarray, size: int) -> np.ndarray:
    """``v[s] = sum_{i + j = s} pmf[i, j]`` for ``s < size`` (the law of ``X + Y`` on a window):
    each column ``j`` shifted down by ``j`` in a strided view, then one sum per row."""
    n1, k = pmf.shape
    out = np.zeros(size)
    if k == 0:
        return out
    check_allocation(8 * (n1 + k) * k, f"the diagonal sums of a {n1} x {k} window")
    shifted = np.zeros((n1 + k) * k)
    view = np.lib.stride_tricks.as_strided(shifted, shape=(n1, k),
                                           strides=(8 * k, 8 * (k + 1)), writeable=True)
    view[:] = pmf  # view[i, j] is shifted[(i + j) * k + j]: row i + j, column j
    sums = shifted.reshape(n1 + k, k).sum(axis=1)
    out[: min(size, sums.size)] = sums[:size]
    return out


def layer_mean(lat: Lattice, attachment: float, width: float) -> float:
    """``E[min(max(S - a, 0), w)]`` on the lattice (stop-loss differences, linear between
    points)."""
    hi = lat.stop_loss(attachment + width) if math.isfinite(width) else 0.0
    return float(lat.stop_loss(attachment) - hi)


def reinstatement_terms(ceded: Lattice, layer: XoLLayer) -> tuple[float, float]:
    """``(P, E[RP])``: the upfront premium (given, or the pure premium with reinstatements) and
    the expected reinstatement premium, pro rata as to amount (module docstring)."""
    w = layer.limit
    rates = layer.rate_list()
    used = [layer_mean(ceded, i * w, w) / w for i in range(len(rates))]
    factor = sum(c * u for c, u in zip(rates, used, strict=True))
    if layer.premium is None:
        premium = ceded._mean() / (1.0 + factor)
    else:
        premium = float(layer.premium)
    return premium, premium * factor


def quota_share(aggregate: Lattice, share: float) -> tuple[Lattice, Lattice]:
    """``(retained, ceded) = ((1 - q) S, q S)``: the same pmf on the steps ``(1 - q) h`` and
    ``q h`` (exact: a proportional share scales every outcome).  Ledgers unchanged but the
    truncated first moment, which scales."""
    if not (0 <= share <= 1) or isinstance(share, bool):
        raise ValueError(f"share must lie in [0, 1]; got {share!r}")
    return scaled(aggregate, 1.0 - share), scaled(aggregate, share)


def scaled(lat: Lattice, factor: float) -> Lattice:
    """``factor * X`` (``factor > 0``; 0 gives the point mass at 0).  Uses ``Lattice.scaled``
    when it exists (engineer "latency" owns it), else relabels the step."""
    if factor == 0:
        return Lattice([1.0])
    if hasattr(Lattice, "scaled"):
        return lat.scaled(factor, rule="moments")  # mean kept exactly
    e = lat.errors
    moment = e.truncated_moment * factor if math.isfinite(e.truncated_moment) else math.inf
    return Lattice._make(lat.pmf, lat.step * factor, lat.origin * factor,
                         e._replace(truncated_moment=moment))


def surplus_share(sum_insured: float, retention: float, lines: float) -> float:
    """Ceded share of a surplus treaty for a risk of sum insured ``V``:
    ``min(lines * retention, max(V - retention, 0)) / V`` (common practice, no source)."""
    if not (sum_insured > 0 and retention > 0 and lines >= 0):
        raise ValueError("sum_insured and retention must be > 0 and lines >= 0")
    return min(lines * retention, max(sum_insured - retention, 0.0)) / sum_insured
