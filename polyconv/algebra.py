"""Polynomial algebra on top of :func:`polyconv.convolve`: powers, products, inverses, division.

Every product here is one call of :func:`polyconv.convolve`, so these functions get faster whenever
the engines behind it do; the one exception is the chain of exact integer products inside
:func:`power` and :func:`product` once coefficients outgrow int64: those intermediates stay as
byte rows (:mod:`polyconv.engines._intpack`) and are multiplied by
:func:`polyconv.engines.kronecker.multiply_rows`, so Python ints are created once, at the end.
Sequences are polynomials with coefficient ``i`` that of ``x**i`` (lowest degree first, as
:func:`numpy.convolve`).  Only 1-D sequences are accepted.

Arithmetic follows the inputs, as for :func:`polyconv.convolve`:

* integers (numpy integer or bool dtypes, or object arrays of Python ints): exact.  Results are
  int64 when every coefficient fits, otherwise object arrays of Python ints;
* ``modulus=m`` (integer inputs only): coefficients in ``[0, m)``, int64 when ``m <= 2**63``;
* floats: float64 (complex128 if any input is complex).

Algorithms and sources

* :func:`power`: left-to-right binary powering (Knuth, TAOCP vol. 2, section 4.6.3), truncating
  every intermediate product to ``length`` when given.
* :func:`product`: a balanced product tree built with a heap, always multiplying the two shortest
  sequences (the Huffman-tree order; von zur Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed.,
  section 10.1 for product trees).
* :func:`inverse_series`: Newton iteration ``b <- b (2 - a b) mod x^(2k)`` (Modern Computer
  Algebra, Algorithm 9.3; Brent & Kung, J. ACM 25 (1978)), with each step written as one *middle
  product* (the coefficients ``k..2k-1`` of ``a b``, a "valid"-mode convolution) and one truncated
  product (Hanrot, Quercia & Zimmermann, "The middle product algorithm I", AAECC 14 (2004)).
* :func:`poly_divmod`: quotient from the reversed series inverse (Modern Computer Algebra,
  Algorithm 9.5), schoolbook long division for short quotients.
"""

from __future__ import annotations

import heapq
import itertools
import math
import numbers
import operator
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from .api import convolve, convolve_integer_rows
from .bounds import max_abs
from .budget import check_allocation, coefficient_bytes
from .engines import _intpack
from .engines.kronecker import multiply_rows
from .inputs import as_number_array
from .planning import THREADS

__all__ = ["power", "product", "inverse_series", "poly_divmod", "counting_products",
           "ZeroDivisorError"]

_INT64_LIMIT = 2**63
#: quotients at most this long are computed by schoolbook long division
_SCHOOLBOOK_QUOTIENT = 32


class ZeroDivisorError(ZeroDivisionError, ValueError):
    """Raised by :func:`poly_divmod` when the divisor is the zero polynomial."""


# ----------------------------------------------------------------------------- product counting

_product_log: list | None = None


@contextmanager
def counting_products() -> Iterator[list]:
    """Record every product the functions of this module compute inside the ``with`` block.

    Yields
    ------
    list of tuple
        Filled with one ``(n1, n2, mode, length)`` record per call of :func:`polyconv.convolve`
        (operand lengths, convolution mode and truncation length).  Meant for benchmarks and
        tests of the cost claims; not thread safe.

    Examples
    --------
    >>> from polyconv.algebra import counting_products, inverse_series
    >>> with counting_products() as log:
    ...     _ = inverse_series([1.0, 1.0], 8)
    >>> len(log)
    6
    """
    global _product_log
    previous, _product_log = _product_log, []
    try:
        yield _product_log
    finally:
        _product_log = previous


def _mul(x: np.ndarray, y: np.ndarray, modulus: int | None, *, length: int | None = None,
         mode: str = "full", magnitudes: tuple[int, int] | None = None) -> np.ndarray:
    """One product through :func:`polyconv.convolve` (every product of this module goes here)."""
    if _product_log is not None:
        _product_log.append((x.shape[0], y.shape[0], mode, length))
    if x.dtype.kind in "iO" and y.dtype.kind in "iO":  # integers, checked by the caller
        return convolve_integer_rows(x, y, mode=mode, modulus=modulus, length=length,
                                     magnitudes=magnitudes)
    return convolve(x, y, mode=mode, modulus=modulus, length=length)


# ----------------------------------------------------------------------------- small array helpers


def _fit(x: np.ndarray, n: int) -> np.ndarray:
    """``x`` cut or zero padded to length ``n`` (object padding holds Python ``0``)."""
    if x.shape[0] >= n:
        return x[:n]
    out = np.zeros(n, dtype=x.dtype)
    out[: x.shape[0]] = x
    return out


def _as_objects(x: np.ndarray) -> np.ndarray:
    """An object array of Python ints with ``x``'s values."""
    if x.dtype == object:
        return x
    return x.astype(object)


# ----------------------------------------------------------------------------- rings


class _Ring:
    """Coefficient arithmetic of one call: exact integers, integers mod m, or floats.

    The algorithms below are written once against this small interface; each subclass decides the
    array dtype and how to keep elementwise operations exact (or reduced).
    """

    modulus: int | None = None

    def convert(self, x: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def mul(self, x: np.ndarray, y: np.ndarray, *, length: int | None = None,
            mode: str = "full") -> np.ndarray:
        return _mul(x, y, self.modulus, length=length, mode=mode)

    def sub(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def neg(self, x: np.ndarray) -> np.ndarray:
        return self.sub(self.zeros(x.shape[0]), x)

    def scale(self, x: np.ndarray, c) -> np.ndarray:
        raise NotImplementedError

    def unit_inverse(self, c):
        """``1 / c`` in the ring, or None when ``c`` is not invertible."""
        raise NotImplementedError

    def is_zero(self, c) -> bool:
        return c == 0

    def zeros(self, n: int) -> np.ndarray:
        raise NotImplementedError

    def one(self, length: int = 1) -> np.ndarray:
        out = self.zeros(length)
        out[0] = 1
        return out

    def finish(self, x: np.ndarray) -> np.ndarray:
        return x

    # Chains of products (product trees, powers) run on a "work form" of the sequences, which
    # only mul_work and length need to understand; plain arrays by default.

    def to_work(self, x: np.ndarray):
        return x

    def from_work(self, x) -> np.ndarray:
        return x

    def mul_work(self, x, y, *, length: int | None = None):
        return self.mul(x, y, length=length)


class _Integers(_Ring):
    """Exact integers: int64 while a bound proves no overflow, Python ints (object) beyond."""

    def convert(self, x: np.ndarray) -> np.ndarray:
        if x.dtype == object:
            return np.array([int(v) for v in x], dtype=object)
        if x.dtype.kind == "u" and x.dtype.itemsize == 8 and x.size and int(x.max()) >= 2**63:
            return x.astype(object)
        return x.astype(np.int64)

    def sub(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        if x.dtype == np.int64 and y.dtype == np.int64 and (
                max_abs(x) + max_abs(y) < _INT64_LIMIT):
            return x - y
        return _as_objects(x) - _as_objects(y)

    def neg(self, x: np.ndarray) -> np.ndarray:
        if x.dtype == np.int64 and (x.size == 0 or int(x.min()) > -_INT64_LIMIT):
            return -x
        return -_as_objects(x)

    def scale(self, x: np.ndarray, c) -> np.ndarray:
        c = int(c)
        if x.dtype == np.int64 and max_abs(x) * abs(c) < _INT64_LIMIT:
            return x * c
        return _as_objects(x) * c

    def unit_inverse(self, c):
        c = int(c)
        return c if c in (1, -1) else None

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros(n, dtype=np.int64)

    def finish(self, x: np.ndarray) -> np.ndarray:
        if x.dtype == object and max_abs(x) < _INT64_LIMIT:
            return x.astype(np.int64)
        return x

    # Work form: byte rows (see polyconv.engines._intpack), so that products whose coefficients
    # outgrow int64 go from one Kronecker product to the next without creating Python ints.

    def to_work(self, x: np.ndarray) -> _Wide:
        return _Wide.of_values(x)

    def from_work(self, x: _Wide) -> np.ndarray:
        return x.values()

    def mul_work(self, x: _Wide, y: _Wide, *, length: int | None = None) -> _Wide:
        """Products that fit int64 through :func:`polyconv.convolve` (its certified float
        engines); wider ones by Kronecker substitution on the byte rows."""
        if min(x.shape[0], y.shape[0]) << (x.bits + y.bits) < _INT64_LIMIT:
            return _Wide.of_values(_mul(x.values(), y.values(), None, length=length,
                                        magnitudes=(1 << x.bits, 1 << y.bits)))
        if _product_log is not None:
            _product_log.append((x.shape[0], y.shape[0], "full", length))
        rows = multiply_rows(x.as_rows(), y.as_rows(), length, bits=(x.bits, y.bits),
                             threads=THREADS)
        return _Wide(None, rows, _intpack.row_bits(rows))


@dataclass(frozen=True, slots=True)
class _Wide:
    """Exact integers of a chain of products: an int64 array while they fit, else byte rows
    (:mod:`polyconv.engines._intpack`); ``bits`` bounds them (``-2^bits <= x < 2^bits``)."""

    int64: np.ndarray | None
    rows: np.ndarray | None
    bits: int

    @classmethod
    def of_values(cls, x: np.ndarray) -> _Wide:
        if x.dtype == np.int64:
            top = max(int(x.max()), -1 - int(x.min())) if x.size else 0
            return cls(x, None, top.bit_length())
        rows = _intpack.values_to_rows(x)
        return cls(None, rows, _intpack.row_bits(rows))

    @property
    def shape(self) -> tuple[int, ...]:
        return self.int64.shape if self.int64 is not None else self.rows.shape

    def values(self) -> np.ndarray:
        return self.int64 if self.int64 is not None else _intpack.rows_to_values(self.rows)

    def as_rows(self) -> np.ndarray:
        if self.rows is not None:
            return self.rows
        octets = np.ascontiguousarray(self.int64).view(np.uint8).reshape(-1, 8)
        return octets[:, : self.bits // 8 + 1]


class _Modular(_Ring):
    """Integers mod ``m``: int64 when ``m <= 2**63`` (vector arithmetic when it cannot overflow)."""

    def __init__(self, modulus: int):
        self.modulus = modulus
        self._int64 = modulus <= _INT64_LIMIT

    def _store(self, x: np.ndarray) -> np.ndarray:
        return x.astype(np.int64) if self._int64 and x.dtype == object else x

    def convert(self, x: np.ndarray) -> np.ndarray:
        m = self.modulus
        small = x.dtype.kind in "ib" or (x.dtype.kind == "u" and x.dtype.itemsize < 8)
        if small and m < 2**62:
            return np.mod(x.astype(np.int64), np.int64(m))
        return self._store(np.array([int(v) % m for v in x], dtype=object))

    def mul(self, x: np.ndarray, y: np.ndarray, *, length: int | None = None,
            mode: str = "full") -> np.ndarray:
        top = self.modulus - 1  # every value of this ring is a residue in [0, m)
        return _mul(x, y, self.modulus, length=length, mode=mode, magnitudes=(top, top))

    def sub(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        m = self.modulus
        if m < 2**62 and x.dtype == np.int64 and y.dtype == np.int64:
            return np.mod(x - y, np.int64(m))
        return self._store((_as_objects(x) - _as_objects(y)) % m)

    def scale(self, x: np.ndarray, c) -> np.ndarray:
        m = self.modulus
        c = int(c) % m
        if m < 2**31 and x.dtype == np.int64:
            return np.mod(x * np.int64(c), np.int64(m))
        return self._store((_as_objects(x) * c) % m)

    def unit_inverse(self, c):
        try:
            return pow(int(c), -1, self.modulus)
        except ValueError:
            return None

    def is_zero(self, c) -> bool:
        return int(c) % self.modulus == 0

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros(n, dtype=np.int64 if self._int64 else object)


class _Floats(_Ring):
    """Floating point: float64, or complex128 when some input is complex."""

    def __init__(self, dtype: np.dtype):
        self.dtype = np.dtype(dtype)

    def convert(self, x: np.ndarray) -> np.ndarray:
        return x.astype(self.dtype)

    def sub(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return x - y

    def neg(self, x: np.ndarray) -> np.ndarray:
        return -x

    def scale(self, x: np.ndarray, c) -> np.ndarray:
        return x * c

    def unit_inverse(self, c):
        return None if c == 0 else 1.0 / c

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros(n, dtype=self.dtype)


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


def _ring_for(kind: str, modulus: int | None) -> _Ring:
    if modulus is not None:
        return _Modular(modulus)
    if kind == "integer":
        return _Integers()
    return _Floats(np.complex128 if kind == "complex" else np.float64)


# ----------------------------------------------------------------------------- power


def power(a, k: int, *, modulus: int | None = None, length: int | None = None) -> np.ndarray:
    """The polynomial power ``a**k``, optionally reduced mod ``modulus`` and truncated.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first.
    k : int
        Exponent, ``k >= 0``.  ``k = 0`` gives ``[1]``.
    modulus : int, optional
        Integer ``a`` only: coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Return only the first ``length`` coefficients (zero padded when the power is shorter);
        every intermediate product is truncated to ``length`` too, so the cost depends on
        ``length``, not on ``k * len(a)``.

    Returns
    -------
    numpy.ndarray
        ``k * (len(a) - 1) + 1`` coefficients (``length`` if given).  Exact integers (int64 when
        every coefficient fits, else Python ints), ``[0, modulus)``, or float64/complex128.

    Raises
    ------
    TypeError, ValueError
        Naming ``a``, ``k``, ``modulus`` or ``length`` and what was expected.

    Notes
    -----
    Left-to-right binary powering (Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed.,
    section 4.6.3): ``floor(log2 k)`` squarings and one multiplication by ``a`` per further set bit
    of ``k``; multiplying by the short ``a`` rather than by another power keeps those products
    unbalanced and cheap.

    Examples
    --------
    >>> from polyconv.algebra import power
    >>> power([1, 1], 4).tolist()
    [1, 4, 6, 4, 1]
    >>> power([1, 1], 10, length=3).tolist()
    [1, 10, 45]
    """
    arr, kind = _sequence(a, "a")
    k = _check_exponent(k)
    m = _check_modulus(modulus, kind, "a holds")
    n = _check_length(length, required=False)
    ring = _ring_for(kind, m)
    if k == 0:
        return ring.finish(ring.one(n or 1))
    x = ring.convert(arr if n is None else arr[:n])
    total = k * (arr.shape[0] - 1) + 1 if n is None else n
    core, shift = _trim(ring, x)
    if core is None or k * shift >= total:
        _check_chain(ring, total, 0, f"power(a, k={k}), all zero")
        return ring.finish(ring.zeros(total))
    room = total - k * shift
    _check_chain(ring, total, _power_bits(ring, core, k, None if n is None else room),
                 f"power(a, k={k}{'' if n is None else f', length={n}'})")
    work = ring.to_work(core)
    powered = _power(ring, work, k, None if n is None else room)
    powered = ring.from_work(powered if powered is not work else ring.to_work(core.copy()))
    return ring.finish(_place(powered, k * shift, total))


def _trim(ring: _Ring, x: np.ndarray) -> tuple[np.ndarray | None, int]:
    """``x = x^shift core``: ``core`` without low- and high-degree zeros (None if all zero)."""
    nonzero = _nonzero_positions(ring, x)
    if nonzero.size == 0:
        return None, 0
    first, last = int(nonzero[0]), int(nonzero[-1])
    return x[first: last + 1], first


def _place(values: np.ndarray, shift: int, total: int) -> np.ndarray:
    """Length ``total``: ``values`` moved up by ``shift`` places, cut or zero padded."""
    if shift == 0 and values.shape[0] == total:
        return values
    out = np.zeros(total, dtype=values.dtype)
    part = values[: total - shift]
    out[shift: shift + part.shape[0]] = part
    return out


def _power(ring: _Ring, x: np.ndarray, k: int, n: int | None) -> np.ndarray:
    acc = x
    for bit in bin(k)[3:]:
        acc = ring.mul_work(acc, acc, length=_cut(n, 2 * acc.shape[0] - 1))
        if bit == "1":
            acc = ring.mul_work(acc, x, length=_cut(n, acc.shape[0] + x.shape[0] - 1))
    return acc


def _cut(n: int | None, full: int) -> int | None:
    """The ``length`` to ask for: ``n`` when it truncates a product of ``full`` terms."""
    return n if n is not None and n < full else None


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


def _log2_norm1(x: np.ndarray) -> float:
    """``log2 sum |x_i|`` of an integer array (0 for sums up to 1), rounded up slightly."""
    if x.dtype == object:
        total = sum(abs(int(v)) for v in x)
        return math.log2(total) if total > 1 else 0.0
    total = float(np.add.reduce(np.abs(x.astype(np.float64)))) * (1 + 2.0**-40)
    return math.log2(total) if total > 1 else 0.0


def _log2_compositions(j: int, parts: int) -> float:
    """``log2 C(j + parts - 1, j)``: the ways ``j`` splits into ``parts`` ordered terms >= 0."""
    if j <= 0 or parts <= 1:
        return 0.0
    return (math.lgamma(j + parts) - math.lgamma(j + 1) - math.lgamma(parts)) / math.log(2)


def _power_bits(ring: _Ring, core: np.ndarray, k: int, length: int | None) -> float:
    """Bits of the largest coefficient of ``core^k`` (its first ``length``): at most
    ``k log2 ||core||_1`` (each coefficient is bounded by the power of the 1-norm), and for a
    truncated power at most ``k log2 max|core| + log2 C(length - 1 + k - 1, length - 1)`` (the
    terms of coefficient ``j`` are products of ``k`` entries, one per way to split ``j``)."""
    if not isinstance(ring, _Integers):
        return 0.0
    bits = k * _log2_norm1(core)
    if length is not None:
        top = max_abs(core)
        bits = min(bits, k * math.log2(max(top, 1)) + _log2_compositions(length - 1, k))
    return bits + 1


def _product_bits(ring: _Ring, cores: list[np.ndarray], length: int | None) -> float:
    """Bits of the largest coefficient of a product of ``cores`` (as :func:`_power_bits`)."""
    if not isinstance(ring, _Integers):
        return 0.0
    bits = sum(_log2_norm1(c) for c in cores)
    if length is not None:
        tops = sum(math.log2(max(max_abs(c), 1)) for c in cores)
        bits = min(bits, tops + _log2_compositions(length - 1, len(cores)))
    return bits + 1


# ----------------------------------------------------------------------------- product


def product(seqs: Iterable, *, modulus: int | None = None, length: int | None = None) -> np.ndarray:
    """The product of many polynomials, through a balanced product tree.

    Parameters
    ----------
    seqs : iterable of array_like
        The factors, each a non-empty 1-D sequence (a 2-D array is taken row by row).  An empty
        iterable gives ``[1]``.
    modulus : int, optional
        Integer factors only: coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Return only the first ``length`` coefficients (zero padded when the product is shorter);
        factors and every partial product are truncated to ``length``.

    Returns
    -------
    numpy.ndarray
        ``sum(len(s) - 1) + 1`` coefficients (``length`` if given).  Integers give the exact
        product (int64 when every coefficient fits, else Python ints); any float factor makes it
        float64 (complex128 if a factor is complex).

    Raises
    ------
    TypeError, ValueError
        Naming ``seqs`` (``seqs[i]`` for a bad factor), ``modulus`` or ``length``.

    Notes
    -----
    The two shortest factors are multiplied first, and their product goes back into the heap
    (Huffman's merge order): factors of similar size meet, which is what fast multiplication
    needs, and ``n`` factors of total length ``N`` cost ``O(M(N) log n)`` rather than the
    ``O(n M(N))`` of multiplying them in turn.  Product trees: von zur Gathen & Gerhard, *Modern
    Computer Algebra*, 3rd ed., section 10.1.

    Examples
    --------
    >>> from polyconv.algebra import product
    >>> product([[1, 1], [1, -1], [1, 0, 1]]).tolist()
    [1, 0, 0, 0, -1]
    >>> product([]).tolist()
    [1]
    """
    factors, kind = _factors(seqs)
    m = _check_modulus(modulus, kind, "seqs hold")
    n = _check_length(length, required=False)
    ring = _ring_for(kind, m)
    if not factors:
        return ring.finish(ring.one(n or 1))
    total = sum(f.shape[0] - 1 for f in factors) + 1 if n is None else n
    trimmed = [_trim(ring, ring.convert(f if n is None else f[:n])) for f in factors]
    shift = sum(t[1] for t in trimmed)
    if any(core is None for core, _ in trimmed) or shift >= total:
        return ring.finish(ring.zeros(total))
    room = total - shift
    cores = [core[:room] for core, _ in trimmed]
    _check_chain(ring, total, _product_bits(ring, cores, None if n is None else room),
                 f"product(seqs) of {len(cores)} factors"
                 + ("" if n is None else f" with length={n}"))
    tree = _product_tree(ring, [ring.to_work(c) for c in cores], None if n is None else room)
    return ring.finish(_place(ring.from_work(tree), shift, total))


def _factors(seqs) -> tuple[list[np.ndarray], str]:
    if isinstance(seqs, (str, bytes)) or not isinstance(seqs, Iterable):
        raise TypeError(f"seqs must be an iterable of 1-D sequences (a list of coefficient "
                        f"arrays); got {type(seqs).__name__}")
    factors, kinds = [], []
    for i, s in enumerate(seqs):
        arr, kind = _sequence(s, f"seqs[{i}]",
                              hint=" (seqs is a list of polynomials: product([a]), not product(a))")
        factors.append(arr)
        kinds.append(kind)
    return factors, _combine(kinds)


def _product_tree(ring: _Ring, factors: list[np.ndarray], n: int | None) -> np.ndarray:
    counter = itertools.count()
    heap = [(f.shape[0], next(counter), f) for f in factors]
    heapq.heapify(heap)
    while len(heap) > 1:
        _, _, x = heapq.heappop(heap)
        _, _, y = heapq.heappop(heap)
        z = ring.mul_work(x, y, length=_cut(n, x.shape[0] + y.shape[0] - 1))
        heapq.heappush(heap, (z.shape[0], next(counter), z))
    return heap[0][2]


# ----------------------------------------------------------------------------- inverse series


def inverse_series(a, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of the power series ``1 / a``.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients of ``a``, lowest degree first; only the first ``length`` matter.  ``a[0]``
        must be invertible: ``+1`` or ``-1`` for exact integers (otherwise ``1/a`` does not have
        integer coefficients), a unit mod ``modulus``, non-zero for floats.
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``a`` only: compute mod ``modulus`` (any modulus; ``a[0]`` must be coprime to it).

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients ``b`` with ``a b = 1 mod x**length``: exact integers (int64 when
        every coefficient fits), ``[0, modulus)``, or float64/complex128.

    Raises
    ------
    ValueError
        If ``a[0]`` is not invertible (the message says why), or for a bad ``a``, ``length`` or
        ``modulus``.
    TypeError
        For non-numeric ``a`` or wrongly typed ``length``/``modulus``.

    Notes
    -----
    Newton iteration ``b <- b (2 - a b) mod x^(2k)``, doubling the precision each step (von zur
    Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed., Algorithm 9.3; Brent & Kung, "Fast
    algorithms for manipulating formal power series", J. ACM 25 (1978)).  Since ``a b = 1 + x^k e``
    the step is ``b <- b - x^k (b e mod x^k)``: the ``k`` needed coefficients ``e`` of ``a b`` are
    one middle product (a "valid"-mode convolution of length ``2k`` by ``k``, which needs a
    transform of length only ``2k``; Hanrot, Quercia & Zimmermann, AAECC 14 (2004)) and ``b e``
    one truncated product.  The precisions are ``length``, ``ceil(length/2)``, ... so no step
    overshoots; total cost about two products of length ``length``.

    Examples
    --------
    >>> from polyconv.algebra import inverse_series
    >>> inverse_series([1, -1, -1], 8).tolist()   # Fibonacci numbers
    [1, 1, 2, 3, 5, 8, 13, 21]
    """
    arr, kind = _sequence(a, "a")
    n = _check_length(length, required=True)
    m = _check_modulus(modulus, kind, "a holds")
    ring = _ring_for(kind, m)
    _check_chain(ring, n, 0, f"inverse_series(a, length={n})")
    x = ring.convert(arr[:n])
    first = ring.unit_inverse(x[0])
    if first is None:
        raise ValueError(_not_invertible_message("a[0]", x[0], ring, "1/a"))
    return ring.finish(_inverse(ring, x, n, first))


def _not_invertible_message(what: str, value, ring: _Ring, target: str) -> str:
    if isinstance(ring, _Integers):
        return (f"{what} = {value} is not +1 or -1, so {target} does not have integer "
                "coefficients; pass float coefficients, or a modulus in which it is a unit")
    if isinstance(ring, _Modular):
        return (f"{what} = {value} is not invertible modulo {ring.modulus} "
                f"(gcd({value}, {ring.modulus}) != 1), so {target} does not exist mod "
                f"{ring.modulus}")
    return f"{what} is zero, so {target} is not a power series"


def _precisions(n: int) -> list[int]:
    """``[1, ..., ceil(n/4), ceil(n/2), n]``: the Newton steps that end exactly at ``n``."""
    steps = [n]
    while steps[-1] > 1:
        steps.append((steps[-1] + 1) // 2)
    return steps[::-1]


#: Up to this many terms the inverse comes from the schoolbook recurrence on Python numbers:
#: about 500 multiply-adds, cheaper than the five Newton steps (ten products) it replaces.
_BASE_TERMS = 32


def _inverse_base(ring: _Ring, a: np.ndarray, n: int, first) -> np.ndarray:
    """``1/a mod x^n`` for small ``n`` by ``b_k = -b_0 sum_(i=1..k) a_i b_(k-i)`` (the
    coefficient comparison in ``a b = 1``; Knuth, TAOCP vol. 2, 4.7)."""
    coeffs = a[:n].tolist() + [0] * max(0, n - a.shape[0])
    m = ring.modulus
    b = [first]
    for k in range(1, n):
        value = -first * sum(map(operator.mul, coeffs[1:k + 1], reversed(b)))  # a_i b_(k-i)
        b.append(value % m if m is not None else value)
    return ring.finish(ring.convert(np.array(b, dtype=object)))


def _check_inverse_growth(ring: _Ring, b: np.ndarray, target: int, n: int) -> None:
    """Integer inverses grow: refuse a step to ``target`` terms whose coefficients, their bits
    extrapolated linearly from the ``len(b)`` computed so far, are over the memory budget."""
    if isinstance(ring, _Integers):
        bits = max_abs(b).bit_length() * target / b.shape[0]
        _check_chain(ring, target, bits, f"inverse_series(a, length={n}), whose "
                     f"coefficients grow, at its step to {target} terms")


def _inverse(ring: _Ring, a: np.ndarray, n: int, first) -> np.ndarray:
    """``1/a mod x^n`` by Newton iteration, given ``first = 1/a[0]``."""
    b = _inverse_base(ring, a, min(n, _BASE_TERMS), first)
    if n > b.shape[0]:  # up front: the last step's size, before any Newton step runs
        _check_inverse_growth(ring, b, n, n)
    for target in _precisions(n)[1:]:
        if target <= b.shape[0]:
            continue
        k = b.shape[0]
        _check_inverse_growth(ring, b, target, n)
        # a b = 1 + x^k e + O(x^target): e = coefficients k..target-1 of a b (middle product)
        middle = ring.mul(_fit(a, target), b, mode="valid")
        e = middle[1:]
        correction = ring.mul(b[: target - k], e, length=target - k)
        b = np.concatenate([b, ring.neg(correction)])
    return b


# ----------------------------------------------------------------------------- division


def poly_divmod(a, b, *, modulus: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Polynomial division with remainder: ``a = q b + r`` with ``deg r < deg b``.

    Parameters
    ----------
    a : array_like, 1-D
        Dividend, lowest degree first.
    b : array_like, 1-D
        Divisor.  Its highest-degree zeros (trailing zeros of the array) are stripped first; it
        must not be all zero.  Its leading coefficient must be invertible: ``+1`` or ``-1`` for
        exact integers, a unit mod ``modulus`` (any non-zero residue when ``modulus`` is prime),
        non-zero for floats.
    modulus : int, optional
        Integer ``a`` and ``b`` only: divide over the integers mod ``modulus``.

    Returns
    -------
    q : numpy.ndarray
        ``len(a) - len(b) + 1`` coefficients (``len(b)`` after stripping), or ``[0]`` when
        ``len(a) < len(b)``.
    r : numpy.ndarray
        ``len(b) - 1`` coefficients, at least one (``[0]`` when ``b`` is a constant).

    Raises
    ------
    ZeroDivisorError
        (a subclass of both ZeroDivisionError and ValueError) if ``b`` is the zero polynomial
        (mod ``modulus`` if given).
    ValueError
        If the leading coefficient of ``b`` is not invertible.  For exact integers this means it
        is not ``+-1``: the quotient would in general not have integer coefficients, and this
        function raises rather than returning rationals (pass floats, or a prime ``modulus``).
        Also for a bad ``a``, ``b`` or ``modulus``.
    TypeError
        For non-numeric input or a wrongly typed ``modulus``.

    Notes
    -----
    Short quotients (at most 32 coefficients) use schoolbook long division.  Longer ones use
    Modern Computer Algebra (von zur Gathen & Gerhard, 3rd ed.), Algorithm 9.5: with ``rev`` the
    coefficient reversal, ``rev(q) = rev(a) / rev(b) mod x^(deg a - deg b + 1)`` from
    :func:`inverse_series` and one truncated product, then ``r = a - q b`` needs only the low
    ``deg b`` coefficients (one more truncated product).

    Over the integers the inverse ``1/rev(b)`` can have much larger coefficients than ``q`` (its
    growth is set by the roots of ``b``), so the quotient is instead computed modulo ``2^B`` and
    lifted to the symmetric range; the full product ``q b`` then both proves it (``a - q b`` must
    vanish in degrees ``>= deg b``, and the quotient is unique since ``b``'s leading coefficient
    is a unit) and gives ``r``.  ``B`` starts at ``bits(max|a|) - bits(max|b|) + 4`` (the size of
    a typical quotient) and doubles until the check passes.

    Floats: the result is as accurate as the division problem allows; dividing by a ``b`` with
    roots of modulus above 1 amplifies rounding errors (with either algorithm).

    Examples
    --------
    >>> from polyconv.algebra import poly_divmod
    >>> q, r = poly_divmod([-1, 0, 0, 1], [-1, 1])    # (x^3 - 1) / (x - 1)
    >>> q.tolist(), r.tolist()
    ([1, 1, 1], [0])
    """
    arr_a, kind_a = _sequence(a, "a")
    arr_b, kind_b = _sequence(b, "b")
    kind = _combine([kind_a, kind_b])
    m = _check_modulus(modulus, kind, "a and b hold")
    ring = _ring_for(kind, m)
    x, y = ring.convert(arr_a), _strip(ring, ring.convert(arr_b))
    lead = ring.unit_inverse(y[-1])
    if lead is None:
        raise ValueError(_not_invertible_message("the leading coefficient of b", y[-1], ring,
                                                 "a / b"))
    q, r = _divmod(ring, x, y, lead)
    return ring.finish(q), ring.finish(r)


def _strip(ring: _Ring, y: np.ndarray) -> np.ndarray:
    """``y`` without its highest-degree zeros; the zero polynomial raises ZeroDivisorError."""
    nonzero = _nonzero_positions(ring, y)
    if nonzero.size == 0:
        where = f" modulo {ring.modulus}" if ring.modulus is not None else ""
        raise ZeroDivisorError(f"b is the zero polynomial{where}: division by zero")
    return y[: nonzero[-1] + 1]


def _nonzero_positions(ring: _Ring, y: np.ndarray) -> np.ndarray:
    if y.dtype == object:
        return np.array([i for i, v in enumerate(y) if not ring.is_zero(v)], dtype=np.int64)
    return np.flatnonzero(y)


def _divmod(ring: _Ring, a: np.ndarray, b: np.ndarray, lead) -> tuple[np.ndarray, np.ndarray]:
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    if qlen <= 0:
        return ring.zeros(1), _fit(a, max(d, 1))
    if d == 0:
        return ring.scale(a, lead), ring.zeros(1)
    if qlen <= _SCHOOLBOOK_QUOTIENT:
        return _divmod_schoolbook(ring, a, b, lead)
    if isinstance(ring, _Integers):
        return _divmod_integers(a, b)
    return _divmod_newton(ring, a, b)


def _divmod_schoolbook(ring: _Ring, a: np.ndarray, b: np.ndarray,
                       lead) -> tuple[np.ndarray, np.ndarray]:
    """Long division, one quotient coefficient per step (highest first)."""
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    r = a.copy()
    q = ring.zeros(qlen)
    for i in range(qlen - 1, -1, -1):
        c = ring.scale(r[i + d: i + d + 1], lead)
        q = _set(q, i, c[0])
        r = np.concatenate([r[:i], ring.sub(r[i: i + d + 1], ring.scale(b, c[0])), r[i + d + 1:]])
    return q, r[:d]


def _set(x: np.ndarray, i: int, value) -> np.ndarray:
    """``x`` with ``x[i] = value``, widened to Python ints if ``value`` does not fit int64."""
    if x.dtype == np.int64 and not -_INT64_LIMIT <= int(value) < _INT64_LIMIT:
        x = x.astype(object)
    x[i] = value
    return x


def _quotient_newton(ring: _Ring, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """MCA Algorithm 9.5: ``rev(q) = rev(a) / rev(b) mod x^qlen`` (``b``'s leading coefficient
    must be a unit of ``ring``)."""
    d = b.shape[0] - 1
    qlen = a.shape[0] - d
    rev_b = b[::-1][:qlen].copy()
    inv = _inverse(ring, rev_b, qlen, ring.unit_inverse(rev_b[0]))
    rev_q = ring.mul(a[::-1][:qlen].copy(), inv, length=qlen)
    return rev_q[::-1].copy()


def _divmod_newton(ring: _Ring, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    d = b.shape[0] - 1
    q = _quotient_newton(ring, a, b)
    r = ring.sub(a[:d], ring.mul(q, b, length=d))
    return q, r


def _divmod_integers(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact division by a ``b`` with leading coefficient ``+-1``: quotient mod ``2^B``, lifted
    to the symmetric range and proved by the full product ``q b`` (which also gives ``r``)."""
    integers = _Integers()
    d = b.shape[0] - 1
    # a guess, doubled until the product proves it: the quotient's coefficients are typically
    # about |a| / |b| (a = q b + r with random q, b: |a| ~ sqrt(n) |q| |b|); 4 bits of margin
    bits = max(8, max_abs(a).bit_length() - max_abs(b).bit_length() + 4)
    while True:
        ring = _Modular(1 << bits)
        q_mod = _quotient_newton(ring, ring.convert(a), ring.convert(b))
        q = _symmetric(q_mod, 1 << bits)
        diff = integers.sub(a, integers.mul(q, b))
        if not np.any(diff[d:] != 0):
            return q, diff[:d]
        bits *= 2


def _symmetric(x: np.ndarray, m: int) -> np.ndarray:
    """Residues ``x`` in ``[0, m)`` mapped to ``[-m/2, m/2)``."""
    half = m // 2
    if x.dtype == np.int64 and m < _INT64_LIMIT:
        return np.where(x >= half, x - np.int64(m), x)
    return np.array([int(v) - m if v >= half else int(v) for v in x], dtype=object)
