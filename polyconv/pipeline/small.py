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

The arithmetic is schoolbook summation (``c_k = sum_i a_i b_{k-i}``): ``numpy.convolve`` on
int64 when no partial sum can leave int64 (``min(n1, n2) max|a| max|b| < 2^63``; common
practice, no source), which is what the direct-exact engine does at these sizes (int64 arrays
go in as they are; lists of the tiniest products are summed in Python ints instead); wider
products of int64 operands go to the 192-bit schoolbook kernels of
:mod:`polyconv.engines._kernels_small` (exact: a marshal stream of Python ints; modulo an odd
``m < 2^63``: reduced in the kernel), modulo an NTT prime beyond :data:`PRIME_WORK` to one NTT
modulo it, the rest (even moduli, Python-int residues) to the compiled 128-bit rows or
:mod:`polyconv.engines.ntt_compiled`, always only when the kernels are already loaded, else to
Python sums or the pipeline.  Two 1-D int64 arrays take :func:`tiny_arrays`: one compiled call
that also decides the dtype rule.  Every attribute look-up costs on this path (a 3 x 2 product
is ~1.5 us in all): the checks are inlined, and the kernel modules are fetched once.
"""

from __future__ import annotations

import marshal

import numpy as np

from ..engines import _pyints, jit_state, ntt_compiled
from ..numerics.limits import INT64_LIMIT

#: Products of at most this many multiply-adds take the short path (schoolbook costs ~1 ns per
#: multiply-add in numpy.convolve: 2^12 of them stay within the 3-6 us of the path itself).
TINY_WORK = 2**12
#: Below this many multiply-adds Python-int summation beats building arrays for numpy.convolve
#: from lists (measured: 3 x 2 0.8 us against 2.4 us; 8 x 8 4 us against 3 us), and beats the
#: 128-bit compiled rows for sums beyond int64 (the call and two words per output cost ~1.5 us).
PYTHON_WORK = 24
#: Beyond this many multiply-adds, int64 operands with sums past int64 go to the 192-bit kernels
#: of :mod:`polyconv.engines._kernels_small` (exact: a marshal stream; modulo an odd ``m <
#: 2^63``: reduced in the kernel).
WIDE_WORK = 4
#: ... except products modulo an NTT prime beyond this many multiply-adds, where one NTT modulo
#: the prime itself is faster (measured, mod 998244353, kernel route against one NTT: 16 x 16
#: 2.4 / 2.7 us, 24 x 24 3.6 / 2.8 us, 32 x 32 5.0 / 2.6 us).
PRIME_WORK = 2**8

#: int64 arrays up to this length are read as lists (measured: 3 entries 0.5 us against 2.4 us
#: for ``x.min()`` and ``x.max()``; even at about 32).
SHORT_ARRAY = 32

_INT64 = np.dtype(np.int64)
_UINT8 = np.dtype(np.uint8)
_OBJECT = np.dtype(object)
_empty = np.empty
_array = np.array
_loads = marshal.loads
_ARRAY = np.ndarray
_LIMIT_128 = 2**127
_batch = None  # the batched kernel module, once loaded in this process
_small = None  # the short-product kernel module, once loaded (and streams checked)


def batch_kernels():
    """The module of ``rows_schoolbook_128`` when the kernels are ready here, else None."""
    global _batch
    if _batch is None and jit_state.state() == "compiled":
        _batch = jit_state.kernels("_kernels_batch")
    return _batch


def _operand(x) -> tuple | None:
    """``(x, values, min, max)`` for a list of Python ints or a non-empty 1-D int64 array
    (``values``: the entries as a list, None for a long array), else None."""
    if type(x) is list:
        for v in x:
            if type(v) is not int:
                return None
        return (x, x, min(x), max(x)) if x else None
    if type(x) is _ARRAY and x.ndim == 1 and x.dtype == _INT64 and x.shape[0]:
        if x.shape[0] <= SHORT_ARRAY:  # a list and Python's min/max beat two numpy reductions
            values = x.tolist()
            return x, values, min(values), max(values)
        return x, None, int(x.min()), int(x.max())
    return None


def _length(x) -> int:
    """Entries of a list or of a 1-D array (anything else: 0, declined)."""
    t = type(x)
    if t is list:
        return len(x)
    return x.shape[0] if t is _ARRAY and x.ndim == 1 else 0


def _reduced(x, values, m: int) -> tuple:
    """``(x, values)`` as residues in ``[0, m)`` (an array stays one when ``m < 2^63``)."""
    if type(x) is list:
        x = [v % m for v in x]
        return x, x
    if m < INT64_LIMIT:
        x = x % m
        return x, None if values is None else x.tolist()
    x = [v % m for v in x.tolist()]
    return x, x


def _top(x, values) -> int:
    return max(values) if values is not None else int(x.max())


def _rows(x) -> np.ndarray:
    """``x`` as a C-contiguous ``(1, n)`` int64 array."""
    if type(x) is list:
        return np.array([x], dtype=_INT64)
    return (x if x.flags.c_contiguous else x.copy()).reshape(1, -1)


def wide_rows(x, y, m: int | None, count: int) -> np.ndarray:
    """The product (first ``count`` coefficients) of int64 operands (1-D arrays or lists) whose
    sums stay below ``2^127`` by the 128-bit compiled rows: Python ints (``high 2^64 + low``),
    or their residues modulo ``m``.  :func:`batch_kernels` must have returned the kernels."""
    high = np.empty((1, count), dtype=np.uint64)
    low = np.empty((1, count), dtype=np.uint64)
    _batch.rows_schoolbook_128(_rows(x), _rows(y), high, low)
    words = zip(high.view(np.int64)[0].tolist(), low[0].tolist(), strict=True)
    if m is None:
        out = np.empty(count, dtype=object)
        out[:] = [(h << 64) + v for h, v in words]
        return out
    values = [((h << 64) + v) % m for h, v in words]
    return np.array(values, dtype=_INT64 if m <= INT64_LIMIT else object)


def small_kernels():
    """The module of ``product_stream`` and ``product_mod_odd`` when the kernels are ready here
    and marshal streams read back correctly (:func:`polyconv.engines._pyints.ready`), else
    None."""
    global _small
    if _small is None and jit_state.state() == "compiled" and _pyints.ready() is not None:
        _small = jit_state.kernels("_kernels_small")
    return _small


def _flat(x) -> np.ndarray:
    """``x`` (a list of ints in int64 range, or a 1-D int64 array) as a contiguous int64 array."""
    if type(x) is list:
        return np.array(x, dtype=_INT64)
    return x if x.flags.c_contiguous else x.copy()


def wide_stream(x, y, count: int) -> np.ndarray:
    """The exact product of int64 operands (at most ``2^12`` terms each, so every sum is below
    ``2^138``) as Python ints: 192-bit schoolbook sums written as a marshal stream by one
    compiled call, read by one ``marshal.loads`` (measured, 32 x 32 63-bit: 9 us against 24 us
    for two 128-bit rows and four words per value in Python).  :func:`small_kernels` must have
    returned the kernels."""
    buf = np.empty(5 + count * 31, dtype=np.uint8)  # _pyints.capacity(count, 192), inlined
    _small.product_stream(_flat(x), _flat(y), buf)
    return np.array(marshal.loads(buf), dtype=object)  # (trailing bytes are ignored)


_ODD: dict = {}  # odd modulus -> its Montgomery constants
_NO_BUFFER = np.empty(0, dtype=np.uint8)


def _odd(m: int) -> tuple:
    """``(-m^-1 mod 2^64, 2^128 mod m, 2^192 mod m)`` for an odd ``m`` (memoised)."""
    consts = _ODD.get(m)
    if consts is None:
        if len(_ODD) > 64:
            _ODD.clear()
        consts = _ODD[m] = ((-pow(m, -1, 2**64)) % 2**64, pow(2, 128, m), pow(2, 192, m))
    return consts


def tiny_arrays(a: np.ndarray, b: np.ndarray, m) -> np.ndarray | None:
    """:func:`tiny_product` of two 1-D int64 arrays (``a``, ``b`` known to be ndarrays; mode
    "full", method "auto", no ``length``: the caller checked) in one compiled call, the
    pipeline's dtype rule decided in it (``tiny_auto``); None when the kernels are not loaded
    here, the operands are not both 1-D int64, or ``m`` is not None nor an odd int below
    ``2^63`` (measured: 3 x 2 63-bit 2.4 us against 4.0 us by :func:`tiny_product`); beyond
    :data:`PRIME_WORK` modulo an NTT prime, one NTT modulo it."""
    if a.dtype != _INT64 or b.dtype != _INT64 or a.ndim != 1 or b.ndim != 1:
        return None
    kernels = _small or small_kernels()
    if kernels is None:
        return None
    n1 = a.shape[0]
    n2 = b.shape[0]
    if n1 * n2 > TINY_WORK or not n1 or not n2:
        return None
    count = n1 + n2 - 1
    if m is None:  # (module constants bound locally: each look-up costs on this path)
        out = _empty(count, _INT64)
        buf = _empty(5 + count * 31, _UINT8)  # _pyints.capacity(count, 192)
        if kernels.tiny_exact(a, b, out, buf) < 0:
            return out
        return _array(_loads(buf), _OBJECT)  # (trailing bytes are ignored)
    if type(m) is not int or not m & 1 or m < 2 or m >= INT64_LIMIT:
        return None
    if n1 * n2 > PRIME_WORK and ntt_compiled.is_ntt_prime(m):  # one NTT modulo m itself
        return ntt_compiled.convolve_mod_prime(a, b, m)  # (every such prime has 2^20 points)
    out = np.empty(count, dtype=_INT64)
    c = _ODD.get(m) or _odd(m)
    _small.tiny_auto(a, b, m, c[0], c[1], c[2], out, _NO_BUFFER)
    return out


def wide_mod(x, y, m: int, count: int) -> np.ndarray:
    """``x y mod m`` as int64 for residues ``x``, ``y`` of an odd ``m < 2^63``: 192-bit sums
    reduced in the kernel (no Python ints).  :func:`small_kernels` must have returned them."""
    consts = _odd(m)
    out = np.empty(count, dtype=_INT64)
    _small.product_mod_odd(_flat(x), _flat(y), m, consts[0], consts[1], consts[2], out)
    return out


def _compiled(x, y, m: int | None, bound: int) -> np.ndarray:
    """The product by :mod:`polyconv.engines.ntt_compiled` (Python ints out; int64 residues
    modulo ``m < 2^62``); int64 operands, kernels loaded."""
    x = np.asarray(x, dtype=_INT64)
    y = np.asarray(y, dtype=_INT64)
    if m is not None:
        return ntt_compiled.convolve_mod(x, y, m)
    return ntt_compiled.convolve_exact(x, y, bound, as_int64=False)


def _rounded(v: int) -> int:
    return (1 << v.bit_length()) - 1


def tiny_product(a, b, mode: str, method: str, modulus, length, axis) -> np.ndarray | None:
    """The product :func:`polyconv.pipeline.execute.convolve` would return, for tiny plain
    integer operands; None when the short path does not apply (the caller then plans)."""
    if (method != "auto" or mode != "full" or length is not None or (axis != -1 and axis != 0)
            or (modulus is not None and (type(modulus) is not int or modulus < 2))):
        return None
    n1 = _length(a)
    n2 = _length(b)
    if n1 * n2 > TINY_WORK or not n1 or not n2:  # before any pass over the operands
        return None
    xa = _operand(a)
    if xa is None:
        return None
    yb = _operand(b)
    if yb is None:
        return None
    x, vx, lo_x, hi_x = xa
    y, vy, lo_y, hi_y = yb
    m = modulus
    if m is not None:
        if lo_x < 0 or hi_x >= m:
            x, vx = _reduced(x, vx, m)
            lo_x, hi_x = 0, _top(x, vx)
        if lo_y < 0 or hi_y >= m:
            y, vy = _reduced(y, vy, m)
            lo_y, hi_y = 0, _top(y, vy)
        max_x, max_y = hi_x, hi_y
    else:
        max_x = hi_x if hi_x >= -lo_x else -lo_x
        max_y = hi_y if hi_y >= -lo_y else -lo_y
    terms = n1 if n1 < n2 else n2
    work = n1 * n2
    bound = terms * max_x * max_y
    if bound < INT64_LIMIT and max_x < INT64_LIMIT and max_y < INT64_LIMIT and (
            work > PYTHON_WORK or (type(x) is _ARRAY and type(y) is _ARRAY)):
        # (an all-zero side keeps the product small, but the other one must be an int64)
        out = np.convolve(x if type(x) is _ARRAY else np.array(x, dtype=_INT64),
                          y if type(y) is _ARRAY else np.array(y, dtype=_INT64))
        if m is not None:
            if m < INT64_LIMIT:
                out %= m
            elif m > INT64_LIMIT:  # the values are below 2^63 < m: already residues
                out = out.astype(object)
        elif terms * _rounded(max_x) * _rounded(max_y) >= INT64_LIMIT:
            out = out.astype(object)
        return out
    if (work > WIDE_WORK and bound >= INT64_LIMIT and -INT64_LIMIT <= min(lo_x, lo_y)
            and max(hi_x, hi_y) < INT64_LIMIT):
        if m is None or (m & 1 and m < INT64_LIMIT and not (
                work > PRIME_WORK and ntt_compiled.is_ntt_prime(m))):  # sums below 2^138
            if _small is not None or small_kernels() is not None:
                if m is None:
                    return wide_stream(x, y, n1 + n2 - 1)
                return wide_mod(x, y, m, n1 + n2 - 1)
    if work > PYTHON_WORK:
        ready = (-INT64_LIMIT <= min(lo_x, lo_y) and max(hi_x, hi_y) < INT64_LIMIT
                 and (_batch is not None or batch_kernels() is not None))  # int64, kernels loaded
        if ready and work <= 4 * PYTHON_WORK and bound < _LIMIT_128:
            return wide_rows(x, y, m, n1 + n2 - 1)
        if work > 4 * PYTHON_WORK:  # wide and not tiny: the compiled primes, else planning
            if ready and (m is None or m < ntt_compiled.KERNEL_MODULUS_LIMIT):
                return _compiled(x, y, m, bound)
            return None
    if vx is None:
        vx = x.tolist()
    if vy is None:
        vy = y.tolist()
    out = [0] * (n1 + n2 - 1)
    for i, u in enumerate(vx):
        if u:
            for j, v in enumerate(vy, i):
                out[j] += u * v
    if m is not None:
        out = [v % m for v in out]
        return np.array(out, dtype=_INT64 if m <= INT64_LIMIT else object)
    if terms * _rounded(max_x) * _rounded(max_y) < INT64_LIMIT:
        return np.array(out, dtype=_INT64)
    result = np.empty(len(out), dtype=object)
    result[:] = out
    return result
