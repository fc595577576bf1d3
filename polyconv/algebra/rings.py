"""Coefficient rings of the polynomial algebra: exact integers, integers mod m, floats.

The algorithms of :mod:`polyconv.algebra` are written once against the small :class:`_Ring`
interface; each ring decides the array dtype and how elementwise operations stay exact (or
reduced).  Every product goes through :func:`_mul` (and :func:`counting_products` can log them).
Chains of exact integer products keep intermediates in a "work form" (:class:`_Wide`): int64
while a bound proves they fit, else byte rows (:mod:`polyconv.engines._intpack`) multiplied by
Kronecker substitution (:func:`polyconv.engines.kronecker.multiply_rows`).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from ..engines import _intpack, ntt_batch
from ..engines.kronecker import multiply_rows
from ..numerics.limits import INT64_LIMIT as _INT64_LIMIT
from ..numerics.limits import max_abs
from ..pipeline.execute import convolve, convolve_integer_rows
from ..tuning.threads import THREADS
from . import small_products

# ----------------------------------------------------------------------------- product counting

_product_log: list | None = None
#: int64 products of at most this many multiply-adds whose sums fit int64 are summed directly by
#: numpy.convolve (1-4 us up to 64 x 64, against 5-10 us through the batched kernels' wrapper)
_DIRECT_WORK = 64 * 64


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
    ...     _ = inverse_series([1.0, 1.0], 100)   # 32 terms by recurrence, 2 Newton steps
    >>> len(log)
    4
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
    quick = _small_product(x, y, modulus, length, mode, magnitudes)
    if quick is not None:
        return quick
    if x.dtype.kind in "iO" and y.dtype.kind in "iO":  # integers, checked by the caller
        return convolve_integer_rows(x, y, mode=mode, modulus=modulus, length=length,
                                     magnitudes=magnitudes)
    return convolve(x, y, mode=mode, modulus=modulus, length=length)


def _small_product(x: np.ndarray, y: np.ndarray, modulus: int | None, length: int | None,
                   mode: str, magnitudes: tuple[int, int] | None) -> np.ndarray | None:
    """Short int64 products straight from :func:`polyconv.engines.ntt_batch.small_product`
    (no planning; about 5 us against 25-40 us through the planner, measured) once the kernels
    are loaded, modular ones only when the caller certified residues (``magnitudes`` both
    ``m - 1``); None when that path does not apply."""
    if mode not in ("full", "valid") or (mode == "valid" and length is not None):
        return None
    if modulus is not None and magnitudes != (modulus - 1, modulus - 1):
        return None
    n1, n2 = x.shape[0], y.shape[0]
    if (modulus is None and magnitudes is not None and n1 * n2 <= _DIRECT_WORK
            and x.dtype == np.int64 and y.dtype == np.int64
            and min(n1, n2) * magnitudes[0] * magnitudes[1] < _INT64_LIMIT):
        out = np.convolve(x, y)  # no partial sum leaves int64: direct summation, ~1 ns a term
        if mode == "valid":
            return out[min(n1, n2) - 1: max(n1, n2)]
        return out if length is None else _fit(out, length)
    keep = max(n1, n2) if mode == "valid" else length
    out = ntt_batch.small_product(x, y, modulus, keep, magnitudes=magnitudes)
    if out is None or mode == "full":
        return out
    return out[min(n1, n2) - 1:]


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

    def to_result(self, x: np.ndarray) -> np.ndarray:
        """``x`` as a public function returns it (integers: int64 when every value fits)."""
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

    def mul(self, x: np.ndarray, y: np.ndarray, *, length: int | None = None,
            mode: str = "full") -> np.ndarray:
        """Short products beyond int64 by :func:`small_products.ring_product` (no planning);
        the rest through :func:`_mul`."""
        out = small_products.ring_product(x, y, length, mode)
        if out is None:
            return _mul(x, y, None, length=length, mode=mode)
        if _product_log is not None:
            _product_log.append((x.shape[0], y.shape[0], mode, length))
        return out

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

    def to_result(self, x: np.ndarray) -> np.ndarray:
        if x.dtype != object:
            return x
        if x.ndim != 1 or not x.size:
            return x.astype(np.int64) if max_abs(x) < _INT64_LIMIT else x
        values = x.tolist()  # list min/max: C loops, no numpy object reductions
        if max(max(values), -min(values)) < _INT64_LIMIT:
            return np.array(values, dtype=np.int64)
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
        terms = min(x.shape[0], y.shape[0])
        if terms << (x.bits + y.bits) < _INT64_LIMIT:
            return _Wide.of_values(_mul(x.values(), y.values(), None, length=length,
                                        magnitudes=(1 << x.bits, 1 << y.bits)))
        if _product_log is not None:
            _product_log.append((x.shape[0], y.shape[0], "full", length))
        if x.rows is None and y.rows is None:  # short ones: one GMP product, no planning
            u = x.values()
            out = small_products.product(u, u if y is x else y.values(),
                                         x.bits + y.bits + terms.bit_length(), length)
            if out is not None:
                return _Wide(None, None, small_products.bits_of(out), out)
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
    objects: np.ndarray | None = None  # Python ints of a short chain (small_products)

    @classmethod
    def of_values(cls, x: np.ndarray) -> _Wide:
        if x.dtype == np.int64:
            top = max(int(x.max()), -1 - int(x.min())) if x.size else 0
            return cls(x, None, top.bit_length())
        if x.dtype == object and x.size:  # Python ints: byte rows only if a long product needs
            return cls(None, None, small_products.bits_of(x), x)
        rows = _intpack.values_to_rows(x)
        return cls(None, rows, _intpack.row_bits(rows))

    @property
    def shape(self) -> tuple[int, ...]:
        if self.int64 is not None:
            return self.int64.shape
        return self.rows.shape if self.rows is not None else self.objects.shape

    def values(self) -> np.ndarray:
        if self.int64 is not None:
            return self.int64
        return _intpack.rows_to_values(self.rows) if self.rows is not None else self.objects

    def as_rows(self) -> np.ndarray:
        if self.rows is not None:
            return self.rows
        if self.objects is not None:
            return _intpack.values_to_rows(self.objects)
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


def _ring_for(kind: str, modulus: int | None) -> _Ring:
    if modulus is not None:
        return _Modular(modulus)
    if kind == "integer":
        return _Integers()
    return _Floats(np.complex128 if kind == "complex" else np.float64)


def _nonzero_positions(ring: _Ring, y: np.ndarray) -> np.ndarray:
    if y.dtype == object:
        return np.array([i for i, v in enumerate(y) if not ring.is_zero(v)], dtype=np.int64)
    return np.flatnonzero(y)


def _not_invertible_message(what: str, value, ring: _Ring, target: str) -> str:
    if isinstance(ring, _Integers):
        return (f"{what} = {value} is not +1 or -1, so {target} does not have integer "
                "coefficients; pass float coefficients, or a modulus in which it is a unit")
    if isinstance(ring, _Modular):
        return (f"{what} = {value} is not invertible modulo {ring.modulus} "
                f"(gcd({value}, {ring.modulus}) != 1), so {target} does not exist mod "
                f"{ring.modulus}")
    return f"{what} is zero, so {target} is not a power series"
