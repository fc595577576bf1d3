"""The exact inverse of an integer power series by its recurrence in compiled code.

``b = 1/a`` for int64 ``a`` with ``a_0 = +-1``: ``b_k = -a_0 sum_(i=1..k) a_i b_(k-i)`` (Knuth,
TAOCP vol. 2, 3rd ed., section 4.7) on multi-word integers in
:func:`polyconv.engines._kernels_recur.inverse_words`, the rows then read as Python ints from a
``marshal`` stream (:mod:`polyconv.engines._pyints`).  Used only when the compiled kernels are
already loaded in this process (never waits for a compile) and the stream reads back correctly;
otherwise :func:`inverse_compiled` returns None and the caller keeps its portable route.
"""

from __future__ import annotations

import numpy as np

from ..engines import _pyints
from ..engines import jit_state as jit
from ..numerics import budget

__all__ = ["inverse_compiled"]

#: Up to this many terms the compiled recurrence is used (its ``~n^3/6`` word products for
#: 64-bit ``a``); longer inverses keep the blocked route of
#: :func:`polyconv.algebra.exact_quotient.series_inverse`.
RECUR_TERMS = 512

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
    """``1/a mod x^n`` exactly as a 1-D object array of Python ints, for int64 ``a`` with
    ``a[0] = +-1``; None when the compiled route does not apply (kernels not loaded, ``a`` not
    int64, ``n`` beyond :data:`RECUR_TERMS`)."""
    if a.dtype != np.int64 or n > RECUR_TERMS or a.ndim != 1 or not a.shape[0]:
        return None
    kernels = _ready()
    if kernels is None:
        return None
    a = np.ascontiguousarray(a[:n])
    cap = kernels.word_capacity(a, n)
    budget.check_allocation(4.0 * cap, f"inverse_series(a, length={n}) words")
    words = np.empty(cap, dtype=np.uint32)
    start = np.empty(n, dtype=np.int64)
    width = np.empty(n, dtype=np.int64)
    negative = np.empty(n, dtype=np.uint8)
    kernels.inverse_words(a, n, words, start, width, negative)
    buf = _pyints.buffer(n, 32 * int(width.max()), "Python ints of inverse_series")
    used = kernels.words_stream(words, start, width, negative, buf)
    return _pyints.objects(buf, used, n)
