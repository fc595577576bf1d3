"""Balanced limb digits of integer sequences: the split and the exact recombination.

Write every coefficient in balanced base ``2^b``, ``x_i = sum_j x_ij 2^(b j)`` with ``|x_ij| <=
2^(b-1)`` (the "splitting" of D. E. Knuth, TAOCP vol. 2, 4.3.3, applied coefficientwise; Brent &
Zimmermann, *Modern Computer Arithmetic*, section 3.3.2).  :func:`split_limbs` gives the digits as
float64 rows ready for a transform; the recombination ``sum_m P_m 2^(b m)`` of exact limb products
``P_m`` is a carry propagation in int64 followed by one byte conversion per coefficient
(:func:`recombine_objects`), or plain wrapping int64 when the caller proved the result fits
(:func:`recombine_int64`).  The products themselves are :mod:`polyconv.engines.exact_fft`'s.
"""

from __future__ import annotations

import numpy as np

from . import _intpack


def limb_count(max_abs: int, limb_bits: int) -> int:
    """Balanced limbs of ``limb_bits`` bits needed for values up to ``max_abs`` in magnitude."""
    return max(1, -(-(max_abs.bit_length() + 1) // limb_bits))


def split_limbs(x: np.ndarray, limb_bits: int, n_limbs: int) -> np.ndarray:
    """Balanced base-``2^b`` digits of each entry: ``(n_limbs, n)`` float64, ``|digit| <= 2^(b-1)``.

    Precondition: ``n_limbs >= limb_count(max|x|, limb_bits)`` and ``limb_bits <= 30``.
    Magnitudes are cut into plain digits (vectorised on 64-bit words), balanced by a carry pass
    over the limbs (``d >= 2^(b-1)`` becomes ``d - 2^b`` with a carry of 1; the top limb keeps
    its carry), and given the sign.
    """
    if x.dtype == np.int64:
        return _split_int64(x, limb_bits, n_limbs)
    words, negative = _magnitude_words(x)
    mask = (1 << limb_bits) - 1
    half = 1 << (limb_bits - 1)
    out = np.empty((n_limbs, x.shape[0]), dtype=np.float64)
    carry = np.zeros(x.shape[0], dtype=np.int64)
    for j in range(n_limbs):
        digit = _bit_field(words, j * limb_bits, limb_bits, mask) + carry
        if j < n_limbs - 1:  # the top limb keeps its carry: at most 2^(b-1) by the precondition
            carry = (digit >= half).astype(np.int64)
            digit -= carry << limb_bits
        out[j] = digit
    if negative is not None:
        out[:, negative] *= -1.0
    return out


def _split_int64(x: np.ndarray, limb_bits: int, n_limbs: int) -> np.ndarray:
    """:func:`split_limbs` for int64 by arithmetic shifts: ``q = floor((x + 2^(b-1)) / 2^b)``,
    computed as ``(x >> b) + ((x >> (b-1)) & 1)`` so that nothing overflows near ``2^63``, gives
    the balanced digit ``x - q 2^b`` in ``[-2^(b-1), 2^(b-1))``; the top limb keeps the rest."""
    out = np.empty((n_limbs, x.shape[0]), dtype=np.float64)
    shift, below, one = np.int64(limb_bits), np.int64(limb_bits - 1), np.int64(1)
    rest = x
    for j in range(n_limbs - 1):
        quotient = (rest >> shift) + ((rest >> below) & one)
        out[j] = rest - (quotient << shift)
        rest = quotient
    out[n_limbs - 1] = rest
    return out


def _magnitude_words(x: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """``|x|`` as ``(n, w)`` little-endian uint64 words, and the mask of negative entries."""
    if x.dtype.kind == "u":
        return x.astype(np.uint64).reshape(-1, 1), None
    if x.dtype.kind in "ib":
        signed = x.astype(np.int64)
        negative = signed < 0
        magnitude = signed.view(np.uint64).copy()
        magnitude[negative] = np.uint64(0) - magnitude[negative]
        return magnitude.reshape(-1, 1), negative
    values = x.tolist()
    negative = np.array([v < 0 for v in values], dtype=bool)
    width = max(1, -(-max(abs(int(v)).bit_length() for v in values) // 64)) * 8
    joined = b"".join([abs(int(v)).to_bytes(width, "little") for v in values])
    rows = np.frombuffer(joined, dtype=np.uint8).reshape(len(values), width)
    return _intpack.words_from_rows(rows), negative


def _bit_field(words: np.ndarray, offset: int, size: int, mask: int) -> np.ndarray:
    """Bits ``[offset, offset + size)`` of each row's little-endian words (``size <= 32``)."""
    index, shift = divmod(offset, 64)
    if index >= words.shape[1]:
        return np.zeros(words.shape[0], dtype=np.int64)
    field = words[:, index] >> np.uint64(shift)
    if shift + size > 64 and index + 1 < words.shape[1]:
        field |= words[:, index + 1] << np.uint64(64 - shift)
    return (field & np.uint64(mask)).astype(np.int64)


def recombine_int64(parts: np.ndarray, limb_bits: int) -> np.ndarray:
    """``sum_m parts[m] 2^(b m)`` in wrapping int64 (exact when the true sum fits)."""
    out = np.zeros(parts.shape[1], dtype=np.int64)
    for m in range(parts.shape[0] - 1, -1, -1):
        out <<= limb_bits
        out += parts[m]
    return out


def recombine_objects(parts: np.ndarray, limb_bits: int) -> np.ndarray:
    """``sum_m parts[m] 2^(b m)`` as Python ints: carries in int64, then bytes, then ints.

    A carry pass turns the parts into digits in ``[0, 2^b)`` plus a final carry in ``{-1, 0}``
    (the sign); the digits are laid out as bits of a two's-complement row per coefficient.
    """
    digits = []
    carry = np.zeros(parts.shape[1], dtype=np.int64)
    mask = (1 << limb_bits) - 1
    m = 0
    while m < parts.shape[0] or np.any((carry != 0) & (carry != -1)):
        value = carry + (parts[m] if m < parts.shape[0] else 0)
        digits.append((value & mask).astype(np.uint8 if limb_bits <= 8 else np.uint64))
        carry = value >> limb_bits
        m += 1
    bits = _digits_to_bits(digits, limb_bits, carry < 0)
    rows = np.packbits(bits, axis=1, bitorder="little")
    return _intpack.rows_to_ints(rows, signed=True).astype(object)


def _digits_to_bits(digits: list[np.ndarray], limb_bits: int, negative: np.ndarray) -> np.ndarray:
    """``(n, 8 ceil((D b + 1) / 8))`` bit matrix: digit bits, then sign fill."""
    total = len(digits) * limb_bits
    width = 8 * (total // 8 + 1)
    bits = np.empty((negative.shape[0], width), dtype=np.uint8)
    shifts = np.arange(limb_bits, dtype=np.uint64)
    for m, d in enumerate(digits):
        field = (d.astype(np.uint64)[:, None] >> shifts) & np.uint64(1)
        bits[:, m * limb_bits:(m + 1) * limb_bits] = field
    bits[:, total:] = negative[:, None]
    return bits
