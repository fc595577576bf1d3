"""Size tables: values measured at sizes ``2^k``, read between them linearly in ``k``.

The cost table keeps its size-dependent constants this way (``fft.rate_by_log2n``,
``exact.kronecker.mul_rate_by_log2bits``: keys are ``k`` as text, values seconds per unit of work).
Outside the measured range the nearest end value is used (common practice, no source).
"""

from __future__ import annotations

import bisect
import math


class LogTable:
    """A ``{k: value}`` table (keys ``int(k)``) read at ``log2`` of a size."""

    __slots__ = ("source", "xs", "ys")

    def __init__(self, table: dict):
        self.source = table
        pairs = sorted((int(k), float(v)) for k, v in table.items())
        self.xs = [p[0] for p in pairs]
        self.ys = [p[1] for p in pairs]

    def at(self, x: float) -> float:
        """The value at ``k = x``, linear between the two nearest keys."""
        xs, ys = self.xs, self.ys
        if x <= xs[0]:
            return ys[0]
        if x >= xs[-1]:
            return ys[-1]
        i = bisect.bisect_right(xs, x)
        w = (x - xs[i - 1]) / (xs[i] - xs[i - 1])
        return ys[i - 1] * (1.0 - w) + ys[i] * w


_built: dict[int, LogTable] = {}


def value_at_size(table: dict, size: float) -> float:
    """``table`` read at ``k = log2(size)`` (the parsed table is kept while ``table`` lives)."""
    parsed = _built.get(id(table))
    if parsed is None or parsed.source is not table:
        if len(_built) > 16:
            _built.clear()
        parsed = _built[id(table)] = LogTable(table)
    return parsed.at(math.log2(size))
