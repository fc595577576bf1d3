"""Blocks of a delay network and the law of one block from the laws of its parts.

A :class:`Block` names the stages or blocks it combines and how: in sequence (sum), wait for
all (maximum), first of (minimum), one of (mixture), k of n (order statistic), retry and hedge
(:mod:`polyconv.dist.retry`).  :func:`combine` applies one block to independent parts; the
network (:mod:`polyconv.dist.network`) decides which parts are independent.

A one-point part of a sequence (a shared stage fixed at one value while the network is
conditioned on it) is an exact shift of the rest: ``D + x`` moves the origin by ``x`` and keeps
the probabilities (no convolution; :meth:`polyconv.dist.Lattice.__add__` with a number).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .delays import all_of, first_of, mixture, series
from .lattice import Lattice
from .ledger import ErrorLedger, cum_bound, untruncated
from .order_stats import kth_of
from .retry import hedge, retry

KINDS = ("in_sequence", "all_of", "first_of", "one_of", "k_of", "retry", "hedge")
"""Block kinds."""

BOOLEAN_KINDS = ("all_of", "first_of", "one_of", "k_of")
"""Blocks through which a shared stage is resolved by events (pointwise)."""

ASSOCIATIVE_KINDS = ("in_sequence", "all_of", "first_of")
"""Blocks whose parts may be grouped: ``f(a, b, c) = f(f(a, b), c)`` (sum, max, min)."""


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


def point(value_index: int, law: Lattice) -> Lattice:
    """The one-point law at ``law.origin + law.step * value_index`` (exact, no error)."""
    return Lattice._make(np.array([1.0]), law.step, law.origin + law.step * float(value_index),
                         ErrorLedger(0.0, 0.0, 0.0, 1, 0.0, 0.0))


def _is_point(d: Lattice) -> bool:
    e = d.errors
    return len(d) == 1 and float(d.pmf[0]) == 1.0 and untruncated(e) and e.l1 == 0 and \
        e.cumulative == 0


def combine(block: Block, parts: list[Lattice]) -> Lattice:
    """The law of one block from the laws of its parts (independent)."""
    if block.kind == "in_sequence":
        fixed = [p for p in parts if _is_point(p)]
        rest = [p for p in parts if not _is_point(p)]
        if fixed and rest:
            moved = rest[0] if len(rest) == 1 else series(*rest)
            return moved + math.fsum(p.origin for p in fixed)
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


def mix(weights: list[float], parts: list[Lattice], law: Lattice) -> Lattice:
    """``sum_x P(D = x) G_x`` with the conditioning stage's ledger added: the conditional
    cdfs are monotone in the fixed value (every block is monotone in its inputs), so by
    summation by parts the stage's cumulative bound adds once."""
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
