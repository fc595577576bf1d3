"""One memory budget for every allocation whose size the caller controls.

Every public function that allocates from a size given (or implied) by its arguments calls
:func:`check_allocation` *before* allocating, so a request that could not finish is refused at once
with an error naming the argument, instead of running for minutes into swap or failing deep inside
numpy.

The budget, in bytes, is the first of:

1. the innermost :func:`using_budget` context (the CLI's ``--memory-budget`` sets one);
2. the environment variable ``POLYCONV_MEMORY_BUDGET`` (bytes, a plain number or with a suffix
   ``K``, ``M``, ``G``, ``T`` for powers of 1024, e.g. ``"512M"``, ``"8G"``, ``"1.5e9"``);
3. :data:`DEFAULT_FRACTION` of the machine's physical memory (:data:`FALLBACK_BYTES` where the
   operating system does not tell).

Requests up to :data:`ALWAYS_GRANTED` (1 MiB) always pass.  The check counts the largest arrays
an operation holds at once (estimates stated where the check is made); it is a guard against
requests that cannot fit, not an accounting of every temporary.
"""

from __future__ import annotations

import contextlib
import contextvars
import functools
import math
import os
import re

#: Name of the environment variable that sets the budget (bytes, suffixes K/M/G/T allowed).
ENV_VARIABLE = "POLYCONV_MEMORY_BUDGET"
#: Default budget as a fraction of physical memory (half: room for the inputs, the output and
#: everything else running; common practice, no source).
DEFAULT_FRACTION = 0.5
#: Default budget where physical memory is unknown: 4 GiB.
FALLBACK_BYTES = 4 * 2**30

#: Requests up to this size (1 MiB) are granted without reading the budget: the interpreter
#: itself needs more, and small products then pay nothing for the check.
ALWAYS_GRANTED = 2**20

_SUFFIXES = {"": 1, "B": 1, "K": 2**10, "M": 2**20, "G": 2**30, "T": 2**40}
_PATTERN = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([KMGT]?)(?:I?B)?\s*$",
                      re.IGNORECASE)
_override: contextvars.ContextVar[int | None] = contextvars.ContextVar("polyconv_memory_budget",
                                                                         default=None)


class MemoryBudgetError(ValueError):
    """A requested size exceeds the memory budget (a ValueError: the argument is too large)."""


def parse_budget(text: str, name: str = ENV_VARIABLE) -> int:
    """Bytes from ``"8G"``, ``"512M"``, ``"1.5e9"``, ``"4096"`` (suffixes are powers of 1024).

    Raises
    ------
    ValueError
        Naming ``name``, for anything that is not a finite positive size (``nan``, ``inf``,
        ``-1``, ``0``, Unicode digits, junk).
    """
    if not isinstance(text, str):
        raise TypeError(f"{name} must be a string such as '8G' or '512M', "
                        f"got {type(text).__name__}")
    match = _PATTERN.match(text) if text.isascii() else None
    if match is None:
        raise ValueError(f"{name} must be a positive size in bytes such as 8G, 512M or 1.5e9 "
                         f"(suffixes K, M, G, T are powers of 1024), got {text!r}")
    value = float(match.group(1)) * _SUFFIXES[match.group(2).upper()]
    if not math.isfinite(value) or value < 1:
        raise ValueError(f"{name} must be a finite size of at least 1 byte, got {text!r}")
    return int(value)


def physical_memory() -> int | None:
    """Bytes of physical memory, or None where the operating system does not say."""
    try:
        pages, page_size = os.sysconf("SC_PHYS_PAGES"), os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):
        return None
    if pages <= 0 or page_size <= 0:
        return None
    return pages * page_size


@functools.lru_cache(maxsize=1)
def default_budget() -> int:
    """:data:`DEFAULT_FRACTION` of physical memory, else :data:`FALLBACK_BYTES`."""
    total = physical_memory()
    return FALLBACK_BYTES if total is None else int(total * DEFAULT_FRACTION)


def memory_budget() -> int:
    """The budget in force, in bytes (see the module notes for the order of precedence)."""
    inner = _override.get()
    if inner is not None:
        return inner
    text = os.environ.get(ENV_VARIABLE)
    if text is not None and text.strip():
        return parse_budget(text)
    return default_budget()


@contextlib.contextmanager
def using_budget(nbytes: int | str | None):
    """Run a block under another budget (bytes, or a string for :func:`parse_budget`).

    ``None`` leaves the budget in force unchanged.  Contexts nest; each thread or task sees its own
    (a :class:`contextvars.ContextVar`).
    """
    if nbytes is None:
        yield
        return
    value = parse_budget(nbytes, "memory budget") if isinstance(nbytes, str) else _checked(nbytes)
    token = _override.set(value)
    try:
        yield
    finally:
        _override.reset(token)


def _checked(nbytes) -> int:
    if isinstance(nbytes, bool) or not isinstance(nbytes, (int, float)):
        raise TypeError(f"memory budget must be a number of bytes, got {type(nbytes).__name__}")
    if not math.isfinite(nbytes) or nbytes < 1:
        raise ValueError(f"memory budget must be a finite number of bytes >= 1, got {nbytes!r}")
    return int(nbytes)


def format_bytes(nbytes: float) -> str:
    """``1536 -> '1.5 KiB'`` (binary prefixes, three significant digits)."""
    value = float(nbytes)
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if abs(value) < 1024 or unit == "PiB":
            return f"{value:.0f} {unit}" if unit == "B" else f"{value:.3g} {unit}"
        value /= 1024
    raise AssertionError("unreachable")


#: Bytes of one Python int of ``b`` bits held in an object array: a 28-byte header, 4 bytes per
#: 30-bit digit, and the array's 8-byte pointer (CPython's layout; common practice, no source).
PYINT_OVERHEAD = 36


def coefficient_bytes(kind: str, bits: float = 0.0) -> float:
    """Bytes one stored coefficient takes: float64 8, complex128 16, int64 8 below 63 bits,
    else a Python int of ``bits`` bits (:data:`PYINT_OVERHEAD` plus its digits)."""
    if kind == "complex":
        return 16.0
    if kind == "real" or bits < 63:
        return 8.0
    return PYINT_OVERHEAD + bits / 7.5  # 30 bits per 4-byte digit


def check_allocation(nbytes: float, what: str) -> None:
    """Refuse, before allocating, a request of ``nbytes`` over the budget.

    Parameters
    ----------
    nbytes : int or float
        The estimated peak bytes (may be astronomically large: it is compared, never allocated;
        ``inf`` and NaN are refused too).
    what : str
        What asks for it, naming the user's argument, e.g. ``"length=1099511627776 (the output
        of 2^40 int64 coefficients)"``.

    Raises
    ------
    MemoryBudgetError
        A ValueError whose message names ``what``, both sizes and how to change the budget.
    """
    if nbytes <= ALWAYS_GRANTED:  # NaN compares False: refused below
        return
    budget = memory_budget()
    if nbytes <= budget:
        return
    size = format_bytes(nbytes) if math.isfinite(nbytes) else str(nbytes)
    raise MemoryBudgetError(
        f"{what} would need about {size}, over the memory budget of {format_bytes(budget)}; "
        f"ask for less, or raise the budget with {ENV_VARIABLE} (e.g. 16G)")
