"""The short path for tiny integer products: no classification, no plan, no array copies.

A 3 x 2 integer product through the whole pipeline costs 40-60 us (classifying the array-likes,
normalising both operands, the integer facts, a memoised plan look-up, shaping), against 1-3 us
of python-flint and under a microsecond of arithmetic.  :func:`tiny_product` answers the common
tiny case before any of that: two 1-D operands given as lists of Python ints or 1-D int64
arrays, mode "full", no ``length``, method "auto", ``n1 n2 <= TINY_WORK``.  Everything else
(and any doubt: numpy scalars in a list, booleans, floats, empty operands) returns None and takes
the full pipeline, so the result is always the one the pipeline gives: the same exact values,
and the same dtype rule (int64 when ``min(n1, n2) R(max|a|) R(max|b|) < 2^63`` with ``R(v) =
2^bits(v) - 1`` as :func:`polyconv.pipeline.facts.integer_facts` rounds magnitudes, else Python
ints; with a modulus, int64 residues when ``m <= 2^63``).

The arithmetic is schoolbook summation (``c_k = sum_i a_i b_{k-i}``), in Python ints for the
tiniest products and in ``numpy.convolve`` on int64 when no partial sum can leave int64
(``min(n1, n2) max|a| max|b| < 2^63``; common practice, no source), which is what the
direct-exact engine does at these sizes; wider products of int64 operands go to
:mod:`polyconv.engines.ntt_compiled` (NTT primes in one kernel call, Garner's CRT) when its
kernels are already loaded, else to the pipeline.
"""

from __future__ import annotations

import numpy as np

from ..engines import jit_state, ntt_batch, ntt_compiled
from ..numerics.limits import INT64_LIMIT

#: Products of at most this many multiply-adds take the short path (schoolbook costs ~1 ns per
#: multiply-add in numpy.convolve: 2^12 of them stay within the 3-6 us of the path itself).
TINY_WORK = 2**12
#: Below this many multiply-adds Python-int summation beats building arrays for numpy.convolve
#: (measured: 3 x 2 0.8 us against 2.4 us; 8 x 8 4 us against 3 us).
PYTHON_WORK = 24

#: int64 arrays up to this length are read as lists (measured: 3 entries 0.5 us against 2.4 us
#: for ``x.min()`` and ``x.max()``; even at about 32).
SHORT_ARRAY = 32

_INT64 = np.dtype(np.int64)


def _operand(x) -> tuple | None:
    """``(x, min, max)`` for a list of Python ints or a non-empty 1-D int64 array, else None."""
    if type(x) is list:
        for v in x:
            if type(v) is not int:
                return None
        return (x, min(x), max(x)) if x else None
    if type(x) is np.ndarray and x.ndim == 1 and x.dtype == _INT64 and x.shape[0]:
        if x.shape[0] <= SHORT_ARRAY:  # a list and Python's min/max beat two numpy reductions
            values = x.tolist()
            return values, min(values), max(values)
        return x, int(x.min()), int(x.max())
    return None


def _length(x) -> int:
    """Entries of a list or of a 1-D array (anything else: 0, decided by :func:`_operand`)."""
    if type(x) is list:
        return len(x)
    return x.shape[0] if type(x) is np.ndarray and x.ndim == 1 else 0


def _reduced(x, m: int):
    """Residues in ``[0, m)`` of a list or an int64 array (``m < 2^63`` for arrays)."""
    if type(x) is list:
        return [v % m for v in x]
    return x % m if m < INT64_LIMIT else [v % m for v in x.tolist()]


def _top(x) -> int:
    return max(x) if type(x) is list else int(x.max())


def _compiled(x, y, m: int | None, bound: int, top: int) -> np.ndarray | None:
    """The product by one batched compiled call (Python ints out; int64 residues modulo
    ``m < 2^62``) when the kernels are ready in this process and the operands are int64; None
    otherwise (nothing here waits for a compiler)."""
    if top >= INT64_LIMIT or jit_state.state() != "compiled" or (
            m is not None and m >= ntt_compiled.KERNEL_MODULUS_LIMIT):
        return None
    x = np.asarray(x, dtype=np.int64)
    y = np.asarray(y, dtype=np.int64)
    if m is not None:
        return ntt_compiled.convolve_mod(x, y, m)
    if bound < 2**127:  # 128-bit schoolbook sums, two words per Python int
        return ntt_batch.multiply_rows_exact(x, y, bound, as_int64=False)[0]
    return ntt_compiled.convolve_exact(x, y, bound, as_int64=False)


def _rounded(v: int) -> int:
    return (1 << v.bit_length()) - 1


def tiny_product(a, b, mode: str, method: str, modulus, length, axis) -> np.ndarray | None:
    """The product :func:`polyconv.pipeline.execute.convolve` would return, for tiny plain
    integer operands; None when the short path does not apply (the caller then plans)."""
    if (method != "auto" or mode != "full" or length is not None or axis not in (-1, 0)
            or (modulus is not None and (type(modulus) is not int or modulus < 2))):
        return None
    if _length(a) * _length(b) > TINY_WORK:  # before any pass over the operands
        return None
    xa = _operand(a)
    if xa is None:
        return None
    yb = _operand(b)
    if yb is None:
        return None
    (x, lo_x, hi_x), (y, lo_y, hi_y) = xa, yb
    n1, n2 = len(x), len(y)
    if n1 * n2 > TINY_WORK:
        return None
    m = modulus
    if m is not None:
        if lo_x < 0 or hi_x >= m:
            x = _reduced(x, m)
            hi_x = _top(x)
        if lo_y < 0 or hi_y >= m:
            y = _reduced(y, m)
            hi_y = _top(y)
        max_x, max_y = hi_x, hi_y
    else:
        max_x, max_y = max(hi_x, -lo_x), max(hi_y, -lo_y)
    terms = min(n1, n2)
    if (terms * max_x * max_y < INT64_LIMIT and max(max_x, max_y) < INT64_LIMIT
            and n1 * n2 > PYTHON_WORK):  # (an all-zero side keeps the product small, but the
        # other one must still be an int64)
        out = np.convolve(np.asarray(x, dtype=np.int64), np.asarray(y, dtype=np.int64))
        if m is not None:
            if m < INT64_LIMIT:
                out %= m
            elif m > INT64_LIMIT:  # the values are below 2^63 < m: already residues
                out = out.astype(object)
        elif terms * _rounded(max_x) * _rounded(max_y) >= INT64_LIMIT:
            out = out.astype(object)
        return out
    if n1 * n2 > 4 * PYTHON_WORK:  # wide and not tiny: the compiled rows, if ready
        return _compiled(x, y, m, terms * max_x * max_y, max(-lo_x, hi_x, -lo_y, hi_y))
    if type(x) is not list:
        x = x.tolist()
    if type(y) is not list:
        y = y.tolist()
    out = [0] * (n1 + n2 - 1)
    for i, u in enumerate(x):
        if u:
            for j, v in enumerate(y, i):
                out[j] += u * v
    if m is not None:
        out = [v % m for v in out]
        return np.array(out, dtype=np.int64 if m <= INT64_LIMIT else object)
    if terms * _rounded(max_x) * _rounded(max_y) < INT64_LIMIT:
        return np.array(out, dtype=np.int64)
    result = np.empty(len(out), dtype=object)
    result[:] = out
    return result
