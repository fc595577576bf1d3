"""Turn user array-likes into classified operands.

This is the first stage of the data flow ``inputs -> planning -> engine -> shape``. Nothing here
computes a product: it checks what the caller gave, names the argument at fault when something is
wrong, moves the convolution axis last and decides which *kind* of arithmetic the operands need.

It is also polyconv's one place for argument checks (the algebra, streaming and Dask entry points
call the same functions): :func:`check_sequence` (one 1-D numeric sequence), :func:`check_sequences`
(an iterable of them), :func:`check_count` (a whole number with a lower bound), :func:`check_mode`,
:func:`check_length` and :func:`check_modulus`.  Every refusal names the argument as the caller
wrote it and says what was expected: ``"<name> must be <expected>; got <what was given>"``.

Kinds
-----
``"real"``
    Real floating point (any float dtype; integers mixed with floats land here too).
``"complex"``
    Complex floating point.
``"integer"``
    Fixed-width numpy integers or booleans: the product is computed exactly.
``"bigint"``
    An object array whose entries are Python ints (or ``gmpy2.mpz``): computed exactly.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

MODES = ("full", "same", "valid")

#: numpy dtype kinds accepted as numbers
_FLOAT_KINDS = "f"
_COMPLEX_KINDS = "c"
_INTEGER_KINDS = "iub"


@dataclass(frozen=True, slots=True)
class OperandPair:
    """Two validated operands with the convolution axis moved last.

    Attributes
    ----------
    a, b : numpy.ndarray
        The operands, convolution axis last, at least 1-D.  Their leading (batch) axes broadcast.
    kind : str
        ``"real"``, ``"complex"``, ``"integer"`` or ``"bigint"`` (see module docstring).
    batch_shape : tuple of int
        The broadcast shape of the leading axes.
    axis : int
        The user's axis, normalised against the output's number of dimensions.
    """

    a: np.ndarray
    b: np.ndarray
    kind: str
    batch_shape: tuple
    axis: int


def _as_array(x, name: str) -> np.ndarray:
    arr = as_number_array(x, name)
    if arr.ndim == 0:
        raise ValueError(f"{name} must be a sequence (at least 1-D), got a scalar (0-d array)")
    return arr


#: Containers numpy would wrap as one opaque 0-d object: no order (sets, dicts) or no length
#: (iterators, generators).
_UNORDERED = (set, frozenset, dict)


def as_number_array(x, name: str) -> np.ndarray:
    """``x`` as a numpy array without losing exactness; a clear error naming ``name`` otherwise.

    numpy turns a list of Python ints into float64 when one value lies in ``[2^63, 2^64)`` and
    another is negative or below it (``[0, 2**63 + 1]``), silently rounding them; such lists (or
    nested lists and tuples) become object arrays of Python ints here, so they stay exact.
    Generators, iterators, dicts and sets are refused by name (numpy would wrap them as a
    scalar).  Arrays are returned as they are.
    """
    if isinstance(x, np.ndarray):
        return x
    if isinstance(x, _UNORDERED) or (hasattr(x, "__next__") and hasattr(x, "__iter__")):
        raise TypeError(f"{name} must be an array-like of numbers (list, tuple or numpy array); "
                        f"got a {type(x).__name__}, which numpy cannot read as a sequence: "
                        f"pass list(...) of it")
    try:
        arr = np.asarray(x)
    except (ValueError, TypeError, OverflowError) as exc:  # ragged nested lists and the like
        raise ValueError(
            f"{name} must be an array-like of numbers with a regular shape; numpy said: {exc}"
        ) from None
    if arr.dtype.kind == "f" and arr.size and _holds_int64_overflow(arr):
        exact = np.asarray(x, dtype=object)
        if exact.shape == arr.shape and all(
                isinstance(v, numbers.Integral) for v in exact.ravel()):
            return exact
    return arr


def _holds_int64_overflow(arr: np.ndarray) -> bool:
    """True if some entry is at least 2^63 in magnitude (numpy's float64 for big Python ints)."""
    with np.errstate(invalid="ignore"):
        return bool(np.nanmax(np.abs(arr), initial=0.0) >= 2.0**63)


def kind_of(arr: np.ndarray, name: str) -> str:
    """The kind (module docstring) of one numeric array; TypeError naming ``name`` otherwise.

    Object arrays are classified by the types of their entries.
    """
    kind = dtype_kind(arr.dtype, name)
    return _object_kind(arr, name) if kind is None else kind


#: The former private name, still used by branch nd (pipeline/axes); remove once it says kind_of.
_kind_of = kind_of


def dtype_kind(dtype: np.dtype, name: str) -> str | None:
    """The kind of a numeric dtype; None for object arrays (their entries decide, see
    :func:`kind_of`); TypeError naming ``name`` for anything else (strings, dates, records)."""
    k = dtype.kind
    if k in _FLOAT_KINDS:
        return "real"
    if k in _COMPLEX_KINDS:
        return "complex"
    if k in _INTEGER_KINDS:
        return "integer"
    if k == "O":
        return None
    raise TypeError(
        f"{name} must hold numbers (bool, integer, float or complex); got dtype {dtype}"
    )


def _object_kind(arr: np.ndarray, name: str) -> str:
    """Classify an object array: all integers -> "bigint"; otherwise numbers -> float kinds."""
    flat = arr.ravel()
    if flat.size == 0:
        return "real"
    kinds = set(map(type, flat))  # a few distinct types: classify those, not every entry
    if all(issubclass(t, numbers.Integral) for t in kinds):
        return "bigint"
    if all(issubclass(t, numbers.Real) for t in kinds):
        return "real"
    if all(issubclass(t, numbers.Complex) for t in kinds):
        return "complex"
    bad = next(t for t in kinds if not issubclass(t, numbers.Complex))
    raise TypeError(f"{name} must hold numbers; found an entry of type {bad.__name__}")


_KIND_RANK = {"integer": 0, "bigint": 1, "real": 2, "complex": 3}


def combine_kinds(ka: str, kb: str) -> str:
    """The kind of arithmetic a product of a ``ka`` and a ``kb`` operand needs."""
    return ka if _KIND_RANK[ka] >= _KIND_RANK[kb] else kb


def prepare_pair(a, b, axis: int = -1) -> OperandPair:
    """Validate two operands and move the convolution axis last.

    Parameters
    ----------
    a, b : array_like
        Operands.  Each must be at least 1-D with a non-empty convolution axis.
    axis : int
        The axis along which to convolve, counted in each operand separately (``-1``: the last).

    Returns
    -------
    OperandPair

    Raises
    ------
    ValueError
        On 0-d or empty operands, an axis out of range or batch shapes that do not broadcast.
    TypeError
        On non-numeric data or a non-integer axis.
    """
    if not isinstance(axis, (int, np.integer)) or isinstance(axis, bool):
        raise TypeError(f"axis must be an int, got {type(axis).__name__}")
    a = _as_array(a, "a")
    b = _as_array(b, "b")
    kind = combine_kinds(kind_of(a, "a"), kind_of(b, "b"))
    if a.ndim == 1 and b.ndim == 1:
        if axis not in (0, -1):
            raise ValueError(f"axis={axis} is out of range for 1-D inputs a and b")
        if a.shape[0] == 0 or b.shape[0] == 0:
            _raise_empty(a, b)
        return OperandPair(a, b, kind, (), 0)
    a = _move_axis_last(a, axis, "a")
    b = _move_axis_last(b, axis, "b")
    if a.shape[-1] == 0 or b.shape[-1] == 0:
        _raise_empty(a, b)
    try:
        batch = np.broadcast_shapes(a.shape[:-1], b.shape[:-1])
    except ValueError:
        raise ValueError(
            f"the batch shapes of a {a.shape[:-1]} and b {b.shape[:-1]} (all axes but axis={axis}) "
            "do not broadcast"
        ) from None
    out_ndim = len(batch) + 1
    return OperandPair(a, b, kind, tuple(batch),
                       _normalise_out_axis(axis, a.ndim, b.ndim, out_ndim))


def _normalise_out_axis(axis: int, ndim_a: int, ndim_b: int, out_ndim: int) -> int:
    """Where the convolution axis sits in the output.

    A negative axis counts from the end in every array, so it keeps its meaning.  A non-negative
    axis is kept when both operands have the output's number of dimensions; otherwise it is placed
    by counting from the end of the operand with the most dimensions.
    """
    if axis < 0:
        return out_ndim + axis
    ref = max(ndim_a, ndim_b)
    return out_ndim - (ref - axis)


def _move_axis_last(arr: np.ndarray, axis: int, name: str) -> np.ndarray:
    if not -arr.ndim <= axis < arr.ndim:
        raise ValueError(f"axis={axis} is out of range for {name} with {arr.ndim} dimensions")
    if axis in (-1, arr.ndim - 1):
        return arr
    return np.moveaxis(arr, axis, -1)


def _raise_empty(a: np.ndarray, b: np.ndarray) -> None:
    name = "a" if a.shape[-1] == 0 else "b"
    raise ValueError(f"{name} is empty along the convolution axis: expected at least one element")


def check_mode(mode: str) -> str:
    """Return ``mode`` if it is one of full/same/valid, else raise ValueError."""
    if mode not in MODES:
        raise ValueError(f"mode must be one of 'full', 'same', 'valid'; got {mode!r}")
    return mode


def check_length(length, mode: str) -> int | None:
    """Validate the truncation ``length`` (first coefficients of the full product)."""
    length = check_count(length, "length", optional=True, role=LENGTH_ROLE)
    if length is not None and mode != "full":
        raise ValueError(f"length is only defined for mode='full', got mode={mode!r}")
    return length


def check_modulus(modulus, kind: str | None = None, holder: str = "a and b hold") -> int | None:
    """Validate ``modulus``: None, or an integer >= 2 that only integer data may have.

    ``kind`` is the kind of the data (module docstring; None: not known yet) and ``holder`` says
    who holds it in the message (``"a holds"``, ``"source and kernel hold"``...).
    """
    m = check_count(modulus, "modulus", minimum=2, optional=True)
    if m is not None and kind in ("real", "complex"):
        raise TypeError(f"modulus={m} needs integer operands; {holder} {kind} floating point "
                        "numbers")
    return m


# ----------------------------------------------------------------------------- argument checks
# Every argument check of polyconv words its refusal the same way: "<name> must be <expected>;
# got <what was given>" (or "<name> is empty: expected ..."), naming the argument as the caller
# wrote it ("a", "kernel", "chunks[3]", "seqs[0]", "block", ...).

#: What ``length`` means wherever it is accepted (the one word for "leading coefficients kept").
LENGTH_ROLE = "the number of leading coefficients kept"


def _given(value) -> str:
    """A short description of a refused value for a message: its type, and its repr if short."""
    text = repr(value)
    return type(value).__name__ + (f" {text}" if len(text) <= 40 else "")


def check_count(value, name: str, *, minimum: int = 1, optional: bool = False,
                role: str = "", hint: str = "") -> int | None:
    """``value`` as a Python int ``>= minimum`` (or None when ``optional``).

    TypeError for what is not an integer (bool, float, str...), ValueError below ``minimum``;
    both name ``name`` and say what was expected; ``role`` (what the number means) is added in
    parentheses, ``hint`` after a value that is too small.
    """
    if value is None and optional:
        return None
    noun = {0: "a non-negative integer", 1: "a positive integer"}.get(
        minimum, f"an integer >= {minimum}")
    about = f" ({role})" if role else ""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name} must be {noun}{' or None' if optional else ''}{about}; "
                        f"got {_given(value)}")
    if value < minimum:
        raise ValueError(f"{name} must be >= {minimum}{about}; got {value}{hint}")
    return int(value)


def check_vector_shape(arr, name: str, *, unit: str = "element", what: str = "",
                       hint: str = "", allow_empty: bool = False) -> None:
    """Refuse, naming ``name``, an array (numpy or dask) that is not 1-D or (unless
    ``allow_empty``) holds no ``unit``; ``what`` describes the expected sequence."""
    if arr.ndim != 1:
        got = "a scalar" if arr.ndim == 0 else f"an array of shape {arr.shape}"
        raise ValueError(f"{name} must be 1-D ({what or 'a sequence of numbers'}); "
                         f"got {got}{hint}")
    if arr.shape[0] == 0 and not allow_empty:
        raise ValueError(f"{name} is empty: expected at least one {unit}")


def check_sequence(x, name: str, *, unit: str = "element", what: str = "", hint: str = "",
                   allow_empty: bool = False) -> tuple[np.ndarray, str]:
    """One 1-D numeric sequence: the array (exact, see :func:`as_number_array`) and its kind.

    Refusals name ``name``: None, what numpy cannot read as a sequence, a scalar or an array
    that is not 1-D, an empty sequence (unless ``allow_empty``), non-numbers.
    """
    if x is None:
        raise TypeError(f"{name} is None; expected a 1-D array-like of numbers")
    arr = as_number_array(x, name)
    check_vector_shape(arr, name, unit=unit, what=what, hint=hint, allow_empty=allow_empty)
    return arr, kind_of(arr, name)


def _article(noun: str) -> str:
    return ("an " if noun[:1].lower() in "aeiou" else "a ") + noun


def check_sequences(x, name: str, *, what: str, one: str):
    """An iterator over ``x``, an iterable of 1-D sequences (``what`` says which); TypeError
    naming ``name`` for what is not one: None, a number, a string, a set or dict, a 0-d or 1-D
    numpy array (numpy would iterate it as scalars; ``one`` says how to pass a single one)."""
    if (isinstance(x, (str, bytes, set, frozenset, dict)) or not isinstance(x, Iterable)
            or (isinstance(x, np.ndarray) and x.ndim < 2)):
        got = (f"a {x.ndim}-D numpy array ({one})" if isinstance(x, np.ndarray) else
               "None" if x is None else _article(type(x).__name__))
        raise TypeError(f"{name} must be an iterable of 1-D arrays, {what}; got {got}")
    return iter(x)
