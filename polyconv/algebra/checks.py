"""The algebra's wording of the shared argument checks (:mod:`polyconv.pipeline.inputs`) and its
memory-budget check for chains of products."""

from __future__ import annotations

import functools
from collections.abc import Iterable

import numpy as np

from ..numerics.budget import check_allocation, coefficient_bytes
from ..pipeline.inputs import (
    LENGTH_ROLE,
    check_count,
    check_modulus,
    check_sequence,
    combine_kinds,
)
from .rings import _INT64_LIMIT, _Floats, _Modular, _Ring

# ----------------------------------------------------------------------------- validation
# The checks themselves live in polyconv.pipeline.inputs; these bind the algebra's wording.

_COEFFICIENTS = "polynomial coefficients, lowest degree first"


def _sequence(x, name: str, hint: str = "") -> tuple[np.ndarray, str]:
    """One 1-D, non-empty numeric sequence and its kind (``"integer"`` for Python ints too)."""
    arr, kind = check_sequence(x, name, unit="coefficient", what=_COEFFICIENTS, hint=hint)
    return arr, "integer" if kind == "bigint" else kind


def _combine(kinds: Iterable[str]) -> str:
    return functools.reduce(combine_kinds, kinds, "integer")


def _check_modulus(modulus, kind: str, names: str) -> int | None:
    return check_modulus(modulus, kind, names)


def _check_length(length, *, required: bool) -> int | None:
    return check_count(length, "length", optional=not required, role=LENGTH_ROLE)


def _check_exponent(k) -> int:
    return check_count(k, "k", minimum=0, role="the exponent",
                       hint=" (a negative power of a polynomial is a power series: use "
                            "inverse_series and power)")


# ----------------------------------------------------------------------------- memory budget

#: Peak bytes of a chain of products over the bytes of its result: the result, the two operands
#: of the last product (together at most the result's size again) and the engine's work space
#: (about two results; common practice, no source).
CHAIN_PEAK_FACTOR = 4


def _check_chain(ring: _Ring, count: int, bits: float, what: str) -> None:
    """Refuse a result of ``count`` coefficients of up to ``bits`` bits over the memory budget
    (:func:`polyconv.numerics.budget.check_allocation`), before any product is formed."""
    if isinstance(ring, _Floats):
        kind, bits = ("complex" if ring.dtype.kind == "c" else "real"), 0
    elif isinstance(ring, _Modular):
        kind, bits = "integer", (0 if ring.modulus <= _INT64_LIMIT else ring.modulus.bit_length())
    else:
        kind = "integer"
    per = coefficient_bytes(kind, bits)
    check_allocation(CHAIN_PEAK_FACTOR * count * per,
                     f"{what} ({count} coefficients"
                     + (f" of up to {bits:.3g} bits)" if bits >= 63 else ")"))
