"""A delay network as data: named stages and blocks, with shared stages drawn once.

A :class:`Network` maps names to stage laws (:class:`Lattice`) or :class:`Block` s (in
sequence, wait for all, first of, one of, k of n, retry, hedge) and evaluates a root block.  A
name used in several places is **one draw** (a shared host, cache or queue), not several
independent ones: treating it as independent makes a 2-of-3 quorum written as
``first_of(all_of(a, b), all_of(a, c), all_of(b, c))`` several times too optimistic.

Shared stages are handled exactly, within the smallest block containing all their uses (their
*scope*):

* **Events** (pointwise structure function): when every path from the scope to the stage runs
  through joins, races, k-of-n and one-of blocks only, ``{T <= x}`` is a monotone Boolean
  function of the independent events ``{D_i <= x}`` (Barlow & Proschan, *Statistical Theory of
  Reliability and Life Testing*, 1975, ch. 2: the reliability of a coherent structure), so
  ``P(T <= x) = sum over the 2^s outcomes of the shared events`` of the outcome's
  probability times the conditional cdf, evaluated at every grid point.  Cost ``2^s`` array
  passes.
* **Values** (mixture over the support): otherwise (a shared stage under a sum, a retry or a
  hedge) the scope is evaluated once per value ``x`` of the stage with the stage fixed at
  ``x`` and the results mixed with weights ``P(D = x)``.  Cost: one evaluation per support
  point (product over nested shared stages), refused above :data:`MAX_CONDITIONED` with a
  message naming the stage.

Stages copied on purpose (``copies`` of a k-of-n block, the attempts of a retry or hedge) are
independent copies by definition; such a stage may not also be shared (refused by name).

Error ledger: conditioning on values mixes the conditional results with the stage's own pmf;
the conditional cdfs are monotone in the fixed value (every block is monotone in its inputs),
so by summation by parts the stage's cumulative bound adds once; the event route is
multilinear in the distinct leaves' cdfs with partial derivatives in ``[0, 1]``, so the
cumulative bounds of the distinct leaves add.  Independence of distinct stages remains an
assumption.  Model output, not advice.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .accuracy import UNIT_ROUNDOFF
from .delays import (
    _check,
    _grid,
    _pmf_from,
    _represented,
    _rounding,
    _telescoped_l1,
    all_of,
    first_of,
    mixture,
    series,
)
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, untruncated
from .order_stats import _count_tails, known_limit, kth_of
from .retry import hedge, retry

KINDS = ("in_sequence", "all_of", "first_of", "one_of", "k_of", "retry", "hedge")
"""Block kinds."""

BOOLEAN_KINDS = ("all_of", "first_of", "one_of", "k_of")
"""Blocks through which a shared stage is resolved by events (pointwise)."""

MAX_CONDITIONED = 4096
"""Most evaluations of a scope when conditioning on the values of shared stages."""

MAX_EVENTS = 14
"""Most shared stages resolved by events in one scope (``2^s`` passes)."""

MAX_PATHS = 100_000
"""Most root-to-stage paths examined to find shared stages."""


@dataclass(frozen=True)
class Block:
    """One block of a network.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    parts : tuple of str
        Names of the stages or blocks it combines (one name for retry and hedge).
    weights : tuple of float
        ``one_of``: the branch weights (summing to 1).
    k, copies : int
        ``k_of``: finish when ``k`` of the parts (each ``copies`` independent copies) finish.
    timeout, retries, backoff : float, int, tuple
        ``retry``: see :func:`polyconv.dist.retry.retry` (the block's delay is the response:
        success, or give-up after the last timeout).
    after : tuple of float
        ``hedge``: delays of the extra copies (:func:`polyconv.dist.retry.hedge`).
    """

    kind: str
    parts: tuple[str, ...]
    weights: tuple[float, ...] = ()
    k: int = 0
    copies: int = 1
    timeout: float = 0.0
    retries: int = 0
    backoff: tuple[float, ...] = ()
    after: tuple[float, ...] = ()

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"block kind must be one of {', '.join(KINDS)}; got {self.kind!r}")
        if not self.parts:
            raise ValueError(f"a {self.kind} block needs at least one part")
        if self.kind in ("retry", "hedge") and len(self.parts) != 1:
            raise ValueError(f"a {self.kind} block takes one stage; got {list(self.parts)}")
        if self.kind == "one_of" and len(self.weights) != len(self.parts):
            raise ValueError("a one_of block needs one weight per part")

    @property
    def replicates(self) -> bool:
        """True when the block draws independent copies of its parts on purpose."""
        return self.kind in ("retry", "hedge") or (self.kind == "k_of" and self.copies > 1)


@dataclass
class Plan:
    """Where each shared stage is conditioned: scope block and route (``events``/``values``)."""

    scope: dict[str, str] = field(default_factory=dict)
    route: dict[str, str] = field(default_factory=dict)


ROOT = "(network)"


class Network:
    """Named stages and blocks, evaluated from ``root`` (module docstring).

    Parameters
    ----------
    stages : mapping of str to Lattice or Block
        Every named stage.
    root : Block or str
        What is evaluated.
    """

    def __init__(self, stages: Mapping[str, Lattice | Block], root: Block | str):
        self.nodes: dict[str, Lattice | Block] = dict(stages)
        if ROOT in self.nodes:
            raise ValueError(f"{ROOT!r} is reserved")
        if isinstance(root, str):
            if root not in self.nodes:
                raise ValueError(f"root names the unknown stage {root!r}")
            self.root = root
        else:
            self.nodes[ROOT] = root
            self.root = ROOT
        for name, node in self.nodes.items():
            if not isinstance(node, (Lattice, Block)):
                raise TypeError(f"stage {name!r} must be a Lattice or a Block; got "
                                f"{type(node).__name__}")
            if isinstance(node, Block):
                for p in node.parts:
                    if p not in self.nodes:
                        raise ValueError(f"stage {name!r} names the unknown stage {p!r}")
        self._order = self._topological()
        self.plan = self._plan()

    # -- structure --------------------------------------------------------------------------
    def _topological(self) -> list[str]:
        state: dict[str, int] = {}
        out: list[str] = []

        def visit(name: str) -> None:
            if state.get(name) == 1:
                raise ValueError(f"stage {name!r} contains itself (a cycle)")
            if state.get(name) == 2:
                return
            state[name] = 1
            node = self.nodes[name]
            if isinstance(node, Block):
                for p in node.parts:
                    visit(p)
            state[name] = 2
            out.append(name)

        visit(self.root)
        return out

    def subtree(self, name: str) -> set[str]:
        """Names reachable from ``name`` (itself included)."""
        seen = {name}
        todo = [name]
        while todo:
            node = self.nodes[todo.pop()]
            if isinstance(node, Block):
                for p in node.parts:
                    if p not in seen:
                        seen.add(p)
                        todo.append(p)
        return seen

    def _paths(self) -> dict[str, list[tuple[str, ...]]]:
        """Every path from the root to each name (tuples of ancestors, root first)."""
        paths: dict[str, list[tuple[str, ...]]] = {self.root: [()]}
        count = 0
        for name in reversed(self._order):
            node = self.nodes[name]
            if not isinstance(node, Block):
                continue
            for p in node.parts:
                for path in paths.get(name, []):
                    paths.setdefault(p, []).append(path + (name,))
                    count += 1
                    if count > MAX_PATHS:
                        raise ValueError(f"the network has more than {MAX_PATHS} paths; "
                                         "simplify it (name fewer shared blocks)")
        return paths

    def shared(self) -> list[str]:
        """Stages used in more than one place (each one draw), innermost first."""
        return [s for s in self._order if s in self.plan.scope]

    def _plan(self) -> Plan:
        plan = Plan()
        paths = self._paths()
        for name in self._order:
            ps = paths.get(name, [])
            if len(ps) < 2:
                continue
            for path in ps:
                parent = self.nodes[path[-1]]
                if parent.replicates:
                    raise ValueError(f"stage {name!r} is copied on purpose by {path[-1]!r} "
                                     f"({parent.kind}) and also used elsewhere: a copied stage "
                                     "cannot be shared; give the other use its own stage")
            common = list(ps[0])
            for path in ps[1:]:
                k = 0
                while k < min(len(common), len(path)) and common[k] == path[k]:
                    k += 1
                common = common[:k]
            scope = common[-1]
            plan.scope[name] = scope
            boolean = True
            for path in ps:
                below = path[path.index(scope):]
                if any(self.nodes[b].kind not in BOOLEAN_KINDS for b in below):
                    boolean = False
                if any(self.nodes[b].kind == "k_of" and self.nodes[b].copies > 1
                       for b in below):
                    boolean = False
            plan.route[name] = "events" if boolean else "values"
        for scope in set(plan.scope.values()):
            mine = [s for s, sc in plan.scope.items() if sc == scope]
            if any(plan.route[s] == "values" for s in mine):
                for s in mine:
                    plan.route[s] = "values"
        return plan

    # -- evaluation -------------------------------------------------------------------------
    def evaluate(self, replace: Mapping[str, Lattice] | None = None) -> Lattice:
        """The root's law; ``replace`` substitutes laws for named stages (e.g. a stage sped
        up, or a zero delay for a removed one)."""
        return self.evaluate_all(replace)[self.root]

    def evaluate_all(self, replace: Mapping[str, Lattice] | None = None) -> dict[str, Lattice]:
        """The (unconditional) law of every named stage and block reachable from the root."""
        replace = dict(replace or {})
        for name, lat in replace.items():
            if name not in self.nodes:
                raise ValueError(f"replace names the unknown stage {name!r}")
            if not isinstance(lat, Lattice):
                raise TypeError(f"replace[{name!r}] must be a Lattice")
        memo: dict[tuple, Lattice] = {}
        return {name: self._eval(name, {}, replace, memo) for name in self._order}

    def _key(self, name: str, fixed: dict[str, Lattice]) -> tuple:
        sub = self._subtrees().get(name)
        return (name,) + tuple(sorted((s, id(v)) for s, v in fixed.items() if s in sub))

    def _subtrees(self) -> dict[str, set[str]]:
        if not hasattr(self, "_sub_cache"):
            self._sub_cache = {n: self.subtree(n) for n in self._order}
        return self._sub_cache

    def _eval(self, name: str, fixed: dict[str, Lattice], replace, memo) -> Lattice:
        if name in fixed:
            return fixed[name]
        key = self._key(name, fixed)
        if key in memo:
            return memo[key]
        if name in replace:
            out = replace[name]
        else:
            node = self.nodes[name]
            if isinstance(node, Lattice):
                out = node
            else:
                here = [s for s in self.shared() if self.plan.scope[s] == name and s not in fixed]
                if here and self.plan.route[here[0]] == "values":
                    out = self._by_values(name, here, fixed, replace, memo)
                elif here:
                    out = self._by_events(name, here, fixed, replace, memo)
                else:
                    parts = [self._eval(p, fixed, replace, memo) for p in node.parts]
                    out = combine(node, parts)
        memo[key] = out
        return out

    def _by_values(self, name, here, fixed, replace, memo) -> Lattice:
        s = here[0]  # innermost first (topological order)
        law = self._eval(s, fixed, replace, memo)
        support = np.flatnonzero(np.asarray(law.pmf) > 0)
        nested = len(support) * math.prod(
            max(1, int(np.count_nonzero(self._eval(t, fixed, replace, memo).pmf)))
            for t in here[1:] if s not in self._subtrees()[t])
        if nested > MAX_CONDITIONED:
            raise ValueError(
                f"stage {s!r} is shared (one draw used in several places) under a sum, retry or "
                f"hedge, so it is conditioned on exactly: {nested} evaluations of "
                f"{name if name != ROOT else 'the network'} would be needed, above "
                f"{MAX_CONDITIONED}; coarsen the grid step, express a quorum with k_of, or "
                "give each use its own stage if they are truly independent")
        parts, weights = [], []
        for i in support:
            point = Lattice._make(np.array([1.0]), law.step, law.origin + law.step * float(i),
                                  ErrorLedger(0.0, 0.0, 0.0, 1, 0.0, 0.0))
            # results conditioned on this point are not reused: a copy of the memo keeps
            # them from piling up (4096 points x every block of the scope)
            parts.append(self._eval(name, {**fixed, s: point}, replace, dict(memo)))
            weights.append(float(law.pmf[i]))
        return _mix(weights, parts, law)

    def _by_events(self, name, here, fixed, replace, memo) -> Lattice:
        if len(here) > MAX_EVENTS:
            raise ValueError(f"{len(here)} shared stages in one block ({', '.join(here)}): "
                             f"more than {MAX_EVENTS}; split the network")
        sub = self._subtrees()
        # shared blocks holding other shared stages are expanded (pointwise evaluation is
        # deterministic given the events, so both uses see the same value); the rest are atoms
        here = [s for s in here if not (isinstance(self.nodes[s], Block) and
                                        sub[s] & (set(here) - {s}))]
        leaves: dict[str, Lattice] = {}

        def collect(n: str) -> None:
            node = self.nodes[n]
            if n in here or n in fixed or n in replace or not isinstance(node, Block) or \
                    not (sub[n] & set(here)):
                leaves[n] = self._eval(n, fixed, replace, memo)
                return
            for p in node.parts:
                collect(p)

        for p in self.nodes[name].parts:
            collect(p)
        names = list(leaves)
        lats = [leaves[n] for n in names]
        _check(lats, name)
        h, base, offs, length = _grid(lats)
        limit = known_limit(lats, offs, length)
        cdfs: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        for n, o, d in zip(names, offs, lats, strict=True):
            c, tail, r = _represented(d, o, length)
            cdfs[n] = (np.clip(c[:limit], 0, 1), np.clip(tail[:limit] + (1.0 - r), 0, 1))
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
            c, t = self._pointwise(name, state, cdfs)
            cdf += prob * c
            sf += prob * t
        cdf, sf = np.clip(cdf, 0, 1), np.clip(sf, 0, 1)
        pmf, clipped = _pmf_from(cdf, sf)
        rel = (8 * len(self._subtrees()[name]) + 2 * len(here) + 8) * UNIT_ROUNDOFF + \
            len(names) * max(len(d) for d in lats) * float(np.finfo(np.longdouble).eps)
        r_point, r_l1, r_cum = _rounding(cdf, sf, rel, clipped)
        l1 = _telescoped_l1([d.errors.l1 for d in lats])
        cum = sum(cum_bound(d.errors) for d in lats)
        moment = 0.0 if limit >= length and all(untruncated(d.errors) for d in lats) else \
            math.inf
        return Lattice._make(pmf, h, base, ErrorLedger(min(l1 + r_point, 2.0),
                                                       min(l1 + r_l1, 2.0), 0.0, limit, moment,
                                                       min(cum + r_cum, 2.0)))

    def _pointwise(self, name, state, cdfs) -> tuple[np.ndarray, np.ndarray]:
        """``(P(T <= x), P(T > x))`` of block ``name`` given the shared events in ``state``."""
        if name in state:
            return state[name]
        if name in cdfs:
            return cdfs[name]
        node = self.nodes[name]
        kids = [self._pointwise(p, state, cdfs) for p in node.parts]
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
        return _count_tails(node.k, [1] * len(kids), [k[0] for k in kids],
                            [k[1] for k in kids])


def combine(block: Block, parts: list[Lattice]) -> Lattice:
    """The law of one block from the laws of its parts (independent)."""
    if block.kind == "in_sequence":
        return series(*parts)
    if block.kind == "all_of":
        return all_of(*parts)
    if block.kind == "first_of":
        return first_of(*parts)
    if block.kind == "one_of":
        return mixture(list(block.weights), parts)
    if block.kind == "k_of":
        return kth_of(block.k, *parts, copies=block.copies)
    if block.kind == "retry":
        backoff = list(block.backoff) if block.backoff else 0.0
        return retry(parts[0], timeout=block.timeout, retries=block.retries,
                     backoff=backoff).response
    return hedge(parts[0], after=list(block.after)).response


def _mix(weights: list[float], parts: list[Lattice], law: Lattice) -> Lattice:
    """``sum_x P(D = x) G_x`` with the conditioning stage's ledger added (module docstring)."""
    w = np.asarray(weights)
    total = float(w.sum())
    mixed = mixture((w / total).tolist(), parts) if abs(total - 1) > 0 else \
        mixture(w.tolist(), parts)
    e, m = mixed.errors, law.errors
    pmf = np.asarray(mixed.pmf) * (total if abs(total - 1) > 0 else 1.0)
    trunc = not untruncated(m)
    ledger = ErrorLedger(min(e.point + m.l1, 2.0), min(e.l1 + m.l1, 2.0), 0.0,
                         0 if trunc else e.truncated_from,
                         math.inf if trunc else e.truncated_moment,
                         min(e.cumulative + cum_bound(m), 2.0))
    return Lattice._make(pmf, mixed.step, mixed.origin, ledger)
