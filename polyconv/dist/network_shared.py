"""Shared stages of a delay network: one draw used in several places, conditioned on exactly.

Within the smallest block containing all uses of a shared stage (its *scope*):

* **Events** (pointwise structure function, :func:`by_events`): when every path from the scope
  to the stage runs through joins, races, k-of-n and one-of blocks only, ``{T <= x}`` is a
  monotone Boolean function of the independent events ``{D_i <= x}`` (Barlow & Proschan,
  *Statistical Theory of Reliability and Life Testing*, 1975, ch. 2: the reliability of a
  coherent structure), so ``P(T <= x) = sum over the 2^s outcomes of the shared events`` of the
  outcome's probability times the conditional cdf, at every grid point: ``2^s`` array passes.
* **Values** (mixture over the support, :func:`by_values`): otherwise (a shared stage under a
  sum, a retry or a hedge) the scope is evaluated once per value ``x`` of the stage with the
  stage fixed at ``x`` and the results mixed with weights ``P(D = x)``: one evaluation per
  support point (product over nested shared stages), refused above :data:`MAX_CONDITIONED`
  with a message naming the stage.  Parts of the scope that do not contain the stage are
  grouped out of the conditioning by the network (evaluated once), and a sequence holding the
  fixed value is a shift (no convolution): each conditional evaluation costs only the blocks
  that contain the stage.

Error ledger: conditioning on values mixes the conditional results with the stage's own pmf;
the conditional cdfs are monotone in the fixed value, so by summation by parts the stage's
cumulative bound adds once; the event route is multilinear in the distinct leaves' cdfs with
partial derivatives in ``[0, 1]``, so the cumulative bounds of the distinct leaves add.
Independence of distinct stages remains an assumption.  Model output, not advice.
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics.budget import check_allocation
from .accuracy import UNIT_ROUNDOFF
from .delays import _check, _grid, _pmf_from, _represented, _rounding, _telescoped_l1
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, untruncated
from .network_blocks import BOOLEAN_KINDS, Block, mix, point
from .order_stats import _count_tails, known_limit

MAX_CONDITIONED = 4096
"""Most evaluations of a scope when conditioning on the values of shared stages."""

MAX_SUM_WORK = 1 << 29
"""Most point updates (support points of the shared stage times grid points) of the
vectorised sum route (:func:`_sum_by_events`): about a second of numpy work."""

MAX_EVENTS = 14
"""Most shared stages resolved by events in one scope (``2^s`` passes)."""


def by_values(net, name: str, here: list[str], fixed, replace, memo, root: str) -> Lattice:
    """Block ``name`` mixed over the values of the innermost shared stage ``here[0]``."""
    s = here[0]  # innermost first (topological order)
    law = net._eval(s, fixed, replace, memo)
    support = np.flatnonzero(np.asarray(law.pmf) > 0)
    what = "the network" if name == root else net.label(name)
    fast = _sum_pattern(net, name, here, fixed, replace)
    if fast is not None and fast[1] is None:
        return _multiple(law, fast[0])
    if fast is not None:
        return _sum_by_events(net, fast[0], fast[1], s, law, support, fixed, replace, memo,
                              what)
    sub = net._subtrees()
    nested = len(support) * math.prod(
        max(1, int(np.count_nonzero(net._eval(t, fixed, replace, memo).pmf)))
        for t in here[1:] if s not in sub[t])
    if nested > MAX_CONDITIONED:
        raise ValueError(
            f"stage {s!r} is shared (one draw used in several places) under a sum, retry or "
            f"hedge, so it is conditioned on exactly: {nested} evaluations of {what} would "
            f"be needed, above {MAX_CONDITIONED}; coarsen the grid step, express a quorum with "
            "k_of, or give each use its own stage if they are truly independent")
    parts, weights = [], []
    for i in support:
        # results conditioned on this point are not reused: a copy of the memo keeps them from
        # piling up (4096 points x every block of the scope)
        parts.append(net._eval(name, {**fixed, s: point(int(i), law)}, replace, dict(memo)))
        weights.append(float(law.pmf[i]))
    return mix(weights, parts, law)


def _sum_pattern(net, name: str, here: list[str], fixed, replace):
    """``(c, part)`` when block ``name`` is ``c`` uses of the one shared stage plus one part
    reaching it through joins, races, k-of-n and one-of blocks only (:func:`_sum_by_events`),
    ``(c, None)`` when it is ``c`` uses and nothing else (:func:`_multiple`); else None."""
    node = net.nodes[name]
    if len(here) != 1 or node.kind != "in_sequence":
        return None
    s = here[0]
    others = [p for p in node.parts if p != s]
    c = len(node.parts) - len(others)
    if c >= 1 and not others:
        return c, None
    if c < 1 or len(others) != 1 or others[0] in fixed or others[0] in replace:
        return None
    sub = net._subtrees()
    todo = [others[0]]
    reached = False  # S itself is reached (not hidden in a replaced or fixed block)
    while todo:
        n = todo.pop()
        block = net.nodes[n]
        reached = reached or n == s
        if n == s or n in fixed or n in replace or not isinstance(block, Block) or \
                s not in sub[n]:
            continue
        if block.kind not in BOOLEAN_KINDS or (block.kind == "k_of" and block.copies > 1):
            return None
        todo.extend(block.parts)
    return (c, others[0]) if reached else None


def _multiple(law: Lattice, c: int) -> Lattice:
    """``c S`` for one draw ``S`` used ``c`` times in a sum: the same probabilities at ``c``
    times the values (an injective push-forward: point, L1 and cumulative errors unchanged; the
    truncated part's first and second moments times ``c`` and ``c^2``)."""
    check_allocation(8 * (c * (len(law) - 1) + 1), "multiple of a shared stage")
    pmf = np.zeros(c * (len(law) - 1) + 1)
    pmf[::c] = np.asarray(law.pmf)
    e = law.errors
    tf = min(c * e.truncated_from, pmf.size)
    return Lattice._make(pmf, law.step, c * law.origin,
                         e._replace(truncated_from=tf, truncated_moment=c * e.truncated_moment,
                                    truncated_moment2=c * c * e.truncated_moment2))


def _sum_by_events(net, c: int, part: str, s: str, law: Lattice, support, fixed, replace,
                   memo, what: str) -> Lattice:
    """``c S + P`` with ``S`` shared by ``P``, vectorised: given ``S = x`` the cdf of ``P`` is
    ``C0`` (the event ``{S <= y}`` false) below ``x`` and ``C1`` (true) from ``x`` on, both
    from the pointwise structure (:func:`by_events`), so the mixture over ``x`` is a sum of
    shifted pieces of two pmfs (no evaluation per point).  Ledger as :func:`by_events` (the
    result is a push-forward of the leaves' product measure; summation by parts over the
    values of ``S`` adds its cumulative bound once)."""
    leaves = _leaves(net, [part], [s], fixed, replace, memo)
    names = list(leaves)
    lats = [leaves[n] for n in names]
    _check(lats, part)
    h, base, offs, length = _grid(lats)
    limit = known_limit(lats, offs, length)  # P's cdf is known below it
    cdfs = {n: _cdf_pair(d, o, length, limit) for n, o, d in zip(names, offs, lats, strict=True)}
    pieces = []
    for done in (False, True):
        state = {s: (np.full(limit, float(done)), np.full(limit, float(not done)))}
        cdf, sf = pointwise(net, part, state, {n: v for n, v in cdfs.items() if n != s})
        cdf, sf = np.clip(cdf, 0, 1), np.clip(sf, 0, 1)
        pmf, clipped = _pmf_from(cdf, sf)
        pieces.append((pmf, cdf, sf, clipped))
    (p0, c0, s0, k0), (p1, c1, s1, k1) = pieces
    off_s = offs[names.index(s)]
    pmf_s = np.asarray(law.pmf)
    if len(support) * limit > MAX_SUM_WORK:
        raise ValueError(
            f"stage {s!r} is shared (one draw used in several places) under a sum: mixing "
            f"{len(support)} values over {limit} grid points of {what} exceeds "
            f"{MAX_SUM_WORK:.3g} point updates; coarsen the grid step or give each use its own "
            "stage if they are truly independent")
    size = c * (off_s + len(law) - 1) + limit
    check_allocation(8 * size, f"mixture over the values of the shared stage {s!r}")
    out = np.zeros(size)
    for i in support:
        j = off_s + int(i)  # the value of S on the part's grid
        w, at = float(pmf_s[i]), c * j
        if j >= limit:  # P's law known only below the fixed value: P | x is C0 there
            out[at: at + limit] += w * p0
            continue
        out[at: at + j] += w * p0[:j]
        out[at + j] += w * (p1[j] + (c1[j - 1] - c0[j - 1] if j > 0 else 0.0))
        out[at + j + 1: at + limit] += w * p1[j + 1:]
    rel = (8 * len(net._subtrees()[part]) + 12) * UNIT_ROUNDOFF + \
        len(names) * max(len(d) for d in lats) * float(np.finfo(np.longdouble).eps)
    r0 = _rounding(c0, s0, rel, k0)
    r1 = _rounding(c1, s1, rel, k1)
    mixing = (len(support) + 3) * UNIT_ROUNDOFF
    r_point = max(r0[0], r1[0]) + mixing * float(np.max(out))
    r_l1 = max(r0[1], r1[1]) * 2 + mixing
    r_cum = max(r0[2], r1[2]) * 2 + mixing
    l1 = _telescoped_l1([d.errors.l1 for d in lats])
    cum = sum(cum_bound(d.errors) for d in lats)
    exact = limit >= length and all(untruncated(d.errors) for d in lats)
    # beyond the known part of P (index limit), the rest of P | x is truncated: it lies at
    # c x + limit or later, the earliest for the smallest value of S
    start = size if exact else min(size, c * (off_s + int(support[0])) + limit)
    moment = 0.0 if exact else math.inf
    return Lattice._make(out, h, (c + 1) * base,
                         ErrorLedger(min(l1 + r_point, 2.0), min(l1 + r_l1, 2.0), 0.0, start,
                                     moment, min(cum + r_cum, 2.0), moment))


def _leaves(net, roots, here: list[str], fixed, replace, memo) -> dict[str, Lattice]:
    """The independent atoms below the nodes ``roots``: the shared stages of ``here`` and every
    block or stage that holds none of them."""
    sub = net._subtrees()
    leaves: dict[str, Lattice] = {}

    def collect(n: str) -> None:
        node = net.nodes[n]
        if n in here or n in fixed or n in replace or not isinstance(node, Block) or \
                not (sub[n] & set(here)):
            leaves[n] = net._eval(n, fixed, replace, memo)
            return
        for p in node.parts:
            collect(p)

    for r in roots:
        collect(r)
    return leaves


def _cdf_pair(d: Lattice, o: int, length: int, limit: int) -> tuple[np.ndarray, np.ndarray]:
    """``(F, 1 - F)`` of ``d`` on the first ``limit`` points of the common grid (mass above the
    lattice counted as not finished)."""
    c, tail, r = _represented(d, o, length)
    return np.clip(c[:limit], 0, 1), np.clip(tail[:limit] + (1.0 - r), 0, 1)


def by_events(net, name: str, here: list[str], fixed, replace, memo) -> Lattice:
    """Block ``name`` summed over the outcomes of the shared stages' events (module
    docstring)."""
    if len(here) > MAX_EVENTS:
        raise ValueError(f"{len(here)} shared stages in one block ({', '.join(here)}): more "
                         f"than {MAX_EVENTS}; split the network")
    sub = net._subtrees()
    # shared blocks holding other shared stages are expanded (pointwise evaluation is
    # deterministic given the events, so both uses see the same value); the rest are atoms
    here = [s for s in here if not (isinstance(net.nodes[s], Block) and
                                    sub[s] & (set(here) - {s}))]
    leaves = _leaves(net, net.nodes[name].parts, here, fixed, replace, memo)
    names = list(leaves)
    lats = [leaves[n] for n in names]
    _check(lats, name)
    h, base, offs, length = _grid(lats)
    limit = known_limit(lats, offs, length)
    cdfs = {n: _cdf_pair(d, o, length, limit) for n, o, d in zip(names, offs, lats, strict=True)}
    cdf = np.zeros(limit)
    sf = np.zeros(limit)
    for outcome in range(1 << len(here)):
        prob = np.ones(limit)
        state = {}
        for b, s in enumerate(here):
            done = bool(outcome >> b & 1)
            prob = prob * (cdfs[s][0] if done else cdfs[s][1])
            state[s] = (np.ones(limit), np.zeros(limit)) if done else \
                (np.zeros(limit), np.ones(limit))
        c, t = pointwise(net, name, state, cdfs)
        cdf += prob * c
        sf += prob * t
    cdf, sf = np.clip(cdf, 0, 1), np.clip(sf, 0, 1)
    pmf, clipped = _pmf_from(cdf, sf)
    rel = (8 * len(sub[name]) + 2 * len(here) + 8) * UNIT_ROUNDOFF + \
        len(names) * max(len(d) for d in lats) * float(np.finfo(np.longdouble).eps)
    r_point, r_l1, r_cum = _rounding(cdf, sf, rel, clipped)
    l1 = _telescoped_l1([d.errors.l1 for d in lats])
    cum = sum(cum_bound(d.errors) for d in lats)
    moment = 0.0 if limit >= length and all(untruncated(d.errors) for d in lats) else math.inf
    return Lattice._make(pmf, h, base, ErrorLedger(min(l1 + r_point, 2.0), min(l1 + r_l1, 2.0),
                                                   0.0, limit, moment, min(cum + r_cum, 2.0),
                                                   moment))


def pointwise(net, name: str, state, cdfs) -> tuple[np.ndarray, np.ndarray]:
    """``(P(T <= x), P(T > x))`` of block ``name`` given the shared events in ``state``."""
    if name in state:
        return state[name]
    if name in cdfs:
        return cdfs[name]
    node = net.nodes[name]
    kids = [pointwise(net, p, state, cdfs) for p in node.parts]
    if node.kind == "all_of":
        c = np.prod([k[0] for k in kids], axis=0)
        with np.errstate(divide="ignore"):
            t = -np.expm1(np.sum([np.log1p(-np.minimum(k[1], 1.0)) for k in kids], axis=0))
        return c, t
    if node.kind == "first_of":
        t = np.prod([k[1] for k in kids], axis=0)
        with np.errstate(divide="ignore"):
            c = -np.expm1(np.sum([np.log1p(-np.minimum(k[0], 1.0)) for k in kids], axis=0))
        return c, t
    if node.kind == "one_of":
        w = node.weights
        return (sum(wi * k[0] for wi, k in zip(w, kids, strict=True)),
                sum(wi * k[1] for wi, k in zip(w, kids, strict=True)))
    return _count_tails(node.k, [1] * len(kids), [k[0] for k in kids], [k[1] for k in kids])
