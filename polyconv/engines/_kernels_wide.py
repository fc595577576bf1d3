"""Compiled (numba) kernels of the wide multi-modular engine (:mod:`polyconv.engines.ntt_wide`).

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); every kernel
has one explicit signature.  The engine's two matrix products run in float64 BLAS; these kernels
do the passes around them:

* :func:`stream_digits`: the ints of a ``marshal`` list (CPython's Python/marshal.c: ``i`` and an
  int32, or ``l``, a signed int32 digit count and little-endian 15-bit digits) as a matrix of
  signed 15-bit digits, one column per value (the operands' side of the residue product);
* :func:`rows_products`: row ``i`` of ``yf`` is ``a b mod p_i`` (times a constant), one NTT
  product per prime with the transforms of :mod:`polyconv.engines._kernels_ntt` and the stacked
  tables, and the CRT's rounded quotient row;
* :func:`lanes_direct`: the same rows for short products by the schoolbook sum, the primes
  side by side in SIMD lanes;
* :func:`rows_power`: row ``i`` of ``out`` is ``a[i]^e mod p_i``: one forward transform, the
  ``e``-th power of every spectral value (left-to-right binary powering, Knuth, TAOCP vol. 2,
  section 4.6.3: the convolution theorem turns the power of the polynomial into pointwise
  powers) and one inverse transform per prime;
* :func:`crt_stream`: signed column sums of 15-bit digit weights (the CRT matrix product) to
  digits by carry propagation, the sign from the last carry, magnitudes, and the ``marshal``
  stream of the Python ints (the format of :mod:`polyconv.engines._kernels_stream`).
"""

from __future__ import annotations

import sys

import numpy as np
from numba import njit, types

from . import jit_state as _jit
from ._kernels_ntt import (
    forward,
    inverse,
    load_residues,
    pointwise,
    product_mod_prime,
    store_residues,
)
from ._kernels_stream import _get_int32, _put_int32, _start

CACHE = _jit.cache_enabled()

_RO_BYTES = types.Array(types.uint8, 1, "C", readonly=True)
_RO_F64 = types.Array(types.float64, 2, "C", readonly=True)

#: Values per block of :func:`crt_stream` (its loops run over a block's columns).
BLOCK = 128
_MASK = np.int64(0x7FFF)
#: The stream's digits are little-endian 16-bit words: stored as such on little-endian machines.
_LITTLE = sys.byteorder == "little"


@njit(types.void(_RO_BYTES, types.float64[:, ::1]), cache=CACHE)
def stream_digits(buf, out):
    """``out[c, d]``: digit ``d`` (bits ``[15 d, 15 d + 15)``) of ``|v_c|``, negated when
    ``v_c < 0``, for the ints ``v_c`` of a marshal list (checked by
    :func:`polyconv.engines._kernels_stream.stream_width`; ``out`` has a column per digit of
    the widest value)."""
    count, nd = out.shape
    pos = 5
    for c in range(count):
        kind = buf[pos]
        n = _get_int32(buf, pos + 1)
        pos += 5
        sign = -1.0 if n < 0 else 1.0
        row = out[c]
        row[:] = 0.0
        if kind == 0x69:
            m = -n if n < 0 else n
            d = 0
            while m and d < nd:
                row[d] = sign * float(m & _MASK)
                m >>= 15
                d += 1
        else:
            digits = -n if n < 0 else n
            used = min(digits, nd)
            if _LITTLE:  # the digits as little-endian 16-bit words (any alignment)
                words = buf[pos:pos + 2 * used].view(np.uint16)
                for d in range(used):
                    row[d] = sign * float(words[d])
            else:
                for d in range(used):
                    row[d] = sign * float(np.int64(buf[pos + 2 * d])
                                          | (np.int64(buf[pos + 2 * d + 1]) << 8))
            pos += 2 * digits


@njit("void(float64[:, ::1], int64, boolean, uint64[::1], uint32[:, ::1], uint32[:, ::1], "
      "uint32[:, ::1], uint32[:, ::1], uint64[::1], uint64[::1], uint64[::1], float64[::1], "
      "float64[:, ::1], float64[::1])", cache=CACHE, nogil=True)
def rows_products(r, n1, square, primes, tw, twq, itw, itwq, p_neg_inv, f, fq, inv, yf, t):
    """``yf[i] = (a b f_i' mod p_i)[:yf.shape[1]]`` for every prime, and ``t += sum_i yf[i]
    inv[i]`` (the CRT's quotient, before rounding), with ``a = r[i, :n1]`` and ``b = r[i, n1:]``
    (``square``: ``b`` is ``a``): integer residue sums below ``2^53`` in float64, reduced inside.
    Releases the GIL (a helper thread may run some of the primes).
    Row ``i`` of the stacked tables (``tw.shape[1]``-point transforms) and the constants belong
    to ``primes[i]``; ``f`` is the transform's scale factor times any constant the caller folds
    in (the CRT's ``(P/p_i)^-1``)."""
    n = tw.shape[1]
    k = primes.shape[0]
    count = yf.shape[1]
    fa = np.empty(n, dtype=np.uint32)
    fb = np.empty(n, dtype=np.uint32)
    ra = np.empty(n1, dtype=np.int64)
    rb = np.empty(max(1, r.shape[1] - n1), dtype=np.int64)
    y = np.empty(count, dtype=np.int64)
    for i in range(k):
        row = r[i]
        for j in range(n1):
            ra[j] = np.int64(row[j])
        if not square:
            for j in range(rb.shape[0]):
                rb[j] = np.int64(row[n1 + j])
        product_mod_prime(ra, ra if square else rb, primes[i], tw[i], twq[i], itw[i], itwq[i],
                          p_neg_inv[i], f[i], fq[i], fa, fb, y)
        out = yf[i]
        w = inv[i]
        for c in range(count):
            v = float(y[c])
            out[c] = v
            t[c] += v * w


#: Lanes of the direct products' accumulators are padded to a multiple of this (one AVX-512
#: register of uint64; the padding lanes hold zeros).
LANE_PAD = 8
#: Products summed in a uint64 lane between folds: after a fold a lane is below ``2^62 + 2^32``,
#: and ``12 (2^30 - 1)^2 + 2^62 + 2^32 < 2^64`` (every prime is below ``2^30``).
FOLD_EVERY = 12
_LOW32 = np.uint64(0xFFFFFFFF)
_SHIFT32 = np.uint64(32)


@njit(cache=CACHE, inline="always")
def _reduced(v, p, inv):
    """``v mod p`` in ``[0, p)`` for an int64 ``|v| < 2^63`` and ``p < 2^30`` (a float64
    quotient estimate: ``|v / p| < 2^34``, so three roundings leave it within ``2^-18`` and its
    floor off by at most one; then one correction each way)."""
    r = v - np.int64(np.floor(float(v) * inv)) * p
    r = r + p if r < 0 else r
    return r - p if r >= p else r


@njit(cache=CACHE, inline="always")
def _fold(v, c):
    """``v = h 2^32 + l`` to ``h (2^32 mod p) + l`` (``c = 2^32 mod p < 2^30``): the same residue,
    below ``2^62 + 2^32``."""
    return (v >> _SHIFT32) * c + (v & _LOW32)


@njit(cache=CACHE, nogil=True)
def _lane_product(x, y, fold, p, inv, k, out):
    """``out[j, i] = (x * y)_j mod p_i`` for ``j < out.shape[0]`` and the first ``k`` lanes:
    schoolbook sums of residues below ``2^30`` in uint64 lanes, folded every
    :data:`FOLD_EVERY` terms (:func:`_fold`, exact modulo ``p_i``), four terms per pass."""
    nx, kp = x.shape
    ny = y.shape[0]
    acc = np.empty(kp, dtype=np.uint64)
    for j in range(out.shape[0]):
        i = max(0, j - ny + 1)
        hi = min(j, nx - 1)
        acc[:] = 0
        passes = 0
        while i + 3 <= hi:
            x0, x1, x2, x3 = x[i], x[i + 1], x[i + 2], x[i + 3]
            y0, y1, y2, y3 = y[j - i], y[j - i - 1], y[j - i - 2], y[j - i - 3]
            for lane in range(kp):
                acc[lane] += (np.uint64(x0[lane]) * np.uint64(y0[lane])
                              + np.uint64(x1[lane]) * np.uint64(y1[lane])
                              + np.uint64(x2[lane]) * np.uint64(y2[lane])
                              + np.uint64(x3[lane]) * np.uint64(y3[lane]))
            i += 4
            passes += 1
            if passes * 4 == FOLD_EVERY:
                for lane in range(kp):
                    acc[lane] = _fold(acc[lane], fold[lane])
                passes = 0
        while i <= hi:  # at most 3 more terms: 8 + 3 <= FOLD_EVERY since the last fold
            u, v = x[i], y[j - i]
            for lane in range(kp):
                acc[lane] += np.uint64(u[lane]) * np.uint64(v[lane])
            i += 1
        row = out[j]
        for lane in range(k):
            row[lane] = _reduced(np.int64(_fold(acc[lane], fold[lane])), p[lane], inv[lane])


@njit(cache=CACHE, nogil=True)
def _load_lanes(src, p, s, inv, scaled, dst):
    """``dst[i, lane] = src[i, lane] mod p_lane`` (times ``s_lane`` if ``scaled``), in
    ``[0, p)``, for the first ``len(p)`` lanes (the padding lanes keep their zeros)."""
    k = p.shape[0]
    for i in range(src.shape[0]):
        row, out = src[i], dst[i]
        for lane in range(k):
            v = _reduced(np.int64(row[lane]), p[lane], inv[lane])
            if scaled:
                v = _reduced(v * s[lane], p[lane], inv[lane])
            out[lane] = np.uint32(v)


@njit(types.void(_RO_F64, types.int64, types.boolean, types.uint64[::1], types.uint64[::1],
                 types.float64[::1], types.float64[:, ::1]), cache=CACHE, nogil=True)
def lanes_direct(r, n1, square, primes, scale, inv, yf):
    """``yf[i, j] = c_j s_i mod p_i`` for every prime (as float64) and ``yf[k, j] = round(sum_i
    yf[i, j] / p_i)`` (the CRT's quotient), with ``c = a * b`` by schoolbook sums, the
    primes side by side in SIMD lanes (:func:`_lane_product`): the short products' route,
    where three transforms of a few hundred points cost more than the ``n1 n2`` multiply-adds
    (one Karatsuba step was measured no faster at 64 x 64: three times the output reductions).

    ``r`` holds one row per value and one column per prime (integer residue sums, ``|r| <
    2^53``): ``a = r[:n1]``, ``b = r[n1:]`` (``square``: ``b`` is ``a``).  The shorter operand is
    multiplied by ``s_i`` first (so the outputs need only a reduction).
    """
    rows, k = r.shape
    n2 = n1 if square else rows - n1
    count = yf.shape[1]
    if yf.shape[0] != k + 1 or primes.shape[0] != k or scale.shape[0] != k or inv.shape[0] != k \
            or n1 < 1 or n2 < 1 or count > n1 + n2 - 1:
        raise ValueError("lanes_direct: inconsistent shapes")
    kp = -(-k // LANE_PAD) * LANE_PAD
    ra = np.zeros((n1, kp), dtype=np.uint32)
    rb = np.zeros((n2, kp), dtype=np.uint32)
    fold = np.zeros(kp, dtype=np.uint64)
    p = np.empty(k, dtype=np.int64)
    s = np.empty(k, dtype=np.int64)
    for lane in range(k):
        p[lane] = np.int64(primes[lane])
        s[lane] = np.int64(scale[lane])
        fold[lane] = np.uint64((1 << 32) % p[lane])
    scale_b = n2 <= n1
    _load_lanes(r[:n1], p, s, inv, not scale_b, ra)
    _load_lanes(r[:n1] if square else r[n1:], p, s, inv, scale_b, rb)
    c = np.empty((count, kp), dtype=np.int64)
    _lane_product(ra, rb, fold, p, inv, k, c)
    for j in range(count):
        row = c[j]
        for lane in range(k):
            yf[lane, j] = float(row[lane])
    t = yf[k]  # the quotients, summed a prime at a time (vectorised over the outputs)
    t[:] = 0.0
    for lane in range(k):
        row = yf[lane]
        w = inv[lane]
        for j in range(count):
            t[j] += row[j] * w
    for j in range(count):
        t[j] = np.floor(t[j] + 0.5)


@njit("void(int64[:, ::1], int64, uint64[::1], uint32[:, ::1], uint32[:, ::1], uint32[:, ::1], "
      "uint32[:, ::1], uint64[::1], uint64[::1], uint64[::1], uint64[::1], uint64[::1], "
      "int64[:, ::1])", cache=CACHE)
def rows_power(a, e, primes, tw, twq, itw, itwq, p_neg_inv, one, oneq, f, fq, out):
    """``out[i] = (a[i]^e f_i' mod p_i)[:out.shape[1]]`` (``e >= 2``; ``tw.shape[1]``-point
    transforms, at least ``e (len(a[i]) - 1) + 1`` points) for every prime.

    The pointwise products are Montgomery products by :func:`polyconv.engines._kernels_ntt.
    pointwise` with the Shoup factor ``one = 2^32 mod p`` (so ``x y R^-1 R = x y``), except the
    last, whose factor ``f`` also undoes the transform's ``n`` and folds in the caller's
    constant, as in :func:`rows_products`.
    """
    n = tw.shape[1]
    x = np.empty(n, dtype=np.uint32)
    r = np.empty(n, dtype=np.uint32)
    bits = 0
    while (e >> (bits + 1)) > 0:
        bits += 1
    steps = bits
    for b in range(bits):
        steps += (e >> b) & 1
    for i in range(primes.shape[0]):
        p = primes[i]
        load_residues(x, a[i], p)
        forward(x, p, tw[i], twq[i])
        r[:] = x
        done = 0
        for b in range(bits - 1, -1, -1):
            done += 1
            last = done == steps
            pointwise(r, r, p, p_neg_inv[i], f[i] if last else one[i], fq[i] if last else oneq[i])
            if (e >> b) & 1:
                done += 1
                last = done == steps
                pointwise(r, x, p, p_neg_inv[i], f[i] if last else one[i],
                          fq[i] if last else oneq[i])
        inverse(r, p, itw[i], itwq[i])
        store_residues(r, p, out[i])


@njit(types.int64(_RO_F64, types.uint8[::1], types.int64, types.int64), cache=CACHE, nogil=True)
def crt_stream(sums, out, pos, total):
    """The integers ``V_c = sum_j sums[j, c] 2^(15 j)`` written into a marshal list of ``total``
    values in ``out`` from byte ``pos`` on (``pos = 0``: the list's header first, so a list is
    written in column chunks); returns the position after them.

    Every ``sums[j, c]`` is an integer below ``2^53`` in magnitude, and every ``V_c`` satisfies
    ``-2^(15 L) <= V_c < 2^(15 L)`` (``L = sums.shape[0]``), so carry propagation leaves 15-bit
    digits and a last carry of 0 (``V_c >= 0``) or -1 (negative: the magnitude is the digits'
    complement plus one).  Per block of values: the carries, the magnitudes and the top digit in
    loops over the block's columns (vectorised), then one scalar pass writes the stream.

    Raises
    ------
    ValueError
        If a last carry is neither (the caller's bound was wrong: never silently).
    """
    rows, count = sums.shape
    carry = np.empty(BLOCK, dtype=np.int64)
    neg = np.empty(BLOCK, dtype=np.int64)
    top = np.empty(BLOCK, dtype=np.int64)
    dg = np.empty((rows, BLOCK), dtype=np.uint16)
    if pos == 0:
        pos = _start(out, total)
    for start in range(0, count, BLOCK):
        m = min(BLOCK, count - start)
        carry[:m] = 0
        for j in range(rows):
            row = sums[j, start:start + m]
            drow = dg[j]
            for c in range(m):
                v = np.int64(row[c]) + carry[c]
                drow[c] = np.uint16(v & _MASK)
                carry[c] = v >> 15
        bad = False
        for c in range(m):
            bad |= carry[c] != 0 and carry[c] != -1
            neg[c] = -carry[c]
            carry[c] = neg[c]
            top[c] = 0
        if bad:
            raise ValueError("a CRT value outside the range of its prime product")
        for j in range(rows):  # complement plus one where negative; the top nonzero digit
            drow = dg[j]
            for c in range(m):
                t = (np.int64(drow[c]) ^ (_MASK * neg[c])) + carry[c]
                d = t & _MASK
                drow[c] = np.uint16(d)
                carry[c] = t >> 15
                top[c] = j + 1 if d != 0 else top[c]
        for c in range(m):
            t = top[c]
            if t <= 2:  # below 2^30: an int32 item
                v = (np.int64(dg[0, c]) | (np.int64(dg[1, c]) << 15)) if t else np.int64(0)
                out[pos] = 0x69
                pos = _put_int32(out, pos + 1, -v if neg[c] else v)
            else:
                out[pos] = 0x6C
                pos = _put_int32(out, pos + 1, -t if neg[c] else t)
                if _LITTLE:  # one 16-bit store per digit (unaligned stores are fine)
                    digits = out[pos:pos + 2 * t].view(np.uint16)
                    for d in range(t):
                        digits[d] = dg[d, c]
                    pos += 2 * t
                else:
                    for d in range(t):
                        v = dg[d, c]
                        out[pos] = np.uint8(v & np.uint16(0xFF))
                        out[pos + 1] = np.uint8(v >> np.uint16(8))
                        pos += 2
    return pos
