"""Integer arrays <-> byte slots <-> big integers, without per-coefficient Python loops.

Helpers shared by the exact engines (they are not engines).  A *slot layout* stores value ``i`` of
a sequence in bytes ``[i*w, (i+1)*w)`` of a little-endian byte string, so that the byte string read
as one integer is ``sum_i x_i 2^(8 w i)`` -- the Kronecker evaluation at ``2^(8w)`` (common
practice, no source).  Signed values are stored in two's complement, and the packed integer is
corrected by one big subtraction (see :func:`pack`).
"""

from __future__ import annotations

import gmpy2
import numpy as np

from ..numerics.limits import INT64_LIMIT
from . import _pyints

_FIXED = "iub"


def to_objects(x: np.ndarray) -> np.ndarray:
    """A 1-D object array of Python ints holding ``x``'s values."""
    if x.dtype.kind in _FIXED:
        return x.astype(np.int64 if x.dtype.kind == "b" else x.dtype).astype(object)
    out = np.empty(x.shape[0], dtype=object)
    out[:] = [int(v) for v in x]
    return out


def pack(x: np.ndarray, width: int) -> gmpy2.mpz:
    """``Z = sum_i x_i 2^(8 width i)`` for a 1-D int64, uint64 or object array ``x``.

    Precondition: every ``|x_i| < 2^(8 width - 1) - 1``.

    The bytes written are those of ``Z`` itself in two's complement, so one ``from_bytes`` reads
    it.  Slot ``i`` of ``Z`` holds ``x_i - beta_i`` (two's complement in the slot), where the borrow
    ``beta_i`` is 1 when the part below slot ``i`` is negative, i.e. when the last nonzero
    ``x_j`` with ``j < i`` is negative (the mirror image of :func:`unpack_signed`).  Borrows come
    from one ``maximum.accumulate`` over the indices of nonzero entries.
    """
    if x.dtype == object:
        return _pack_objects(x.tolist(), 8 * width)
    borrow = _borrows(x)
    if x.dtype.kind in _FIXED:
        rows = _fixed_rows(x, borrow, width)
    else:
        flags = [0] * x.shape[0] if borrow is None else borrow.tolist()
        joined = b"".join([(int(v) - f).to_bytes(width, "little", signed=True)
                           for v, f in zip(x.tolist(), flags, strict=True)])
        rows = np.frombuffer(joined, dtype=np.uint8)
    return gmpy2.mpz.from_bytes(rows.data, "little", signed=True)


def _pack_objects(values: list, bits: int) -> gmpy2.mpz:
    """``sum_i v_i 2^(bits i)`` for Python ints / mpz by ``gmpy2.pack`` (a C loop): the positive
    and negative parts are packed apart and subtracted."""
    if all(v >= 0 for v in values):
        return gmpy2.pack(values, bits)
    positive = [v if v > 0 else 0 for v in values]
    negative = [-v if v < 0 else 0 for v in values]
    return gmpy2.pack(positive, bits) - gmpy2.pack(negative, bits)


def _borrows(x: np.ndarray) -> np.ndarray | None:
    """``beta_i``: 1 when the last nonzero entry before ``i`` is negative (None: no negatives)."""
    if x.dtype.kind in "ub":
        return None
    negative = np.asarray(x < 0, dtype=bool)
    if not negative.any():
        return None
    positions = np.where(np.asarray(x != 0, dtype=bool), np.arange(x.shape[0]), -1)
    last = np.maximum.accumulate(positions)
    before = np.empty_like(last)
    before[0] = -1
    before[1:] = last[:-1]
    return ((before >= 0) & negative[np.maximum(before, 0)]).astype(np.int64)


def _fixed_rows(x: np.ndarray, borrow: np.ndarray | None, width: int) -> np.ndarray:
    """Slots of ``x_i - beta_i`` for fixed-width ``x``: low 8 bytes wrap, higher bytes sign-fill."""
    n = x.shape[0]
    words = np.ascontiguousarray(x, dtype="<u8" if x.dtype.kind == "u" else "<i8").view("<u8")
    if borrow is not None:
        words = words - borrow.view("<u8")
    rows = np.zeros((n, width), dtype=np.uint8)
    low = min(8, width)
    rows[:, :low] = words.view(np.uint8).reshape(n, 8)[:, :low]
    if width > 8 and borrow is not None:
        negative = (x < 0) | ((x == 0) & (borrow == 1))
        rows[negative, 8:] = 0xFF
    return rows


def slot_rows(z: gmpy2.mpz, width: int, count: int) -> np.ndarray:
    """The low ``count`` slots of a non-negative ``z`` as a read-only (count, width) uint8 array."""
    nbytes = width * count
    if z.bit_length() > 8 * nbytes:
        z = gmpy2.f_mod_2exp(z, 8 * nbytes)
    return np.frombuffer(z.to_bytes(nbytes, "little"), dtype=np.uint8).reshape(count, width)


def unpack_signed(z: gmpy2.mpz, width: int, count: int) -> np.ndarray:
    """Signed slot values ``c_k`` of ``z = sum_k c_k 2^(8 width k)``, ``|c_k| < 2^(8 width - 1)``.

    Unpacking with borrow, no carry chain: the low ``k`` slots of ``z`` hold ``L_k = sum_{j<k}
    c_j 2^(8 width j)`` in two's complement, and ``|L_k| < 2^(8 width k - 1)``, so the sign of
    ``L_k`` is the top bit of slot ``k - 1``.  Slot ``k`` read as a signed number is ``c_k`` minus
    that borrow, so ``c_k = signed(slot k) + topbit(slot k - 1)``: one vectorised addition.
    Returns int64 when ``width <= 8``, else an object array of Python ints.  A negative ``z``
    is unpacked as ``-(digits of -z)`` (gmpy2 writes negative numbers' bytes about 2x slower).
    """
    if width > 64:
        return _unpack_signed_wide(z, 8 * width, count)
    if width > 8 and _pyints.ready() is not None:  # the slots and their borrows in one kernel
        rows = slot_rows(gmpy2.f_mod_2exp(z, 8 * width * count), width, count)
        return _pyints.rows_to_objects(rows, True, borrowed=True)
    if width > 16:  # up to 64 bytes, byte rows and int.from_bytes are faster (measured)
        return rows_to_ints(unpack_rows(z, width, count), signed=True)
    if z < 0:
        return -unpack_signed(-z, width, count)
    rows = slot_rows(z, width, count)
    values = rows_to_ints(rows, signed=True)
    borrow = np.flatnonzero(rows[:-1, -1] >= 0x80) + 1
    values[borrow] += 1
    return values


def _unpack_signed_wide(z: gmpy2.mpz, bits: int, count: int) -> np.ndarray:
    """Wide signed slots by offset: adding ``h = 2^(bits-1)`` to every slot puts each in
    ``[1, 2^bits)`` with no borrow between them, so ``gmpy2.unpack`` (a C loop) reads ``c_k + h``
    directly; taking ``z + offset`` modulo ``2^(bits count)`` also handles truncation and a
    negative ``z``.  The offset is built by ``gmpy2.pack`` (measured: 0.07 ms for 1024 slots of
    2016 bits; 1.3x faster overall than reading byte rows beyond 64-byte slots)."""
    half = gmpy2.mpz(1) << (bits - 1)
    shifted = gmpy2.f_mod_2exp(z + gmpy2.pack([half] * count, bits), bits * count)
    values = gmpy2.unpack(shifted, bits)
    out = np.zeros(count, dtype=object)  # slots are >= 1, so unpack returns all of them
    out[:len(values)] = [int(v - half) for v in values]
    return out


def rows_to_ints(rows: np.ndarray, signed: bool) -> np.ndarray:
    """Little-endian byte rows as integers: int64 (uint64 if unsigned) up to 8 bytes, else objects.

    Rows of at most 8 bytes go through an int64 (or uint64) view.  Wider rows become Python
    ints through a marshal stream written by a compiled kernel when the kernels are loaded
    (:func:`polyconv.engines._pyints.rows_to_objects`, ~35-45 ns a value up to 16 bytes); else
    rows of 9 to 16 bytes through two words combined by two object operations, longer rows
    through ``int.from_bytes`` on bytes slices, one call per row.
    """
    count, width = rows.shape
    if width <= 8:
        words = _rows_to_top_aligned_words(rows)
        shift = 8 * (8 - width)
        if signed:
            return words.view("<i8") >> shift
        return words >> np.uint64(shift)
    fast = _pyints.rows_to_objects(rows, signed)
    if fast is not None:
        return fast
    if width <= 16:
        low = np.ascontiguousarray(rows[:, :8]).view("<u8").reshape(count)
        high = rows_to_ints(rows[:, 8:], signed)
        return (high.astype(object) << 64) + low.astype(object)
    data = np.ascontiguousarray(rows).tobytes()  # slicing bytes beats slicing a memoryview
    out = np.empty(count, dtype=object)
    from_bytes = int.from_bytes
    out[:] = [from_bytes(data[i:i + width], "little", signed=signed)
              for i in range(0, count * width, width)]
    return out


def _rows_to_top_aligned_words(rows: np.ndarray) -> np.ndarray:
    count, width = rows.shape
    buf = np.zeros((count, 8), dtype=np.uint8)
    buf[:, 8 - width:] = rows
    return buf.view("<u8").reshape(count)


def words_from_rows(rows: np.ndarray) -> np.ndarray:
    """Non-negative byte rows as ``(count, ceil(width/8))`` little-endian uint64 words."""
    count, width = rows.shape
    n_words = -(-width // 8)
    buf = np.zeros((count, 8 * n_words), dtype=np.uint8)
    buf[:, :width] = rows
    return buf.view("<u8").reshape(count, n_words)


def reduce_words(words: np.ndarray, modulus: int) -> np.ndarray:
    """``(sum_j words[:, j] 2^(64 j)) mod modulus`` for ``modulus < 2^32``, as uint64.

    Horner's rule on 32-bit halves: with ``r < m < 2^32``, ``r 2^32 + h < 2^64`` never overflows.
    """
    m = np.uint64(modulus)
    r = np.zeros(words.shape[0], dtype=np.uint64)
    low_mask = np.uint64(0xFFFFFFFF)
    for j in range(words.shape[1] - 1, -1, -1):
        w = words[:, j]
        for half in (w >> np.uint64(32), w & low_mask):
            r = ((r << np.uint64(32)) | half) % m
    return r


#: Largest modulus (exclusive) the vectorised modular helpers below support: remainders and
#: sums of two remainders stay inside int64.
WIDE_MODULUS_LIMIT = 2**62
_M32 = np.uint64(0xFFFFFFFF)
_S32 = np.uint64(32)


def mul_wide(x: np.ndarray, y) -> tuple[np.ndarray, np.ndarray]:
    """Full 128-bit products of uint64 values as ``(high, low)`` words (schoolbook on halves)."""
    y = np.asarray(y, dtype=np.uint64)
    x0, x1 = x & _M32, x >> _S32
    y0, y1 = y & _M32, y >> _S32
    p00, p01, p10, p11 = x0 * y0, x0 * y1, x1 * y0, x1 * y1
    mid = (p00 >> _S32) + (p01 & _M32) + (p10 & _M32)
    low = (mid << _S32) | (p00 & _M32)
    high = p11 + (p01 >> _S32) + (p10 >> _S32) + (mid >> _S32)
    return high, low


class Montgomery:
    """Vectorised Montgomery reduction modulo an odd ``m < 2^62`` with radix ``2^64``.

    ``redc(high, low)`` returns ``T 2^-64 mod m`` for ``T = high 2^64 + low < m 2^64``
    (P. L. Montgomery, "Modular multiplication without trial division", Math. Comp. 44 (1985)
    519-521): with ``u = low (-m^-1) mod 2^64``, ``T + u m`` is divisible by ``2^64`` and the
    quotient is below ``2m``.  All arithmetic is uint64 numpy, 128-bit products by
    :func:`mul_wide`.
    """

    def __init__(self, modulus: int):
        if modulus % 2 == 0 or not 2 < modulus < WIDE_MODULUS_LIMIT:
            raise ValueError("Montgomery reduction needs an odd modulus below 2^62")
        self.modulus = modulus
        self.m = np.uint64(modulus)
        self.neg_inverse = np.uint64((-pow(modulus, -1, 2**64)) % 2**64)

    def redc(self, high: np.ndarray, low: np.ndarray) -> np.ndarray:
        u = low * self.neg_inverse
        u_high, _ = mul_wide(u, self.m)
        t = high + u_high + (low != 0).astype(np.uint64)
        return t - np.where(t >= self.m, self.m, np.uint64(0))

    def constant(self, value: int) -> np.uint64:
        """``value 2^64 mod m``: multiplying by it with :meth:`times` multiplies by ``value``."""
        return np.uint64((value << 64) % self.modulus)

    def times(self, x: np.ndarray, prepared: np.uint64) -> np.ndarray:
        """``x value mod m`` for ``x < m`` and ``prepared = constant(value)``."""
        return self.redc(*mul_wide(x, prepared))


def reduce_words_wide(words: np.ndarray, modulus: int) -> np.ndarray:
    """``(sum_j words[:, j] 2^(64 j)) mod m`` for odd ``m < 2^62``: Horner's rule in Montgomery
    arithmetic (one multiplication by ``2^64 mod m`` per word)."""
    mont = Montgomery(modulus)
    m = mont.m
    radix = mont.constant(pow(2, 64, modulus))
    r = words[:, -1] % m
    for j in range(words.shape[1] - 2, -1, -1):
        r = mont.times(r, radix) + words[:, j] % m
        r -= np.where(r >= m, m, np.uint64(0))
    return r


# ----------------------------------------------------------------------------- byte rows
#
# A *byte-row vector* holds ``n`` exact integers as an ``(n, w)`` uint8 array: row ``i`` is the
# little-endian two's complement of ``x_i`` in ``w`` bytes.  Products of growing integers (product
# trees, powers) keep their intermediates in this form, so no Python int is created between two
# Kronecker products (common practice, no source).


def values_to_rows(x: np.ndarray) -> np.ndarray:
    """Byte rows of a 1-D int64, uint64, bool or object array (the narrowest width holding all)."""
    n = x.shape[0]
    if x.dtype.kind in _FIXED and (x.dtype.kind != "u" or n == 0 or int(x.max()) < INT64_LIMIT):
        rows = np.ascontiguousarray(x, dtype="<i8").view(np.uint8).reshape(n, 8)
        return trim_rows(rows)
    values = x.tolist()
    fast = _pyints.values_to_rows(values)
    if fast is not None:
        return fast
    values = [int(v) for v in values]
    top = max((max(v, -v - 1).bit_length() for v in values), default=0)
    width = top // 8 + 1
    joined = b"".join([v.to_bytes(width, "little", signed=True) for v in values])
    return np.frombuffer(joined, dtype=np.uint8).reshape(n, width)


def rows_to_values(rows: np.ndarray) -> np.ndarray:
    """The integers of byte rows: int64 up to 8 bytes, else an object array of Python ints."""
    if rows.shape[1] <= 8:
        return rows_to_ints(rows, signed=True)
    return rows_to_ints(rows, signed=True).astype(object)


def row_bits(rows: np.ndarray) -> int:
    """``b`` with every ``|x_i| < 2^b`` (``x_i >= -2^b``), read from the top non-sign byte.

    Columns are scanned from the top; a negative row is read in ones' complement (``-1 - x``),
    so one pass over the highest used column (usually the last) decides.
    """
    if rows.size == 0:
        return 0
    fill = np.where(rows[:, -1] >= 0x80, np.uint8(0xFF), np.uint8(0))
    for j in range(rows.shape[1] - 1, -1, -1):
        top = int((rows[:, j] ^ fill).max())
        if top:
            return 8 * j + top.bit_length()
    return 0


def trim_rows(rows: np.ndarray) -> np.ndarray:
    """The same values in the narrowest width that holds them (a view when possible)."""
    width = row_bits(rows) // 8 + 1
    return rows[:, :width] if width < rows.shape[1] else rows


def pack_rows(rows: np.ndarray, width: int) -> gmpy2.mpz:
    """``Z = sum_i x_i 2^(8 width i)`` for byte rows of width at most ``width``.

    Precondition: every ``-2^(8 width - 1) < x_i < 2^(8 width - 1)``.  As in :func:`pack`, the
    bytes written are those of ``Z`` in two's complement: slot ``i`` holds ``x_i - beta_i``, where
    the borrow ``beta_i`` is 1 when the last nonzero ``x_j`` with ``j < i`` is negative.  Rows are
    sign-extended to ``width`` bytes, and the borrows subtracted byte by byte (a borrow moves on to
    the next byte only from a zero byte, so the loop over bytes ends after a step or two).
    """
    n, w = rows.shape
    buf = np.empty((n, width), dtype=np.uint8)
    buf[:, :w] = rows
    negative = rows[:, w - 1] >= 0x80
    if width > w:
        buf[:, w:] = np.where(negative, np.uint8(0xFF), np.uint8(0))[:, None]
    if negative.any():
        positions = np.where(rows.any(axis=1), np.arange(n), -1)
        last = np.maximum.accumulate(positions)
        before = np.empty_like(last)
        before[0] = -1
        before[1:] = last[:-1]
        _add_to_rows(buf, np.flatnonzero((before >= 0) & negative[np.maximum(before, 0)]),
                     np.uint8(0xFF))
    return gmpy2.mpz.from_bytes(buf.data, "little", signed=True)


def unpack_rows(z: gmpy2.mpz, width: int, count: int) -> np.ndarray:
    """Byte rows (width ``width``) of the low ``count`` slots of ``z = sum_i x_i 2^(8 width i)``.

    Precondition: every ``-2^(8 width - 1) <= x_i < 2^(8 width - 1)``.  The mirror image of
    :func:`pack_rows`: slot ``i`` of ``z mod 2^(8 width count)`` holds ``x_i`` minus a borrow that
    is the top bit of slot ``i - 1`` (see :func:`unpack_signed`), added back byte by byte.
    """
    rows = slot_rows(gmpy2.f_mod_2exp(z, 8 * width * count), width, count).copy()
    _add_to_rows(rows, np.flatnonzero(rows[:-1, -1] >= 0x80) + 1, np.uint8(1))
    return rows


def _add_to_rows(rows: np.ndarray, which: np.ndarray, step: np.uint8) -> None:
    """Add ``+1`` (``step = 1``) or ``-1`` (``step = 0xFF``) to the little-endian integers in
    ``rows[which]``, modulo ``2^(8 width)``: byte by byte while a carry (borrow) is left."""
    stop = np.uint8(0) if step == 1 else np.uint8(0xFF)
    for j in range(rows.shape[1]):
        if which.size == 0:
            return
        column = rows[which, j] + step
        rows[which, j] = column
        which = which[column == stop]
