"""Python ints from machine words by ``marshal.loads`` of a stream written by compiled kernels.

Building wide Python ints one ``int.from_bytes`` call per value costs 130-180 ns each (measured
here on 16-24-byte rows); object-array shifts and ors of two words ~90 ns.  CPython's
``marshal.loads`` of a list builds them in its C loop from 15-bit digits in ~25 ns per 130-bit
value (CPython's Python/marshal.c, ``r_PyLong``), so the kernels of
:mod:`polyconv.engines._kernels_stream` (``garner_stream``, ``rows_stream``) write that stream and
this module reads it.  The stream format is CPython's and undocumented, so it is checked once per
process against ``int.from_bytes`` on a few edge values; when the check fails, or the kernels are
not loaded in this process (no compile is ever started for a conversion), the callers keep their
portable routes (:func:`ready` returns None).
"""

from __future__ import annotations

import marshal
from functools import lru_cache

import numpy as np

from ..numerics import budget
from . import jit_state


def capacity(count: int, bits: int) -> int:
    """Bytes a stream of ``count`` values of at most ``bits`` bits (sign aside) may take: a
    5-byte header, and per value a type byte, an int32 and two bytes per 15-bit digit."""
    return 5 + count * (5 + 2 * (bits // 15 + 1))


def buffer(count: int, bits: int, what: str) -> np.ndarray:
    """An output buffer for a stream (checked against the memory budget first)."""
    size = capacity(count, bits)
    budget.check_allocation(float(size), what)
    return np.empty(size, dtype=np.uint8)


def objects(buf: np.ndarray, used: int, count: int) -> np.ndarray:
    """The ``count`` Python ints of a stream as a 1-D object array."""
    return np.fromiter(marshal.loads(buf[:used]), dtype=object, count=count)  # (fastest here)


def ready():
    """The stream kernel module when it is loaded in this process and its streams read back
    correctly (checked once), else None."""
    if jit_state.state() != "compiled":
        return None
    return _checked()


@lru_cache(maxsize=1)
def _checked():
    kernels = jit_state.kernels("_kernels_stream")
    values = [0, 1, -1, 2**31 - 1, -(2**31) + 1, 2**31, -(2**31), 2**32, 2**45 - 1, 2**45,
              -(2**60) + 3, 2**63 - 1, -(2**63), 2**79 + 2**15, -(2**94) - 1]
    width = 13
    rows = np.frombuffer(b"".join(v.to_bytes(width, "little", signed=True) for v in values),
                         dtype=np.uint8).reshape(len(values), width)
    buf = buffer(len(values), 8 * width, "a stream check")
    try:
        used = kernels.rows_stream(rows, True, False, buf)
        good = objects(buf, used, len(values)).tolist() == values
    except (ValueError, EOFError, TypeError):  # marshal's errors on a stream it rejects
        good = False
    return kernels if good else None


def rows_to_objects(rows: np.ndarray, signed: bool, borrowed: bool = False) -> np.ndarray | None:
    """Python ints of little-endian byte rows (two's complement if ``signed``; ``borrowed``: add
    the top bit of the previous row, as Kronecker slots need), or None when :func:`ready` is
    None."""
    kernels = ready()
    if kernels is None:
        return None
    count, width = rows.shape
    buf = buffer(count, 8 * width + 1, "Python ints from byte rows")
    used = kernels.rows_stream(np.ascontiguousarray(rows), signed, borrowed, buf)
    return objects(buf, used, count)


def from_words128(high: np.ndarray, low: np.ndarray) -> np.ndarray:
    """Python ints ``high 2^64 + low`` of 128-bit two's complement words (``high`` read as
    signed), as a 1-D object array: by the stream when :func:`ready`, else two object
    operations per value."""
    high, low = high.ravel(), low.ravel()
    kernels = ready()
    if kernels is not None:
        buf = buffer(high.shape[0], 128, "Python ints from 128-bit words")
        used = kernels.words128_stream(np.ascontiguousarray(high).view(np.uint64),
                                       np.ascontiguousarray(low, dtype=np.uint64), buf)
        return objects(buf, used, high.shape[0])
    out = np.empty(high.shape[0], dtype=object)
    out[:] = [(h << 64) + v for h, v in zip(high.view(np.int64).tolist(), low.tolist(),
                                            strict=True)]
    return out


def values_to_rows(values: list) -> np.ndarray | None:
    """Python ints as the narrowest little-endian two's complement byte rows, read from
    ``marshal.dumps(values, 2)`` by compiled kernels; None when :func:`ready` is None or the list
    holds anything but exact ints (the caller's portable route then converts them)."""
    kernels = ready()
    if kernels is None:
        return None
    try:
        data = np.frombuffer(marshal.dumps(values, 2), dtype=np.uint8)
    except ValueError:  # unmarshallable items (gmpy2.mpz, numpy scalars)
        return None
    width = kernels.stream_width(data)
    if width < 0 or data.shape[0] < 5:  # bools or other items
        return None
    budget.check_allocation(float(len(values)) * width, "byte rows of Python ints")
    rows = np.empty((len(values), width), dtype=np.uint8)
    kernels.stream_rows(data, rows)
    return rows
