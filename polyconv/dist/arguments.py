"""Arguments of lattice queries: real numbers, probability levels, points mapped to lattice indices.

Shared by every query of :class:`~polyconv.dist.lattice.Lattice` and its helpers so that a bad
argument gets the same clear message (naming the argument and what was expected) everywhere.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

SNAP = 1e-9
"""An ``x`` within ``SNAP`` lattice steps of a lattice point counts as that point (so 0.3 on a grid
of step 0.1 is the point 3, whatever the float rounding of 3 * 0.1)."""


def real_value(value, name: str) -> float:
    """``float(value)`` for a finite real number; TypeError / ValueError naming ``name``
    otherwise (booleans refused, integers too large for a float refused)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {type(value).__name__} {value!r}")
    try:
        out = float(value)
    except OverflowError:
        digits = len(str(abs(int(value)))) if isinstance(value, numbers.Integral) else None
        size = f"an integer of {digits} digits" if digits else repr(value)
        raise ValueError(f"{name} must be a finite float; {size} is too large") from None
    if not math.isfinite(out):
        raise ValueError(f"{name} must be finite; got {value!r}")
    return out


def lattice_index(x, origin: float, step: float, n: int, snap: float = SNAP) -> np.ndarray:
    """Index ``k`` of the last point ``origin + step k <= x + snap step``, clipped to ``[-1, n]``
    (so huge or infinite ``x`` never overflow an integer cast); ``nan`` maps to ``-1`` (callers
    mask it)."""
    xs = np.asarray(x, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        k = np.floor((xs - origin) / step + snap)
    k = np.where(np.isnan(k), -1.0, np.clip(k, -1.0, float(n)))
    return k.astype(np.int64)


def check_level(p, name: str = "p", allow_one: bool = False) -> np.ndarray:
    """Validate probability levels ``0 < p < 1`` (``<= 1`` with ``allow_one``).

    Raises TypeError naming ``name`` for anything but real numbers (strings and booleans
    included) and ValueError for levels outside the range.
    """
    if isinstance(p, (str, bytes, bool, np.bool_)):
        raise TypeError(f"{name} must be a real number or array of them; got {p!r}")
    if isinstance(p, numbers.Real):
        arr = np.asarray(float(p))
    else:
        try:
            arr = np.asarray(p)
        except (TypeError, ValueError):
            raise TypeError(f"{name} must be a real number or array of them; got {p!r}") from None
        if arr.dtype.kind not in "iuf":
            raise TypeError(f"{name} must be a real number or array of them; got {p!r}")
        arr = arr.astype(float)
    hi_ok = (arr <= 1) if allow_one else (arr < 1)
    if not np.all(np.isfinite(arr) & (arr > 0) & hi_ok):
        rng = "(0, 1]" if allow_one else "(0, 1)"
        raise ValueError(f"{name} must lie in {rng}; got {p!r}")
    return arr
