"""A delay network as data: named stages and blocks, with shared stages drawn once.

A :class:`Network` maps names to stage laws (:class:`Lattice`) or :class:`Block` s (in
sequence, wait for all, first of, one of, k of n, retry, hedge;
:mod:`polyconv.dist.network_blocks`) and evaluates a root block.  A name used in several places
is **one draw** (a shared host, cache or queue), not several independent ones: treating it as
independent makes a 2-of-3 quorum written as ``first_of(all_of(a, b), all_of(a, c),
all_of(b, c))`` several times too optimistic.

This module holds the structure: the order of evaluation, every root-to-stage path, and the
*plan* of each shared stage: its scope (the smallest block containing all its uses) and its
route, ``"events"`` or ``"values"`` (:mod:`polyconv.dist.network_shared`).  Before planning,
the parts of a sum, join or race that do not contain a shared stage are grouped apart from
those that do (``f(a, b, c) = f(f(a, b), c)`` for sum, maximum and minimum), so conditioning
repeats only the blocks that depend on the shared value; the groups are internal blocks
(:meth:`Network.label` names them; :meth:`Network.evaluate_all` does not return them).

Stages copied on purpose (``copies`` of a k-of-n block, the attempts of a retry or hedge) are
independent copies by definition; such a stage may not also be shared (refused by name).
Independence of distinct stages remains an assumption.  Model output, not advice.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass, field

from .lattice import Lattice
from .network_blocks import ASSOCIATIVE_KINDS, BOOLEAN_KINDS, KINDS, Block, combine
from .network_shared import MAX_CONDITIONED, MAX_EVENTS, by_events, by_values

__all__ = ["Block", "Network", "Plan", "KINDS", "BOOLEAN_KINDS", "MAX_CONDITIONED",
           "MAX_EVENTS", "MAX_PATHS", "ROOT", "combine"]

MAX_PATHS = 100_000
"""Most root-to-stage paths examined to find shared stages."""

ROOT = "(network)"


@dataclass
class Plan:
    """Where each shared stage is conditioned: scope block and route (``events``/``values``)."""

    scope: dict[str, str] = field(default_factory=dict)
    route: dict[str, str] = field(default_factory=dict)


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
        self.groups: dict[str, str] = {}
        """Internal group name -> the block it was split from."""
        self._order = self._topological()
        self.plan = self._plan()
        while self._group_parts():
            self._order = self._topological()
            self._sub_cache = None
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

    def label(self, name: str) -> str:
        """A name for messages: an internal group is named by the block it belongs to."""
        if name in self.groups:
            return f"part of {self.label(self.groups[name])}"
        return "the network" if name == ROOT else name

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
                    raise ValueError(f"stage {name!r} is copied on purpose by "
                                     f"{self.label(path[-1])!r} ({parent.kind}) and also used "
                                     "elsewhere: a copied stage cannot be shared; give the "
                                     "other use its own stage")
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

    def _group_parts(self) -> bool:
        """Split a scope block (sum, maximum or minimum) into groups of parts linked by shared
        stages and the parts holding none (module docstring); True when something changed."""
        sub = self._subtrees()
        for scope in dict.fromkeys(self.plan.scope.values()):
            node = self.nodes[scope]
            if node.kind not in ASSOCIATIVE_KINDS or len(node.parts) < 3:
                continue
            mine = [s for s, sc in self.plan.scope.items() if sc == scope]
            holds = [{s for s in mine if s in sub[p]} for p in node.parts]
            groups: list[tuple[set[str], list[int]]] = []
            for i, h in enumerate(holds):
                if not h:
                    continue
                linked = [g for g in groups if g[0] & h]
                merged = (set(h).union(*(g[0] for g in linked)),
                          sorted([i, *(j for g in linked for j in g[1])]))
                groups = [g for g in groups if g not in linked] + [merged]
            groups = [g for g in groups if len(g[1]) < len(node.parts)]
            if not groups:
                continue
            taken = {i for g in groups for i in g[1]}
            parts = []
            for n, (_, idx) in enumerate(groups):
                gname = f"({scope} | group {n + 1})"
                self.nodes[gname] = Block(node.kind, tuple(node.parts[i] for i in idx))
                self.groups[gname] = scope
                parts.append(gname)
            parts += [p for i, p in enumerate(node.parts) if i not in taken]
            self.nodes[scope] = dataclasses.replace(node, parts=tuple(parts))
            return True
        return False

    # -- evaluation -------------------------------------------------------------------------
    def evaluate(self, replace: Mapping[str, Lattice] | None = None) -> Lattice:
        """The root's law; ``replace`` substitutes laws for named stages (e.g. a stage sped
        up, or a zero delay for a removed one)."""
        return self.evaluate_all(replace)[self.root]

    def evaluate_all(self, replace: Mapping[str, Lattice] | None = None) -> dict[str, Lattice]:
        """The (unconditional) law of every named stage and block reachable from the root
        (internal groups left out)."""
        replace = dict(replace or {})
        for name, lat in replace.items():
            if name not in self.nodes or name in self.groups:
                raise ValueError(f"replace names the unknown stage {name!r}")
            if not isinstance(lat, Lattice):
                raise TypeError(f"replace[{name!r}] must be a Lattice")
        memo: dict[tuple, Lattice] = {}
        return {name: self._eval(name, {}, replace, memo) for name in self._order
                if name not in self.groups}

    def _key(self, name: str, fixed: dict[str, Lattice]) -> tuple:
        sub = self._subtrees().get(name)
        return (name,) + tuple(sorted((s, id(v)) for s, v in fixed.items() if s in sub))

    def _subtrees(self) -> dict[str, set[str]]:
        if getattr(self, "_sub_cache", None) is None:
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
                    out = by_values(self, name, here, fixed, replace, memo, ROOT)
                elif here:
                    out = by_events(self, name, here, fixed, replace, memo)
                else:
                    parts = [self._eval(p, fixed, replace, memo) for p in node.parts]
                    out = combine(node, parts)
        memo[key] = out
        return out
