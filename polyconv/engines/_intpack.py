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

_FIXED = "iub"


def max_abs(x: np.ndarray) -> int:
    """Largest ``|x[i]|`` as a Python int (0 for an empty array; no int64 overflow)."""
    if x.size == 0:
        return 0
    if x.dtype.kind in _FIXED:
        return max(abs(int(x.max())), abs(int(x.min())))
    return int(max(abs(int(x.max())), abs(int(x.min()))))


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
    borrow = _borrows(x)
    if x.dtype.kind in _FIXED:
        rows = _fixed_rows(x, borrow, width)
    else:
        flags = [0] * x.shape[0] if borrow is None else borrow.tolist()
        joined = b"".join([(int(v) - f).to_bytes(width, "little", signed=True)
                           for v, f in zip(x.tolist(), flags, strict=True)])
        rows = np.frombuffer(joined, dtype=np.uint8)
    return gmpy2.mpz.from_bytes(rows.data, "little", signed=True)


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
    if z < 0:
        return -unpack_signed(-z, width, count)
    rows = slot_rows(z, width, count)
    values = rows_to_ints(rows, signed=True)
    borrow = np.flatnonzero(rows[:-1, -1] >= 0x80) + 1
    values[borrow] += 1
    return values


def unpack_unsigned(z: gmpy2.mpz, width: int, count: int) -> np.ndarray:
    """Slot values of a ``z`` whose slots all hold values in ``[0, 2^(8 width))``."""
    return rows_to_ints(slot_rows(z, width, count), signed=False)


def rows_to_ints(rows: np.ndarray, signed: bool) -> np.ndarray:
    """Little-endian byte rows as integers: int64 (uint64 if unsigned) up to 8 bytes, else objects.

    Rows of at most 8 bytes go through an int64 (or uint64) view; rows of 9 to 16 bytes through
    two words combined by two object operations; longer rows through ``int.from_bytes`` on
    memoryview slices, one call per row.
    """
    count, width = rows.shape
    if width <= 8:
        words = _rows_to_top_aligned_words(rows)
        shift = 8 * (8 - width)
        if signed:
            return words.view("<i8") >> shift
        return words >> np.uint64(shift)
    if width <= 16:
        low = np.ascontiguousarray(rows[:, :8]).view("<u8").reshape(count)
        high = rows_to_ints(rows[:, 8:], signed)
        return (high.astype(object) << 64) + low.astype(object)
    data = memoryview(np.ascontiguousarray(rows).data).cast("B")
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
