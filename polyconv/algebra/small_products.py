"""Short exact integer products of the algebra without planning: one GMP product, or 128-bit rows.

The chains of :mod:`polyconv.algebra` (powers, product trees over the integers, Newton steps of
``inverse_series``, the base of the exact quotient) ask for many short products whose
coefficients are beyond int64 but whose packed size is small (a few thousand to a few hundred
thousand bits).  Through :func:`polyconv.convolve` each costs 40-400 us of planning, byte-row
packing and engine dispatch (measured: a 31 x 31 product of 32-bit coefficients 67 us, a 32 x 32
product of 450- by 900-bit coefficients 410 us) against 1-30 us of arithmetic.  Here:

* :func:`product_values`: Kronecker substitution (von zur Gathen & Gerhard, *Modern Computer
  Algebra*, 3rd ed., section 8.4) on Python ints: the operands are written into ``w``-bit slots
  with an offset ``h = 2^(w-1)`` (``sum_i (x_i + h) 2^(w i)`` by ``gmpy2.pack``, minus the packed
  offsets), multiplied once by GMP, and read back the same way: adding ``h`` to every slot of the
  product puts each coefficient ``c_k + h`` in ``[1, 2^w)`` when ``|c_k| < 2^(w-1)``, so
  ``gmpy2.unpack`` reads the slots with no borrows (common practice, no source);
* short int64 products whose sums stay below ``2^127`` go to the compiled 128-bit schoolbook
  rows (:func:`polyconv.pipeline.small.wide_rows`) when the kernels are loaded;
* products of at least :data:`WIDE_MIN_LENGTH` coefficients on both sides go to the
  multi-modular engine (:func:`polyconv.engines.ntt_wide.convolve_wide`) when the kernels are
  loaded and it takes them: measured 0.4-0.9x the GMP product from there (squarings and
  products, 200-1600-bit coefficients, n = 128..512).

Results are lists of Python ints (never gmpy2.mpz in numpy arrays: an object array of 61 mpz
costs 47 us to fill against 1 us for ints, measured).
"""

from __future__ import annotations

from functools import lru_cache

import gmpy2
import numpy as np

from ..engines import _pyints, ntt_wide, ntt_wide_power
from ..numerics.limits import INT64_LIMIT, max_abs
from ..pipeline import small
from ..tuning.threads import THREADS

#: Products whose packed operands hold at most this many bits each take :func:`product_values`
#: (beyond, the planned engines' byte rows and two-point scheme on two threads).  Measured,
#: power over Z, ms at limits 2^17 / 2^19 / 2^21 / 2^23, busy machine, best of 7 interleaved:
#: 16 terms of 64 bits ^50 15.6 / 11.7 / 5.9 / 9.0; 64 terms of 64 bits ^8 1.18 / 0.71 / 0.65 /
#: 0.63; 256 terms of 64 bits ^4 1.54 / 0.87 / 0.78 / 0.76 (the helper thread of the two-point
#: scheme finds no free core when the machine is busy).
SMALL_PACKED_BITS = 2**21
#: From this many bits per packed operand :func:`product_values` evaluates at two points (two
#: products of half the size; GMP's cost per bit grows with the size).
TWO_POINT_BITS = 2**18
#: int64 products with at most this many multiply-adds use the 128-bit rows (beyond, one GMP
#: product is faster: measured, 511 x 511 of 40-bit coefficients, rows 300 us, GMP 150 us).
ROWS_128_WORK = 128 * 128
#: Products with at least this many coefficients in each operand go to the multi-modular engine
#: when its kernels are loaded (measured, ntt-wide / GMP, square and product, 200 / 500 / 1000 /
#: 1600 bits: n = 64 0.97-0.99 / 0.83-0.85 / 0.88-0.91 / 0.88-1.06; n = 128 0.65 / 0.61-0.62 /
#: 0.63-0.69 / 0.75-0.90; n = 256-512 0.42-0.92).
WIDE_MIN_LENGTH = 96
#: :func:`power_values` from bounds of this many bits or powers of this many terms (below, the
#: chain's first products stay in int64 and win: measured, us direct / chain, 16 x 16-bit ^4
#: 47 / 34, 32 x 16-bit ^4 53 / 47; 64 x 16-bit ^4 68 / 78, 16 x 16-bit ^8 59 / 81, 16 x
#: 64-bit ^3 51 / 53, 8 x 64-bit ^8 64 / 76).
POWER_MIN_BITS = 128
POWER_MIN_TERMS = 192


@lru_cache(maxsize=128)
def _offsets(count: int, w: int) -> gmpy2.mpz:
    """``sum_(i < count) 2^(w-1) 2^(w i)``: the packed offsets of ``count`` slots."""
    return gmpy2.pack([gmpy2.mpz(1) << (w - 1)] * count, w)


def _packed(values: list, w: int, h: int) -> gmpy2.mpz:
    return gmpy2.pack([v + h for v in values], w) - _offsets(len(values), w)


def is_small(n1: int, n2: int, bits: int) -> bool:
    """Whether a product of ``n1`` by ``n2`` coefficients bounded by ``2^bits`` is short enough
    for :func:`product_values`."""
    return max(n1, n2) * (bits + 1) <= SMALL_PACKED_BITS


def product_values(x: list, y: list, bits: int, count: int | None = None) -> list:
    """The first ``count`` (default all) coefficients of ``x * y``, exactly.

    Parameters
    ----------
    x, y : list of int
        Coefficients (Python ints or gmpy2.mpz), lowest degree first, non-empty.
    bits : int
        A bound: every ``|x_i|``, ``|y_j|`` and every product coefficient is below ``2^bits``
        (``min(n1, n2) max|x| max|y| < 2^bits`` suffices).
    count : int, optional
        Coefficients wanted (at most ``n1 + n2 - 1``).

    Returns
    -------
    list of int
    """
    n = len(x) + len(y) - 1
    count = n if count is None else min(count, n)
    w = bits + 1
    if max(len(x), len(y)) * w >= TWO_POINT_BITS:
        return _two_point(x, y, bits, count)
    h = 1 << bits
    packed = _packed(x, w, h)
    z = gmpy2.square(packed) if y is x else packed * _packed(y, w, h)
    return _digits(z, w, count)


def _digits(z: gmpy2.mpz, w: int, count: int) -> list:
    """The signed ``w``-bit slots ``0..count-1`` of ``z`` (each in ``(-2^(w-1), 2^(w-1))``)."""
    h = 1 << (w - 1)
    digits = gmpy2.unpack(gmpy2.f_mod_2exp(z + _offsets(count, w), w * count), w)
    return [int(d) - h for d in digits]  # every slot is >= 1: unpack returns all count


def _two_point(x: list, y: list, bits: int, count: int) -> list:
    """:func:`product_values` by evaluation at ``2^s`` and ``-2^s`` with ``2s >= bits + 1``
    (D. Harvey, J. Symbolic Comput. 44 (2009), "KS2"): ``x(+-2^s) = X_e +- 2^s X_o`` from
    the even and odd coefficients packed in ``2s``-bit slots, two products of half the size,
    and ``(z_+ + z_-) / 2``, ``(z_+ - z_-) / 2^(s+1)`` are the even and odd coefficients in
    ``2s``-bit slots."""
    s = (bits + 2) // 2
    w = 2 * s
    h = 1 << (w - 1)

    def at_both(v: list) -> tuple:
        even = _packed(v[0::2], w, h)
        odd = _packed(v[1::2], w, h) << s if len(v) > 1 else 0
        return even + odd, even - odd

    xp, xm = at_both(x)
    if y is x:
        zp, zm = gmpy2.square(xp), gmpy2.square(xm)
    else:
        yp, ym = at_both(y)
        zp, zm = xp * yp, xm * ym
    out = [0] * count
    out[0::2] = _digits((zp + zm) >> 1, w, (count + 1) // 2)
    if count > 1:
        out[1::2] = _digits((zp - zm) >> (s + 1), w, count // 2)
    return out


def objects(values: list) -> np.ndarray:
    """A 1-D object array holding ``values`` (Python ints)."""
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def bits_of(values) -> int:
    """``b`` with every ``|v| < 2^b`` (a list or an object array of Python ints)."""
    if isinstance(values, np.ndarray):
        values = values.tolist()
    return max(max(values), -min(values)).bit_length() if values else 0


def product(x: np.ndarray, y: np.ndarray, bits: int, count: int | None = None
            ) -> np.ndarray | None:
    """The product (first ``count`` coefficients, zero padded beyond the full product) of 1-D
    integer arrays (int64 or Python ints) as an object array, when short (:func:`is_small`; or
    int64 operands for the 128-bit rows with the kernels loaded); None otherwise.  ``bits`` as
    in :func:`product_values`."""
    n1, n2 = x.shape[0], y.shape[0]
    full = n1 + n2 - 1
    out = None
    if (bits < 127 and x.dtype == np.int64 and y.dtype == np.int64
            and n1 * n2 <= ROWS_128_WORK and small.batch_kernels() is not None):
        out = small.wide_rows(x, y, None, full if count is None else min(count, full))
    elif min(n1, n2) >= WIDE_MIN_LENGTH and _pyints.ready() is not None:
        # the bound 2^bits - 1 proves the prime count; None when the engine declines
        out = ntt_wide.convolve_wide(x, x if y is x else y, (1 << bits) - 1, count)
    if out is None:
        if not is_small(n1, n2, bits):
            return None
        xs = x.tolist()
        out = objects(product_values(xs, xs if y is x else y.tolist(), bits, count))
    if count is not None and count > full:  # zero padded, as convolve(length=) does
        out = np.concatenate([out, np.zeros(count - full, dtype=object)])
    return out


def ring_product(x: np.ndarray, y: np.ndarray, length: int | None, mode: str
                 ) -> np.ndarray | None:
    """The exact ring's product (``mode`` "full", truncated to ``length``, or "valid") of 1-D
    int64 / object arrays when its bound ``min(n1, n2) max|x| max|y|`` is beyond int64 and
    :func:`product` takes it; None otherwise (int64 products and long ones are planned)."""
    n1, n2 = x.shape[0], y.shape[0]
    if not (mode == "full" or (mode == "valid" and length is None)) or (
            x.dtype != object and y.dtype != object and max(n1, n2) > 512):
        return None
    bound = min(n1, n2) * max_abs(x) * max_abs(y)
    if bound < INT64_LIMIT:
        return None
    out = product(x, y, bound.bit_length(), length if mode == "full" else max(n1, n2))
    if out is None or mode == "full":
        return out
    return out[min(n1, n2) - 1:]



def power_values(x: np.ndarray, k: int, length: int | None = None) -> np.ndarray | None:
    """``x^k`` (every coefficient) of a 1-D int64 or object array as an object array, when the
    kernels are loaded and the coefficient bound ``||x||_1^k`` (the triangle inequality) has at
    least :data:`POWER_MIN_BITS` bits or the power :data:`POWER_MIN_TERMS` terms; None otherwise
    and for a truncated power (``length`` given): the caller runs its chain of products."""
    if length is not None or k < 2 or x.ndim != 1 or not x.size or _pyints.ready() is None:
        return None
    bound = sum(abs(v) for v in x.tolist()) ** k
    if bound < INT64_LIMIT or (bound.bit_length() < POWER_MIN_BITS
                               and k * (x.shape[0] - 1) + 1 < POWER_MIN_TERMS):
        return None
    return ntt_wide_power.power_wide(x, k, bound, THREADS)
