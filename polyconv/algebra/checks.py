"""Argument checks of the polynomial algebra and its memory-budget check for chains of products."""

from __future__ import annotations

import numbers
from collections.abc import Iterable

import numpy as np

from ..budget import check_allocation, coefficient_bytes
from ..inputs import as_number_array
from .rings import _INT64_LIMIT, _Floats, _Modular, _Ring

# ----------------------------------------------------------------------------- validation


def _sequence(x, name: str, hint: str = "") -> tuple[np.ndarray, str]:
    """Validate one 1-D, non-empty numeric sequence; return it with its kind."""
    arr = as_number_array(x, name)
    if arr.ndim != 1:
        got = "a scalar" if arr.ndim == 0 else f"an array of shape {arr.shape}"
        raise ValueError(f"{name} must be a 1-D sequence of numbers (polynomial coefficients, "
                         f"lowest degree first); got {got}{hint}")
    if arr.shape[0] == 0:
        raise ValueError(f"{name} must hold at least one coefficient; got an empty sequence")
    return arr, _kind(arr, name)


def _kind(arr: np.ndarray, name: str) -> str:
    k = arr.dtype.kind
    if k in "iub":
        return "integer"
    if k == "f":
        return "real"
    if k == "c":
        return "complex"
    if k == "O":
        if all(isinstance(v, numbers.Integral) for v in arr):
            return "integer"
        if all(isinstance(v, numbers.Real) for v in arr):
            return "real"
        if all(isinstance(v, numbers.Complex) for v in arr):
            return "complex"
    raise TypeError(f"{name} must hold numbers (bool, integer, float or complex); "
                    f"got dtype {arr.dtype}")


def _combine(kinds: Iterable[str]) -> str:
    kinds = set(kinds)
    for k in ("complex", "real"):
        if k in kinds:
            return k
    return "integer"


def _check_modulus(modulus, kind: str, names: str) -> int | None:
    if modulus is None:
        return None
    if isinstance(modulus, bool) or not isinstance(modulus, numbers.Integral):
        raise TypeError(f"modulus must be an integer >= 2 or None; got {type(modulus).__name__}")
    m = int(modulus)
    if m < 2:
        raise ValueError(f"modulus must be an integer >= 2; got {m}")
    if kind != "integer":
        raise TypeError(f"modulus={m} needs integer coefficients; {names} {kind} "
                        "floating point numbers")
    return m


def _check_length(length, *, required: bool) -> int | None:
    if length is None and not required:
        return None
    if isinstance(length, bool) or not isinstance(length, numbers.Integral):
        what = "a positive int" if required else "a positive int or None"
        raise TypeError(f"length must be {what}; got {type(length).__name__}")
    if length < 1:
        raise ValueError(f"length must be >= 1 (the number of coefficients wanted); got {length}")
    return int(length)


def _check_exponent(k) -> int:
    if isinstance(k, bool) or not isinstance(k, numbers.Integral):
        raise TypeError(f"k must be a non-negative integer exponent; got {type(k).__name__} "
                        f"{k!r}")
    if k < 0:
        raise ValueError(f"k must be a non-negative integer exponent; got {k} (a negative power "
                         "of a polynomial is a power series: use inverse_series and power)")
    return int(k)


# ----------------------------------------------------------------------------- memory budget

#: Peak bytes of a chain of products over the bytes of its result: the result, the two operands
#: of the last product (together at most the result's size again) and the engine's work space
#: (about two results; common practice, no source).
CHAIN_PEAK_FACTOR = 4


def _check_chain(ring: _Ring, count: int, bits: float, what: str) -> None:
    """Refuse a result of ``count`` coefficients of up to ``bits`` bits over the memory budget
    (:func:`polyconv.budget.check_allocation`), before any product is formed."""
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
