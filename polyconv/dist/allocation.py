"""TVaR (co-TVaR, Euler) contributions of lines to their total, exact on the lattice.

For ``S = sum_i X_i`` on a lattice, ``v = VaR_p(S)`` the lattice's own quantile and
``F(v) >= p``, the tail value at risk with its atom at ``v`` (Acerbi & Tasche, "On the coherence
of expected shortfall", J. Banking & Finance 26 (2002)) is

    ``TVaR_p(S) = (E[S 1{S > v}] + v (F(v) - p)) / (1 - p)``,

and the contribution of line ``i`` (the Euler allocation of TVaR; Tasche, "Risk contributions
and performance measurement", 1999, from memory) is the same expression with ``S`` replaced by
``X_i`` and the atom shared in proportion ``E[X_i | S = v]``:

    ``C_i = (E[X_i 1{S > v}] + E[X_i | S = v] (F(v) - p)) / (1 - p)``,

so ``sum_i C_i = TVaR_p(S)`` (linearity).  Under independence ``E[X_i 1{S = s}]`` is a
convolution: with ``X_i = o_i + h K_i``, ``mu_i = E[K_i]`` and ``K_i*`` the size-biased law
``k P(K_i = k) / mu_i``,

    ``E[X_i 1{S = s}] = o_i P(S = s) + h mu_i P(K_i* + rest_i = s)``

(``rest_i`` the sum of the other lines): one more independent sum per line, each with its error
ledger.  For a reinsurance split (ceded and net of one line, dependent) the same expression uses
the joint law of (retained, layer) (:func:`split_contributions`).

Caution: a model output, not advice; independence between lines is an assumption.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .lattice import Lattice
from .ledger import ErrorLedger


@dataclass(frozen=True)
class Contributions:
    """Euler contributions to the total's TVaR.

    Attributes
    ----------
    level : float
        ``p``.
    var : float
        ``VaR_p`` of the total (the lattice's own).
    tvar : float
        ``TVaR_p`` of the total (atom at VaR included).
    parts : tuple of float
        ``C_i`` per line (their sum is ``tvar`` up to rounding).
    stand_alone : tuple of float
        ``TVaR_p(X_i)`` of each line on its own (diversification: ``stand_alone - parts``).
    l1 : float
        Bound of the L1 error of the total's pmf (the contributions err by at most about
        ``max|x| l1 / (1 - p)``).
    """

    level: float
    var: float
    tvar: float
    parts: tuple[float, ...]
    stand_alone: tuple[float, ...]
    l1: float


def _tail_share(m: np.ndarray, pmf: np.ndarray, k: int, p: float, cum_k: float) -> float:
    """``(sum_{s > k} m_s + m_k / pmf_k (F_k - p)) / (1 - p)``."""
    atom = m[k] / pmf[k] * (cum_k - p) if pmf[k] > 0 else 0.0
    return (float(np.sum(m[k + 1:])) + atom) / (1.0 - p)


def _tvar_parts(pmf: np.ndarray, values: np.ndarray, p: float) -> tuple[int, float, float]:
    cum = np.cumsum(pmf)
    k = int(np.searchsorted(cum, p, side="left"))
    if k >= pmf.size:
        raise ValueError(f"level p={p!r} exceeds the mass on the total's lattice "
                         f"({float(cum[-1])!r}); the TVaR is not on the grid")
    tv = _tail_share(values * pmf, pmf, k, p, float(cum[k]))
    return k, float(cum[k]), tv


def _size_biased(lat: Lattice) -> tuple[Lattice, float]:
    """``(K*, mu)``: the index-size-biased law ``k P(K = k) / mu`` (same grid) and ``mu``."""
    k = np.arange(len(lat))
    w = k * lat.pmf
    mu = float(np.sum(w))
    if mu == 0:
        return Lattice([1.0], lat.step, lat.origin), 0.0
    e = lat.errors
    top = max(len(lat) - 1, 1)
    rel = min(2.0, top * e.l1 / mu)  # sum_k k |e_k| / mu <= (n - 1) l1 / mu
    led = ErrorLedger(min(top * e.point / mu, 2.0), rel, 0.0, len(lat),
                      0.0 if e.truncated_moment == 0 else math.inf, rel)
    return Lattice._make(w / mu, lat.step, lat.origin, led), mu


def tvar_contributions(lines, p: float) -> Contributions:
    """Euler (co-TVaR) contributions of independent lines to the TVaR of their total.

    Parameters
    ----------
    lines : sequence of Lattice
        Independent lines on one common step (re-grid first: :func:`polyconv.dist.portfolio.
        regrid`).
    p : float
        Level, ``0 < p < 1``.

    Returns
    -------
    Contributions
        Exact on the lattices (the atom of the total at its VaR shared by ``E[X_i | S = v]``);
        ``sum(parts) == tvar`` up to rounding (module docstring).

    Notes
    -----
    Mass beyond the lattices (``truncated_mass``) is not counted: with a heavy tail give grids
    whose truncated mass is far below ``1 - p``.  A model output, not advice.
    """
    lines = list(lines)
    if not lines or not all(isinstance(x, Lattice) for x in lines):
        raise TypeError("lines must be a non-empty sequence of Lattice")
    if not 0 < p < 1:
        raise ValueError(f"p must lie strictly between 0 and 1; got {p!r}")
    h = lines[0].step
    for x in lines[1:]:
        if abs(x.step - h) > 1e-9 * h:
            raise ValueError(f"lines must share one step (got {h!r} and {x.step!r}); re-grid "
                             "them with polyconv.dist.portfolio.regrid")
    n = len(lines)
    prefix = [None] * (n + 1)
    suffix = [None] * (n + 1)
    for i in range(n):
        prefix[i + 1] = lines[i] if prefix[i] is None else prefix[i] + lines[i]
    for i in range(n - 1, -1, -1):
        suffix[i] = lines[i] if suffix[i + 1] is None else lines[i] + suffix[i + 1]
    total = prefix[n]
    pmf = total.pmf
    k, cum_k, tv = _tvar_parts(pmf, total.values, p)
    parts = []
    for i, x in enumerate(lines):
        rest = _join(prefix[i], suffix[i + 1])
        sb, mu = _size_biased(x)
        q = (sb + rest).pmf if rest is not None else sb.pmf
        m = x.origin * pmf
        mq = np.zeros(pmf.size)
        mq[: min(q.size, pmf.size)] = q[: pmf.size]
        m = m + x.step * mu * mq
        parts.append(_tail_share(m, pmf, k, p, cum_k))
    with np.errstate(all="ignore"):
        alone = tuple(float(x.tail_value_at_risk(p)) for x in lines)
    return Contributions(p, float(total.values[k]), tv, tuple(parts), alone, total.errors.l1)


def _join(a: Lattice | None, b: Lattice | None) -> Lattice | None:
    if a is None:
        return b
    if b is None:
        return a
    return a + b


def split_contributions(result, p: float) -> Contributions:
    """Contributions of the ceded recovery and the net loss to the gross TVaR of one line with
    an XoL programme (:func:`polyconv.dist.reinsurance.xol_programme`): ``E[C 1{G = s}] =
    sum_{l < A} g(l) J(s - l, l) + AL (P(G = s) - sum_{l < A} J(s - l, l))`` from the window
    ``J`` of the joint law (``g`` the aggregate terms, constant ``AL`` beyond the window), and
    ``E[net 1{G = s}] = s P(G = s) - E[C 1{G = s}]``.

    Needs a programme with an aggregate cap (limit or reinstatements), whose window holds
    every value of ``L`` where ``g`` is not constant.
    """
    joint = result.joint
    layer = result.layer
    cap = layer.aggregate_cap()
    if joint is None or math.isinf(cap):
        raise ValueError("split_contributions needs a programme with an aggregate cap "
                         "(aggregate_limit or reinstatements): its joint window")
    if not 0 < p < 1:
        raise ValueError(f"p must lie strictly between 0 and 1; got {p!r}")
    gross = result.gross
    h = gross.step
    aad = round(layer.aggregate_deductible / h)
    al = round(cap / h)
    a = aad + al
    n1 = len(gross)
    sub = joint.pmf[:, :a]
    g_of_l = np.clip(np.arange(a) - aad, 0, al) * h
    m_c = np.zeros(n1)
    diag = np.zeros(n1)
    for j in range(min(a, n1)):
        col = sub[: n1 - j, j]
        m_c[j:] += g_of_l[j] * col
        diag[j:] += col
    m_c += al * h * (gross.pmf - diag)
    values = gross.values
    k, cum_k, tv = _tvar_parts(gross.pmf, values, p)
    c_part = _tail_share(m_c, gross.pmf, k, p, cum_k)
    n_part = _tail_share(values * gross.pmf - m_c, gross.pmf, k, p, cum_k)
    with np.errstate(all="ignore"):
        alone = (float(result.ceded.tail_value_at_risk(p)),
                 float(result.net.tail_value_at_risk(p)))
    return Contributions(p, float(values[k]), tv, (c_part, n_part), alone,
                         gross.errors.l1 + 2 * joint.errors.l1)
