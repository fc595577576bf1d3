"""Compiled (numba) parser of decimal numbers in a byte buffer: one column of a CSV file, or
every white-space separated number of a text file.

Each number ``[sign] digits [. digits] [e|E [sign] digits]`` is read as an exact int64
mantissa ``m`` (at most 18 digits) and a power of ten ``p``; ``m * 10^p`` (``p >= 0``) or
``m / 10^-p`` is then one correctly rounded float operation on exact operands when
``m < 2^53`` and ``|p| <= 22`` (Clinger, "How to read floating point numbers accurately",
PLDI 1990: the exact fast path), so the values equal ``float(text)``.  Anything else (more
digits, larger powers, quotes, words, a missing field) stops with a status and the caller falls
back to ``numpy.loadtxt`` (which names the bad line).  Imported only when a large file is read.
"""

from __future__ import annotations

import numpy as np
from numba import njit

OK, FALLBACK = 0, 1

_P10 = np.array([10.0 ** k for k in range(23)])


@njit(cache=True, nogil=True)  # nogil: files parse on a worker thread (delays_prefetch)
def parse_numbers(buf, delim, col, out):
    """Parse ``buf`` (uint8) into ``out``; ``delim < 0``: white-space separated numbers, else
    field ``col`` of each line split on byte ``delim``.  Returns ``(count, status)``."""
    n = buf.size
    i = 0
    count = 0
    field = 0
    content = False  # this line holds something
    got = False  # this line's field ``col`` was read
    p10 = _P10
    while i < n:
        c = buf[i]
        if c == 32 or c == 9 or c == 13:
            i += 1
            continue
        if c == 10:
            if delim >= 0 and content and not got:
                return count, FALLBACK  # a line without the field: loadtxt names it
            field = 0
            content = got = False
            i += 1
            continue
        content = True
        if delim >= 0 and c == delim:
            field += 1
            i += 1
            continue
        if delim >= 0 and field != col:
            while i < n and buf[i] != delim and buf[i] != 10:
                i += 1
            continue
        if delim >= 0 and got:
            return count, FALLBACK
        got = True
        neg = False
        if c == 45 or c == 43:
            neg = c == 45
            i += 1
        mant = 0
        digits = 0
        power = 0
        seen = False
        while i < n and 48 <= buf[i] <= 57:
            if mant != 0 or buf[i] != 48:
                digits += 1
            mant = mant * 10 + (buf[i] - 48)
            seen = True
            i += 1
        if i < n and buf[i] == 46:
            i += 1
            while i < n and 48 <= buf[i] <= 57:
                if mant != 0 or buf[i] != 48:
                    digits += 1
                mant = mant * 10 + (buf[i] - 48)
                power -= 1
                seen = True
                i += 1
        if not seen or digits > 18:
            return count, FALLBACK
        if i < n and (buf[i] == 101 or buf[i] == 69):
            i += 1
            eneg = False
            if i < n and (buf[i] == 45 or buf[i] == 43):
                eneg = buf[i] == 45
                i += 1
            e = 0
            got = False
            while i < n and 48 <= buf[i] <= 57:
                e = e * 10 + (buf[i] - 48)
                got = True
                i += 1
                if e > 400:
                    return count, FALLBACK
            if not got:
                return count, FALLBACK
            power += -e if eneg else e
        if i < n:
            t = buf[i]
            if not (t == 32 or t == 9 or t == 13 or t == 10 or (delim >= 0 and t == delim)):
                return count, FALLBACK
        if mant >= 9007199254740992 or power > 22 or power < -22:
            return count, FALLBACK
        if count >= out.size:
            return count, FALLBACK
        v = mant * p10[power] if power >= 0 else mant / p10[-power]
        out[count] = -v if neg else v
        count += 1
    if delim >= 0 and content and not got:
        return count, FALLBACK
    return count, OK
