"""Block products: many blocks, checked once, one plan per block shape.

The block products of :mod:`polyconv.scale` (overlap-add over chunks, files and dask blocks; the
block pairs of :func:`~polyconv.scale.dask_exact.exact_product_dask`) are many small products of
one kind.  Their arguments are validated once, by the entry point; :class:`BlockProducts` then
keeps one :class:`~polyconv.pipeline.plan.Plan` per distinct block shape (chosen by
:func:`polyconv.pipeline.choose.choose`, memory checked by
:func:`polyconv.pipeline.prepare.check_budget`) and runs every block through it with
:func:`polyconv.pipeline.execute.run`, the pipeline's "run this plan on prepared operands" stage.

Exactness: an exact plan is chosen from :func:`polyconv.pipeline.facts.bound_facts`, facts that
hold for every operand whose magnitude is at most the planned bound (norms included), so its
certificate covers every such block.  Each block's magnitude is measured anyway (the pass that
normalises it, :func:`~polyconv.pipeline.facts.normalise_integers`); a block beyond the planned
bound gets a new plan for its shape (bounds only grow, rounded up to ``2^bits - 1``, so a stream
re-plans at most once per bit of growth).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..numerics.limits import INT64_LIMIT
from ..pipeline.choose import choose
from ..pipeline.execute import run
from ..pipeline.facts import bound_facts, normalise_integers
from ..pipeline.inputs import combine_kinds, kind_of
from ..pipeline.plan import Plan
from ..pipeline.prepare import _float_operand, check_budget
from ..pipeline.shaping import shape_result
from ..pipeline.small import TINY_WORK

_EXACT = ("integer", "bigint")
_F64 = np.dtype(np.float64)
_I64 = np.dtype(np.int64)


def _rounded(v: int) -> int:
    """``2^bits(v) - 1``: a magnitude as :func:`~polyconv.pipeline.facts.integer_facts`
    rounds it."""
    return (1 << v.bit_length()) - 1


@dataclass(frozen=True, slots=True)
class Operand:
    """One block ready for the engines.

    Attributes
    ----------
    array : numpy.ndarray
        1-D; exact kinds: int64, uint64 or Python ints, reduced by the modulus.
    kind : str
        Its kind: ``"integer"`` (fixed width) or ``"bigint"`` (Python ints) once normalised,
        ``"real"`` or ``"complex"``.
    max_abs : int
        ``max |array|`` (0 for floating point blocks).
    """

    array: np.ndarray
    kind: str
    max_abs: int = 0

    @property
    def shape(self) -> tuple:
        return self.array.shape


class BlockProducts:
    """Full products of 1-D blocks, exact or floating point, one plan per block shape.

    Parameters
    ----------
    exact : bool
        Exact integer products (else floating point; each block pair's kind, real or complex,
        is taken from its dtypes).
    modulus : int, optional
        Already checked; exact products only.
    names : tuple of str
        How the two operands are named in a refusal (an object block whose entries are not
        integers in an exact product, or too large for float64 in a floating point one).

    Notes
    -----
    :attr:`plans_made` counts the plans chosen so far (one per block shape, plus one per growth
    of the magnitude bound).  Instances are picklable, so they travel to Dask workers with their
    plans.
    """

    def __init__(self, exact: bool, modulus: int | None = None, names: tuple = ("a", "b")):
        self.exact = exact
        self.modulus = modulus
        self.names = names
        self.plans_made = 0
        self._plans: dict = {}  # (n1, n2, kind) -> (plan, planned magnitude bounds)

    def operand(self, x: np.ndarray, which: int = 0, name: str | None = None) -> Operand:
        """Block ``x`` (a 1-D numpy array) prepared for :meth:`product`.

        Exact products: normalised and reduced once (:func:`~polyconv.pipeline.facts.
        normalise_integers`), its magnitude measured; an object block must hold integers only
        (TypeError naming the operand otherwise: Python floats would be truncated).  Floating
        point: an object block must fit float64 (ValueError naming it).  ``name`` replaces the
        operand's name in refusals (``"chunks[3]"``)."""
        name = name or self.names[which]
        kind = kind_of(x, name)
        if not self.exact:
            if x.dtype == object:
                _float_operand(x, _F64, name)
            return Operand(x, "real" if kind in _EXACT else kind)
        if kind not in _EXACT:
            raise TypeError(f"{name} holds {kind} floating point numbers (dtype {x.dtype}) but "
                            "the product is exact integer arithmetic: pass integers, or floats "
                            "in a float dtype for a floating point product")
        array, top = normalise_integers(x, self.modulus)
        return Operand(array, "bigint" if array.dtype == object else "integer", top)

    def product(self, x: np.ndarray | Operand, y: np.ndarray | Operand) -> np.ndarray:
        """The full product ``x * y`` (``len(x) + len(y) - 1`` entries), by the plan of its
        shape: exact values for exact products (int64 or Python ints, as the plan says), the
        pipeline's floating point product otherwise."""
        a = x if isinstance(x, Operand) else self.operand(x, 0)
        b = y if isinstance(y, Operand) else self.operand(y, 1)
        if self.exact and a.shape[0] * b.shape[0] <= TINY_WORK:
            out = self._tiny(a, b)
            if out is not None:
                return out
        the_plan = self.plan_for(a, b)
        return shape_result(run(the_plan, a.array, b.array), the_plan, -1, None)

    def _tiny(self, a: Operand, b: Operand) -> np.ndarray | None:
        """The short path of :mod:`polyconv.pipeline.small` for tiny int64 blocks, with the
        magnitudes already measured: ``numpy.convolve`` in int64, exact when
        ``min(n1, n2) max|a| max|b| < 2^63`` (no partial sum leaves int64; common practice, no
        source), in that module's output dtype; None when it does not apply."""
        x, y = a.array, b.array
        if x.dtype != _I64 or y.dtype != _I64 or (
                min(x.shape[0], y.shape[0]) * a.max_abs * b.max_abs >= INT64_LIMIT):
            return None
        out = np.convolve(x, y)
        m = self.modulus
        if m is None:  # int64 when the rounded bound fits, as IntegerFacts.bound decides
            bound = min(x.shape[0], y.shape[0]) * _rounded(a.max_abs) * _rounded(b.max_abs)
            return out if bound < INT64_LIMIT else out.astype(object)
        if m < INT64_LIMIT:
            return out % m
        return out if m == INT64_LIMIT else out.astype(object)  # values < 2^63: residues

    def plan_for(self, a: Operand, b: Operand) -> Plan:
        """The plan of this block shape; exact: re-chosen when ``a`` or ``b`` exceeds the
        magnitudes it was chosen for."""
        key = (a.shape[0], b.shape[0], combine_kinds(a.kind, b.kind))
        entry = self._plans.get(key)
        if entry is not None:
            the_plan, (max_a, max_b) = entry
            if a.max_abs <= max_a and b.max_abs <= max_b:
                return the_plan
            bounds = (max(a.max_abs, max_a), max(b.max_abs, max_b))
        else:
            bounds = (a.max_abs, b.max_abs)
        entry = self._choose(*key, bounds)
        self._plans[key] = entry
        self.plans_made += 1
        return entry[0]

    def _choose(self, n1: int, n2: int, kind: str, bounds: tuple) -> tuple[Plan, tuple]:
        if not self.exact:
            the_plan = choose(kind, n1, n2, (), (), ())
            check_budget(the_plan, kind, 0, None)
            return the_plan, (0, 0)
        facts = bound_facts(n1, n2, bounds[0], bounds[1], self.modulus)
        the_plan = choose(kind, n1, n2, (), (), (), facts=facts)
        m = self.modulus
        check_budget(the_plan, kind, (m - 1).bit_length() if m is not None
                     else facts.bound.bit_length() + 1, None)
        # the bounds actually planned for: rounded up to 2^bits - 1 by bound_facts
        return the_plan, (facts.max_a, facts.max_b)


class KernelProducts(BlockProducts):
    """:class:`BlockProducts` of every block with one kernel, prepared once.

    Parameters
    ----------
    kernel : numpy.ndarray
        The checked 1-D, non-empty kernel.
    exact : bool
        Exact integer products (blocks and kernel both integer), already checked.
    modulus : int, optional
        Already checked.
    name : str
        The blocks' name in a refusal (``"a"``, ``"source"``...).
    """

    def __init__(self, kernel: np.ndarray, exact: bool, modulus: int | None = None,
                 name: str = "a"):
        super().__init__(exact, modulus, (name, "kernel"))
        self.kernel = self.operand(kernel, 1)

    def __call__(self, block: np.ndarray | Operand) -> np.ndarray:
        """The full product of one block with the kernel."""
        return self.product(block, self.kernel)
