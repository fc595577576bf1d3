"""Compiled (numba) kernels writing Python ints as a ``marshal`` stream.

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); read by
:mod:`polyconv.engines._pyints`.  The fastest route measured here from machine words to Python
ints is CPython's own ``marshal.loads`` of a list: its C loop allocates each int from 15-bit
digits (~25 ns per 130-bit value, against 130-180 ns for one ``int.from_bytes`` per row).  The
stream is ``[`` and an int32 count, then per value ``i`` and an int32 (``|x| < 2^30`` here), or
``l``, the signed int32 digit count and the little-endian 15-bit digits, the top one nonzero
(CPython's Python/marshal.c, ``w_PyLong`` / ``r_PyLong``).

Both kernels work a block of values at a time in loops over the block (which the compiler
vectorises): 32-bit words of the values, their signs and magnitudes, the 15-bit digits; then one
scalar pass writes the stream.

* :func:`garner_stream`: Garner's algorithm (Knuth, TAOCP vol. 2, 3rd ed., section 4.3.2) from
  residues, as :func:`polyconv.engines._kernels_crt.garner_words`, straight into the stream;
* :func:`rows_stream`: little-endian byte rows (two's complement or not; Kronecker slots with
  their borrows, :func:`polyconv.engines._intpack.unpack_signed`).
"""

from __future__ import annotations

import numpy as np
from numba import njit, types

from . import jit_state as _jit
from ._kernels_arith import M32 as _M32
from ._kernels_crt import BLOCK, garner_block, negative_block, pads32

CACHE = _jit.cache_enabled()

_RO_ROWS = types.Array(types.uint8, 2, "C", readonly=True)
_RO_BYTES = types.Array(types.uint8, 1, "C", readonly=True)


@njit("int64(uint8[::1], int64, int64)", cache=CACHE, inline="always")
def _put_int32(out, pos, v):
    """Little-endian int32 ``v`` at ``out[pos:pos + 4]``; returns ``pos + 4``."""
    u = np.uint64(v)
    for s in range(4):
        out[pos + s] = np.uint8((u >> np.uint64(8 * s)) & np.uint64(0xFF))
    return pos + 4


@njit("int64(uint8[::1], int64)", cache=CACHE, inline="always")
def _start(out, count):
    out[0] = 0x5B  # "[": a list of count items
    return _put_int32(out, 1, count)


@njit("void(uint64[:, ::1], int64, int64, uint8[::1], uint64[::1])", cache=CACHE,
      inline="always")
def _magnitudes(x, words, m, negative, carry):
    """Two's complement 32-bit word columns ``x[:words, :m]`` to magnitudes in place: ``~x + 1``
    where ``negative`` (``carry`` must hold ``negative`` on entry; it is clobbered)."""
    for w in range(words):
        xw = x[w]
        for c in range(m):
            t = ((xw[c] ^ _M32) + carry[c]) if negative[c] else xw[c]
            xw[c] = t & _M32
            carry[c] = t >> np.uint64(32)


@njit("void(uint64[:, ::1], int64, uint16[:, ::1])", cache=CACHE, inline="always")
def _digits15(x, m, dg):
    """``dg[d, c]``: bits ``[15 d, 15 d + 15)`` of the value with 32-bit words ``x[:, c]``
    (``x`` has a zero row above the value's words)."""
    for d in range(dg.shape[0]):
        w = (15 * d) >> 5
        off = np.uint64((15 * d) & 31)
        lo = x[w]
        hi = x[w + 1]
        row = dg[d]
        for c in range(m):
            row[c] = np.uint16(((lo[c] | (hi[c] << np.uint64(32))) >> off) & np.uint64(0x7FFF))


@njit("int64(uint16[:, ::1], uint8[::1], int64, uint8[::1], int64)", cache=CACHE,
      inline="always")
def _write(dg, negative, m, out, pos):
    """Write the ``m`` values with digits ``dg[:, c]`` and signs ``negative[c]``; returns the
    position after them."""
    nd = dg.shape[0]
    for c in range(m):
        t = nd
        while t > 0 and dg[t - 1, c] == 0:
            t -= 1
        neg = negative[c] != 0
        if t <= 2:  # below 2^30: an int32 item
            v = (np.int64(dg[0, c]) | (np.int64(dg[1, c]) << 15)) if t else np.int64(0)
            out[pos] = 0x69
            pos = _put_int32(out, pos + 1, -v if neg else v)
        else:
            out[pos] = 0x6C
            pos = _put_int32(out, pos + 1, -t if neg else t)
            for d in range(t):
                v = dg[d, c]
                out[pos] = np.uint8(v & np.uint16(0xFF))
                out[pos + 1] = np.uint8(v >> np.uint16(8))
                pos += 2
    return pos


@njit("int64(int64[:, ::1], int64[::1], int64[:, ::1], int64[:, ::1], uint32[::1], uint8[::1])",
      cache=CACHE)
def garner_stream(res, primes, inv, invq, modulus_words, out):
    """Signed CRT values of residue columns (``|c| < P/2``), written as a marshal list into
    ``out``; returns the bytes used.

    ``modulus_words`` holds ``P`` in exactly as many 32-bit words as it needs.  Per block: the
    digits; the values ``x = t_0 + p_0 (t_1 + ...)`` by Horner's rule over 32-bit words; the sign
    (``x > floor(P/2)``, decided by the digits against those of ``(P - 1)/2`` from the top); the
    magnitude ``P - x`` where negative.
    """
    k = primes.shape[0]
    count = res.shape[1]
    words = modulus_words.shape[0]
    digits = np.empty((k, BLOCK), dtype=np.uint32)
    x = np.zeros((words + 1, BLOCK), dtype=np.uint64)
    carry = np.empty(BLOCK, dtype=np.uint64)
    negative = np.empty(BLOCK, dtype=np.uint8)
    decided = np.empty(BLOCK, dtype=np.uint8)
    dg = np.empty(((32 * words + 14) // 15, BLOCK), dtype=np.uint16)
    pads = pads32(primes)
    pos = _start(out, count)
    for start in range(0, count, BLOCK):
        m = min(BLOCK, count - start)
        garner_block(res, primes, inv, invq, pads, start, m, digits)
        for w in range(words):
            x[w, :m] = 0
        for c in range(m):
            x[0, c] = np.uint64(digits[k - 1, c])
        for i in range(k - 2, -1, -1):
            pi = np.uint64(primes[i])
            for c in range(m):
                carry[c] = np.uint64(digits[i, c])
            for w in range(min(words, (30 * (k - i) + 31) // 32)):  # x < 2^(30 (k - i))
                xw = x[w]
                for c in range(m):
                    t = xw[c] * pi + carry[c]
                    xw[c] = t & _M32
                    carry[c] = t >> np.uint64(32)
        negative_block(digits, primes, m, negative, decided)
        carry[:m] = 0
        for w in range(words):  # x <- P - x where negative
            pw = np.uint64(modulus_words[w])
            xw = x[w]
            for c in range(m):
                t = pw - xw[c] - carry[c]
                carry[c] = t >> np.uint64(63)
                xw[c] = (t & _M32) if negative[c] else xw[c]
        _digits15(x, m, dg)
        pos = _write(dg, negative, m, out, pos)
    return pos


@njit(types.int64(_RO_ROWS, types.boolean, types.boolean, types.uint8[::1]), cache=CACHE)
def rows_stream(rows, signed, borrowed, out):
    """The integers of little-endian byte rows written as a marshal list into ``out``; returns
    the bytes used.

    ``signed``: rows are two's complement.  ``borrowed``: row ``r`` stands for its signed value
    plus the top bit of row ``r - 1`` (Kronecker slots).  Rows are read into 32-bit words with
    one word of sign extension, so adding the borrow cannot overflow; negative values are
    negated (``~x + 1``) to their magnitudes.
    """
    count, width = rows.shape
    words = width // 4 + 1
    x = np.zeros((words + 1, BLOCK), dtype=np.uint64)
    carry = np.empty(BLOCK, dtype=np.uint64)
    negative = np.empty(BLOCK, dtype=np.uint8)
    dg = np.empty(((32 * words + 14) // 15, BLOCK), dtype=np.uint16)
    full = width // 4
    pos = _start(out, count)
    for start in range(0, count, BLOCK):
        m = min(BLOCK, count - start)
        for c in range(m):
            row = rows[start + c]
            fill = np.uint64(0xFFFFFFFF) if signed and width and row[width - 1] >= 128 else \
                np.uint64(0)
            for w in range(full):
                b = 4 * w
                x[w, c] = (np.uint64(row[b]) | (np.uint64(row[b + 1]) << np.uint64(8))
                           | (np.uint64(row[b + 2]) << np.uint64(16))
                           | (np.uint64(row[b + 3]) << np.uint64(24)))
            v = fill
            for b in range(width - 1, 4 * full - 1, -1):
                v = ((v << np.uint64(8)) | np.uint64(row[b])) & _M32
            x[full, c] = v
            carry[c] = 1 if borrowed and start + c > 0 and rows[start + c - 1, width - 1] >= 128 \
                else 0
        for w in range(words):  # add the borrows
            xw = x[w]
            for c in range(m):
                t = xw[c] + carry[c]
                xw[c] = t & _M32
                carry[c] = t >> np.uint64(32)
        top = x[words - 1]
        for c in range(m):
            negative[c] = np.uint8(1) if signed and top[c] >= np.uint64(1 << 31) else np.uint8(0)
            carry[c] = np.uint64(negative[c])
        _magnitudes(x, words, m, negative, carry)
        _digits15(x, m, dg)
        pos = _write(dg, negative, m, out, pos)
    return pos


@njit("int64(uint64[::1], uint64[::1], uint8[::1])", cache=CACHE)
def words128_stream(high, low, out):
    """Signed 128-bit two's complement values ``high 2^64 + low`` (``high`` read as signed),
    written as a marshal list into ``out``; returns the bytes used.  As :func:`rows_stream`
    without the byte assembly (the 128-bit schoolbook sums)."""
    count = high.shape[0]
    nw = 4
    x = np.zeros((nw + 1, BLOCK), dtype=np.uint64)
    carry = np.empty(BLOCK, dtype=np.uint64)
    negative = np.empty(BLOCK, dtype=np.uint8)
    dg = np.empty(((32 * nw + 14) // 15, BLOCK), dtype=np.uint16)
    pos = _start(out, count)
    for start in range(0, count, BLOCK):
        m = min(BLOCK, count - start)
        for c in range(m):
            v, h = low[start + c], high[start + c]
            x[0, c] = v & _M32
            x[1, c] = v >> np.uint64(32)
            x[2, c] = h & _M32
            x[3, c] = h >> np.uint64(32)
            negative[c] = np.uint8(1) if h >= np.uint64(1 << 63) else np.uint8(0)
            carry[c] = np.uint64(negative[c])
        _magnitudes(x, nw, m, negative, carry)
        _digits15(x, m, dg)
        pos = _write(dg, negative, m, out, pos)
    return pos


# ------------------------------------------------------------------ and back: ints to byte rows
#
# ``marshal.dumps(list_of_ints, 2)`` (version 2: no object references) writes the same stream
# from Python ints in CPython's C loop (~26 ns per 128-bit value, against ~250 ns for computing
# the width and one ``to_bytes`` per value in Python); these kernels read it back as byte rows.


@njit(types.int64(_RO_BYTES, types.int64), cache=CACHE, inline="always")
def _get_int32(buf, pos):
    v = np.int64(0)
    for s in range(4):
        v |= np.int64(buf[pos + s]) << np.int64(8 * s)
    return v - (np.int64(1) << np.int64(32)) if v >= np.int64(1) << np.int64(31) else v


@njit(types.int64(_RO_BYTES), cache=CACHE)
def stream_width(buf):
    """Bytes of the narrowest two's complement rows holding every int of a marshal list (``top
    // 8 + 1`` with ``top`` the bit length of ``max(v, -v - 1)``), or -1 when the stream holds
    anything but a list of ints."""
    if buf.shape[0] < 5 or buf[0] != 0x5B:
        return -1
    count = _get_int32(buf, 1)
    pos = 5
    top = 0
    for _ in range(count):
        if pos + 5 > buf.shape[0]:
            return -1
        kind = buf[pos]
        n = _get_int32(buf, pos + 1)
        pos += 5
        if kind == 0x69:
            v = n if n >= 0 else -n - 1
            bits = 0
            while v:
                bits += 1
                v >>= 1
        elif kind == 0x6C and n != 0:
            nd = n if n > 0 else -n
            if pos + 2 * nd > buf.shape[0]:
                return -1
            t = np.int64(buf[pos + 2 * nd - 2]) | (np.int64(buf[pos + 2 * nd - 1]) << 8)
            bits = 15 * (nd - 1)
            power = (t & (t - 1)) == 0
            while t:
                bits += 1
                t >>= 1
            if n < 0 and power:  # -v - 1 = m - 1 is one bit shorter when m = 2^j
                for d in range(nd - 1):
                    if buf[pos + 2 * d] or buf[pos + 2 * d + 1]:
                        power = False
                        break
                if power:
                    bits -= 1
            pos += 2 * nd
        else:
            return -1
        top = max(top, bits)
    return top // 8 + 1


@njit(types.void(_RO_BYTES, types.uint8[:, ::1]), cache=CACHE)
def stream_rows(buf, rows):
    """The ints of a marshal list (checked by :func:`stream_width`) as little-endian two's
    complement byte rows of ``rows.shape[1]`` bytes each."""
    count, width = rows.shape
    pos = 5
    for r in range(count):
        kind = buf[pos]
        n = _get_int32(buf, pos + 1)
        pos += 5
        row = rows[r]
        row[:] = 0
        negative = n < 0
        if kind == 0x69:
            m = np.uint64(-n if negative else n)
            for b in range(min(width, 4)):
                row[b] = np.uint8((m >> np.uint64(8 * b)) & np.uint64(0xFF))
        else:
            nd = -n if negative else n
            acc = np.uint64(0)
            bits = np.uint64(0)
            b = 0
            for d in range(nd):
                acc |= (np.uint64(buf[pos + 2 * d]) | (np.uint64(buf[pos + 2 * d + 1])
                                                        << np.uint64(8))) << bits
                bits += np.uint64(15)
                while bits >= np.uint64(8) and b < width:
                    row[b] = np.uint8(acc & np.uint64(0xFF))
                    acc >>= np.uint64(8)
                    bits -= np.uint64(8)
                    b += 1
            if bits and b < width:
                row[b] = np.uint8(acc)
            pos += 2 * nd
        if negative:  # two's complement: ~m + 1
            carry = np.uint64(1)
            for b in range(width):
                t = (np.uint64(row[b]) ^ np.uint64(0xFF)) + carry
                row[b] = np.uint8(t & np.uint64(0xFF))
                carry = t >> np.uint64(8)
