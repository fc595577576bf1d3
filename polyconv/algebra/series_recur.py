"""The exact inverse of an integer power series by its recurrence in compiled code.

``b = 1/a`` for int64 ``a`` with ``a_0 = +-1``: ``b_k = -a_0 sum_(i=1..k) a_i b_(k-i)`` (Knuth,
TAOCP vol. 2, 3rd ed., section 4.7) on multi-word integers in
:func:`polyconv.engines._kernels_recur.inverse_words`, the rows then read as Python ints from a
``marshal`` stream (:mod:`polyconv.engines._pyints`).  Used only when the compiled kernels are
already loaded in this process (never waits for a compile) and the stream reads back correctly;
otherwise :func:`inverse_compiled` returns None and the caller keeps its portable route.
"""

from __future__ import annotations

import marshal

import numpy as np

from ..engines import _pyints
from ..engines import jit_state as jit
from ..numerics import budget
from .rings import _INT64_LIMIT

__all__ = ["inverse_compiled"]

#: Up to this many terms the compiled recurrence is used (its ``~n^3/6`` word products for
#: 64-bit ``a``); longer inverses keep the blocked route of
#: :func:`polyconv.algebra.exact_quotient.series_inverse`.  Measured here (kernel and stream /
#: that route, ms; busy machine): 16-bit 384 2.3 / 5.4, 512 5.1 / 13.6, 1024 31 / 87; 64-bit
#: 384 11 / 28, 512 32 / 88, 768 133 / 385, 1024 288 / 547.
RECUR_TERMS = 1024

_kernels: list = []


def _ready():
    """The recurrence kernels when the kernels are loaded and streams read back, else None."""
    if _kernels:
        return _kernels[0]
    if jit.state() != "compiled" or _pyints.ready() is None:
        return None
    _kernels.append(jit.kernels("_kernels_recur"))
    return _kernels[0]


def inverse_compiled(a: np.ndarray, n: int) -> np.ndarray | None:
    """``1/a mod x^n`` exactly, for int64 ``a`` with ``a[0] = +-1``, as the public functions
    return integers (int64 when every coefficient fits, else an object array of Python ints);
    None when the compiled route does not apply (kernels not loaded, ``a`` not int64, ``n``
    beyond :data:`RECUR_TERMS`)."""
    if a.dtype != np.int64 or n > RECUR_TERMS or a.ndim != 1 or not a.shape[0]:
        return None
    kernels = _ready()
    if kernels is None:
        return None
    a = np.ascontiguousarray(a[:n])
    words = n + 3 * (n * (n - 1) // 2) + 8  # _kernels_recur.word_capacity at its largest
    budget.check_allocation(8.0 * words, f"inverse_series(a, length={n}) words")  # and stream
    stream = kernels.inverse_stream(a, n)
    values = marshal.loads(stream)
    if max(max(values), -min(values)) < _INT64_LIMIT:  # as _Integers.to_result
        return np.array(values, dtype=np.int64)
    return np.fromiter(values, dtype=object, count=n)
