"""Exact schoolbook convolution of integers.

``c[k] = sum_i a[i] b[k - i]`` in exact integer arithmetic: numpy int64 when the a-priori bound
``|c[k]| <= min(n1, n2) max|a| max|b|`` is below ``2**63`` (so no partial sum can overflow), Python
integers otherwise.  O(n1 n2): the right choice only for short operands.
"""

from __future__ import annotations

import numpy as np

from . import _intpack
from .direct import convolve_direct

INT64_LIMIT = 2**63


def convolve_exact_direct(a: np.ndarray, b: np.ndarray, keep: int | None = None) -> np.ndarray:
    """Exact full product of two 1-D integer rows (first ``keep`` entries if given).

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D int64, uint64 or object (Python ints, gmpy2.mpz) arrays.
    keep : int, optional
        Return only the first ``keep`` coefficients.

    Returns
    -------
    numpy.ndarray
        int64 when the bound proves the product fits, else an object array of Python ints.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    max_a, max_b = _intpack.max_abs(a), _intpack.max_abs(b)
    bound = min(a.shape[0], b.shape[0]) * max_a * max_b
    if bound < INT64_LIMIT and max(max_a, max_b) < INT64_LIMIT:
        out = convolve_direct(a.astype(np.int64), b.astype(np.int64))
    else:
        out = convolve_direct(_intpack.to_objects(a), _intpack.to_objects(b))
    return out if keep is None else out[:keep]


SMALL_MODULUS_LIMIT = 2**31


def one_split_fits(terms: int, modulus: int) -> bool:
    """Whether sums of ``terms`` products of a 16-bit half by a residue mod ``m`` fit int64."""
    return terms * (modulus << 16) < INT64_LIMIT
_LOW16 = np.int64(0xFFFF)
_LOW15 = np.int64(0x7FFF)


def convolve_exact_direct_mod(a: np.ndarray, b: np.ndarray, modulus: int,
                              keep: int | None = None) -> np.ndarray:
    """Schoolbook product modulo ``m < 2^31`` in int64, splitting residues into halves.

    One operand split: with ``a = a0 + 2^15 a1`` (``a0 < 2^15``, ``a1 < 2^16``), the int64
    convolutions ``a0 * b`` and ``a1 * b`` have terms below ``2^47`` and cannot overflow while
    ``min(n1, n2) 2^16 m < 2^63``; then ``c = a0 b + 2^15 ((a1 b) mod m)`` stays below ``2^63`` and
    one reduction finishes.  Longer operands split both into 16-bit halves and use three
    convolutions (Karatsuba & Ofman 1962, applied to the coefficients): ``c00 = a0 * b0``,
    ``c11 = a1 * b1`` and ``(a0 + a1) * (b0 + b1) - c00 - c11``, with terms below ``2^34``, safe
    for lengths below ``2^29``.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D int64 residues in ``[0, m)``.
    modulus : int
        ``2 <= m < 2^31``.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    """
    if keep is not None:
        a, b = a[:keep], b[:keep]
    m = np.int64(modulus)
    if one_split_fits(min(a.shape[0], b.shape[0]), modulus):
        out = np.mod(np.convolve(a >> 15, b), m)
        out <<= 15
        out += np.convolve(a & _LOW15, b)
        out = np.mod(out, m)
        return out if keep is None else out[:keep]
    a0, a1 = a & _LOW16, a >> 16
    b0, b1 = b & _LOW16, b >> 16
    low = np.convolve(a0, b0)
    high = np.convolve(a1, b1)
    middle = np.convolve(a0 + a1, b0 + b1) - low - high
    # low < n 2^32, (middle mod m) 2^16 < 2^47, (high mod m)(2^32 mod m) < 2^62: the sum stays
    # below 2^63 for n < 2^29, so one final reduction suffices
    out = low + np.mod(middle, m) * np.int64(1 << 16)
    out += np.mod(high, m) * np.int64(pow(2, 32, modulus))
    out = np.mod(out, m)
    return out if keep is None else out[:keep]
