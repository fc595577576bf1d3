"""Vector NTT butterflies written as LLVM IR on 16-lane uint32 vectors (numba intrinsics).

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`) and used by
:mod:`polyconv.engines._kernels_ntt` only.  numba's loop vectoriser widens the 32 x 32-bit high
product of Shoup's multiplication to 64-bit lanes and keeps 256-bit vectors; here every
operation is written on ``<16 x i32>`` (the high product as ``zext``, ``mul``, ``lshr``,
``trunc``, which LLVM lowers to two ``vpmuludq`` and a lane merge), so that on AVX-512 one
instruction does 16 butterflies' worth of work and elsewhere LLVM splits the vectors into the
widest registers present (measured on the development machine: 0.2 ns per butterfly against
0.65-0.75 ns for the auto-vectorised loop).

The arithmetic is :mod:`polyconv.engines._kernels_arith`'s, lane by lane (D. Harvey, "Faster
arithmetic for number-theoretic transforms", J. Symbolic Comput. 60 (2014) 113-119: lazy
``[0, 2p)`` / ``[0, 4p)`` reductions, Shoup's multiplication by a constant ``w`` with
``w' = floor(w 2^32 / p)``), for primes ``p < 2^30``:

* DIF (Gentleman-Sande) butterfly, inputs and outputs in ``[0, 2p)``:
  ``(u, v) -> (u + v mod 2p, (u + 2p - v) w)``;
* DIT (Cooley-Tukey) butterfly, inputs and outputs in ``[0, 4p)``:
  ``u <- u mod 2p, t = v w``, ``(u, v) -> (u + t, u + 2p - t)``;
* the twiddle ``w = 1`` of the half-length-1 stage is a reduction ``mod 2p`` instead.

Radix-4 steps are two radix-2 stages on four vectors kept in registers (half the loads and
stores); stages of half-length 8, 4, 2, 1 act inside 16-word vectors, so they run on 32-word
blocks held in two vectors and permuted between stages (``shufflevector`` masks computed here
once, when the code is generated: common practice, no source).
"""

from __future__ import annotations

from llvmlite import ir
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic

#: Lanes per vector (uint32 words).
LANES = 16
_I32 = ir.IntType(32)
_I64 = ir.IntType(64)
_V = ir.VectorType(_I32, LANES)
_V64 = ir.VectorType(_I64, LANES)


def _array(context, builder, ty, value):
    return context.make_array(ty)(context, builder, value)


def _ptr(builder, arr, index):
    return builder.bitcast(builder.gep(arr.data, [index]), _V.as_pointer())


def _load(builder, arr, index):
    """The 16 words ``arr[index:index + 16]`` (unaligned)."""
    return builder.load(_ptr(builder, arr, index), align=4)


def _store(builder, value, arr, index):
    builder.store(value, _ptr(builder, arr, index), align=4)


def _splat(builder, scalar):
    v = builder.insert_element(ir.Constant(_V, ir.Undefined), scalar, ir.Constant(_I32, 0))
    return builder.shuffle_vector(v, ir.Constant(_V, ir.Undefined), ir.Constant(_V, [0] * LANES))


def _moduli(builder, p):
    """``(p, 2p)`` splat from the uint64 ``p``."""
    pv = _splat(builder, builder.trunc(p, _I32))
    return pv, builder.add(pv, pv)


def _reduce_2p(builder, a, p2):
    """``a mod 2p`` for ``a < 4p``: ``min(a, a - 2p)`` (the difference wraps when ``a < 2p``)."""
    b = builder.sub(a, p2)
    return builder.select(builder.icmp_unsigned("<", a, b), a, b)


def _high(builder, a, b):
    """``floor(a b / 2^32)`` lane by lane (two ``vpmuludq`` and a lane merge on x86)."""
    wide = builder.mul(builder.zext(a, _V64), builder.zext(b, _V64))
    return builder.trunc(builder.lshr(wide, ir.Constant(_V64, [32] * LANES)), _V)


def _shoup(builder, d, w, wq, pv):
    """``d w mod p`` in ``[0, 2p)`` for ``d < 2^32``: ``d w - floor(d w' / 2^32) p`` mod 2^32."""
    return builder.sub(builder.mul(d, w), builder.mul(_high(builder, d, wq), pv))


def _dif(builder, u, v, w, wq, pv, p2):
    s = _reduce_2p(builder, builder.add(u, v), p2)
    d = builder.sub(builder.add(u, p2), v)
    return s, (_reduce_2p(builder, d, p2) if w is None else _shoup(builder, d, w, wq, pv))


def _dit(builder, u, v, w, wq, pv, p2):
    u = _reduce_2p(builder, u, p2)
    t = _reduce_2p(builder, v, p2) if w is None else _shoup(builder, v, w, wq, pv)
    return builder.add(u, t), builder.sub(builder.add(u, p2), t)


def _shuffle(builder, a, b, mask):
    return builder.shuffle_vector(a, b, ir.Constant(_V, list(mask)))


def _pair(butterfly):
    """An intrinsic ``(x, iu, iv, tw, iw, twq, p)``: 16 butterflies on ``x[iu + k]``,
    ``x[iv + k]`` with twiddles ``tw[iw + k]`` (quotients ``twq[iw + k]``), ``k < 16``."""
    def typer(typingctx, x, iu, iv, tw, iw, twq, p):
        def codegen(context, builder, sig, args):
            xa = _array(context, builder, sig.args[0], args[0])
            ta = _array(context, builder, sig.args[3], args[3])
            qa = _array(context, builder, sig.args[5], args[5])
            pv, p2 = _moduli(builder, args[6])
            u, v = _load(builder, xa, args[1]), _load(builder, xa, args[2])
            w, wq = _load(builder, ta, args[4]), _load(builder, qa, args[4])
            a, b = butterfly(builder, u, v, w, wq, pv, p2)
            _store(builder, a, xa, args[1])
            _store(builder, b, xa, args[2])
            return context.get_dummy_value()
        return types.void(x, iu, iv, tw, iw, twq, p), codegen
    return intrinsic(typer)


dif_pair = _pair(_dif)
dit_pair = _pair(_dit)


def _radix(dif, r):
    """An intrinsic ``(x, i0, q, tw, twq, j, p)``: ``r`` stages on the ``2^r`` vectors
    ``x[i0 + m q + k]`` (``m < 2^r``, ``k < 16``) kept in registers, where ``i0`` is ``j`` words
    into a run of ``q``: the stages of half-lengths ``H = q 2^t``, ``t = r-1 .. 0`` (DIF) or
    ``t = 0 .. r-1`` (DIT), pair vectors ``m`` and ``m + 2^t`` (bit ``t`` of ``m`` clear) with
    twiddles ``tw[H + (m mod 2^t) q + j + k]``."""
    def typer(typingctx, x, i0, q, tw, twq, j, p):
        def codegen(context, builder, sig, args):
            xa = _array(context, builder, sig.args[0], args[0])
            ta = _array(context, builder, sig.args[3], args[3])
            qa = _array(context, builder, sig.args[4], args[4])
            start, step, offset = args[1], args[2], args[5]
            pv, p2 = _moduli(builder, args[6])
            index = [start]
            for _ in range(2**r - 1):
                index.append(builder.add(index[-1], step))
            a = [_load(builder, xa, i) for i in index]
            for t in (range(r - 1, -1, -1) if dif else range(r)):
                span = 1 << t
                for low in range(span):  # twiddle run of the pairs (m, m + span), m = low mod span
                    at = builder.add(builder.mul(step, ir.Constant(_I64, span + low)), offset)
                    w, wq = _load(builder, ta, at), _load(builder, qa, at)
                    for m in range(low, 2**r, 2 * span):
                        a[m], a[m + span] = (_dif if dif else _dit)(builder, a[m], a[m + span],
                                                                      w, wq, pv, p2)
            for i, c in zip(index, a, strict=True):
                _store(builder, c, xa, i)
            return context.get_dummy_value()
        return types.void(x, i0, q, tw, twq, j, p), codegen
    return intrinsic(typer)


dif_quad = _radix(True, 2)
dit_quad = _radix(False, 2)
dif_oct = _radix(True, 3)
dit_oct = _radix(False, 3)


def _short_plan(halves):
    """For stages of the given half-lengths (each < 16) on a 32-word block held as two vectors:
    per stage ``(h, mask_u, mask_v, j)`` (lanes of the pair ``(a, b)`` that become the
    butterflies' ``u`` and ``v``, and each lane's offset ``j < h`` in its run: twiddle
    ``w_{2h}^j``), then the masks that put the words back in place."""
    held = list(range(32))
    steps = []
    for h in halves:
        lows = [i for i in range(32) if i % (2 * h) < h]
        steps.append((h, [held.index(i) for i in lows], [held.index(i + h) for i in lows],
                      [i % (2 * h) for i in lows]))
        held = lows + [i + h for i in lows]
    return steps, ([held.index(i) for i in range(16)], [held.index(i) for i in range(16, 32)])


class _Short:
    """Code for the stages ``halves`` (each < 16) of a 32-word block held in two vectors: the
    twiddles are loaded and spread over the lanes once (``table[h:2h]`` holds ``w_{2h}^j``),
    before the loop that :meth:`run` is called in."""

    def __init__(self, builder, tw, twq, halves, butterfly):
        self.steps, self.back = _short_plan(halves)
        self.butterfly = butterfly
        undef = ir.Constant(_V, ir.Undefined)
        self.twiddles = []
        for h, _, _, offsets in self.steps:
            if h == 1:
                self.twiddles.append((None, None))
                continue
            at = ir.Constant(_I64, h)
            self.twiddles.append((_shuffle(builder, _load(builder, tw, at), undef, offsets),
                                  _shuffle(builder, _load(builder, twq, at), undef, offsets)))

    def run(self, builder, a, b, pv, p2):
        """The words ``a`` (0..15), ``b`` (16..31) after the stages, in the same places."""
        for (_, mask_u, mask_v, _), (w, wq) in zip(self.steps, self.twiddles, strict=True):
            u, v = _shuffle(builder, a, b, mask_u), _shuffle(builder, a, b, mask_v)
            a, b = self.butterfly(builder, u, v, w, wq, pv, p2)
        return _shuffle(builder, a, b, self.back[0]), _shuffle(builder, a, b, self.back[1])


def _blocks(builder, xa):
    """A loop over the 32-word blocks of ``xa``; yields the indices of their two halves."""
    n = builder.extract_value(xa.shape, 0)
    with cgutils.for_range(builder, builder.udiv(n, ir.Constant(_I64, 32))) as loop:
        i0 = builder.mul(loop.index, ir.Constant(_I64, 32))
        yield i0, builder.add(i0, ir.Constant(_I64, 16))


def _short_stages(context, builder, sig, args, halves, butterfly):
    """Every 32-word block of ``x`` (``args``: x, tw, twq, p) through the stages ``halves``."""
    xa = _array(context, builder, sig.args[0], args[0])
    code = _Short(builder, _array(context, builder, sig.args[1], args[1]),
                  _array(context, builder, sig.args[2], args[2]), halves, butterfly)
    pv, p2 = _moduli(builder, args[3])
    for i0, i1 in _blocks(builder, xa):
        a, b = code.run(builder, _load(builder, xa, i0), _load(builder, xa, i1), pv, p2)
        _store(builder, a, xa, i0)
        _store(builder, b, xa, i1)
    return context.get_dummy_value()


@intrinsic
def dif_short(typingctx, x, tw, twq, p):
    """The DIF stages of half-lengths 8, 4, 2, 1 on every 32-word block of ``x`` (``len(x)`` a
    multiple of 32, ``len(tw) >= 24``)."""
    def codegen(context, builder, sig, args):
        return _short_stages(context, builder, sig, args, (8, 4, 2, 1), _dif)
    return types.void(x, tw, twq, p), codegen


@intrinsic
def dit_short(typingctx, x, tw, twq, p):
    """The DIT stages of half-lengths 1, 2, 4, 8 on every 32-word block of ``x``."""
    def codegen(context, builder, sig, args):
        return _short_stages(context, builder, sig, args, (1, 2, 4, 8), _dit)
    return types.void(x, tw, twq, p), codegen


_F64 = ir.DoubleType()
_VF = ir.VectorType(_F64, LANES)


def _load_wide(builder, arr, index):
    ptr = builder.bitcast(builder.gep(arr.data, [index]), _V64.as_pointer())
    return builder.load(ptr, align=8)


def _splat64(builder, scalar, ty=_V64):
    v = builder.insert_element(ir.Constant(ty, ir.Undefined), scalar, ir.Constant(_I32, 0))
    return builder.shuffle_vector(v, ir.Constant(ty, ir.Undefined), ir.Constant(_V, [0] * LANES))


@intrinsic
def load_vector(typingctx, x, a, i, p, inv):
    """``x[i + k] = a[i + k] mod p`` for 16 int64 entries of any sign: ``r = a - trunc(a / p) p``
    with the float64 quotient ``fl(fl(a) inv)``, ``inv = fl(1 / p)``, which lies within
    ``2^-17`` of ``a / p`` for ``|a| < 2^63``, so ``r`` is in ``(-2p, 2p)``; then ``r + 2p`` if
    negative, ``r - p`` if ``>= p`` (exact wrap-around int64 arithmetic)."""
    def codegen(context, builder, sig, args):
        xa = _array(context, builder, sig.args[0], args[0])
        aa = _array(context, builder, sig.args[1], args[1])
        pw = _splat64(builder, args[3])
        v = _load_wide(builder, aa, args[2])
        quotient = builder.fmul(builder.sitofp(v, _VF), _splat64(builder, args[4], _VF))
        r = builder.sub(v, builder.mul(builder.fptosi(quotient, _V64), pw))
        negative = builder.icmp_signed("<", r, ir.Constant(_V64, [0] * LANES))
        r = builder.select(negative, builder.add(r, builder.add(pw, pw)), r)
        r = builder.select(builder.icmp_signed(">=", r, pw), builder.sub(r, pw), r)
        _store(builder, builder.trunc(r, _V), xa, args[2])
        return context.get_dummy_value()
    return types.void(x, a, i, p, inv), codegen


@intrinsic
def store_vector(typingctx, x, out, i, p):
    """``out[i + k] = x[i + k] mod p`` (int64) for 16 entries of ``x`` in ``[0, 4p)``."""
    def codegen(context, builder, sig, args):
        xa = _array(context, builder, sig.args[0], args[0])
        oa = _array(context, builder, sig.args[1], args[1])
        pv, p2 = _moduli(builder, args[3])
        v = _reduce_2p(builder, _load(builder, xa, args[2]), p2)
        v = _reduce_2p(builder, v, pv)  # min(v, v - p): v mod p for v < 2p
        ptr = builder.bitcast(builder.gep(oa.data, [args[2]]), _V64.as_pointer())
        builder.store(builder.zext(v, _V64), ptr, align=8)
        return context.get_dummy_value()
    return types.void(x, out, i, p), codegen


def _montgomery(builder, x, y, pv, p_neg_inv, f, fq):
    """``x y f R^-1 mod p`` in ``[0, 2p)`` for ``x, y`` in ``[0, 2p)`` (splat constants), in
    32-bit lanes: Montgomery's reduction with ``R = 2^32`` and ``m = (x y mod R) p^-1 mod R``
    (``p^-1 = -p'``), so that ``x y - m p`` is a multiple of ``R`` whose low words cancel:
    ``(x y - m p) / R = hi(x y) - hi(m p)`` in ``(-p, p)``, plus ``p``; then Shoup's product by
    ``f``."""
    m = builder.mul(builder.mul(x, y), builder.sub(ir.Constant(_V, [0] * LANES), p_neg_inv))
    r = builder.add(builder.sub(_high(builder, x, y), _high(builder, m, pv)), pv)
    return _shoup(builder, r, f, fq, pv)


def _words(builder, *scalars):
    return [_splat(builder, builder.trunc(v, _I32)) for v in scalars]


@intrinsic
def pointwise_vector(typingctx, x, y, i, p, p_neg_inv, f, fq):
    """``x[i + k] <- x y f R^-1 mod p`` (:func:`_montgomery`) for 16 entries."""
    def codegen(context, builder, sig, args):
        xa = _array(context, builder, sig.args[0], args[0])
        ya = _array(context, builder, sig.args[1], args[1])
        pv, _ = _moduli(builder, args[3])
        r = _montgomery(builder, _load(builder, xa, args[2]), _load(builder, ya, args[2]), pv,
                        *_words(builder, *args[4:7]))
        _store(builder, r, xa, args[2])
        return context.get_dummy_value()
    return types.void(x, y, i, p, p_neg_inv, f, fq), codegen


def _fused(square):
    """An intrinsic ``(x, y, tw, twq, itw, itwq, p, p_neg_inv, f, fq)``: for every 32-word block,
    the forward stages 8..1 of ``y`` (of ``x`` for a square), the product by ``x``'s block
    (:func:`_montgomery`) and the inverse stages 1..8, written to ``x``: three passes in one,
    while the block is in registers."""
    def typer(typingctx, x, y, tw, twq, itw, itwq, p, p_neg_inv, f, fq):
        def codegen(context, builder, sig, args):
            xa, ya, ta, qa, ita, iqa = (_array(context, builder, t, v)
                                        for t, v in zip(sig.args[:6], args[:6], strict=True))
            forward = _Short(builder, ta, qa, (8, 4, 2, 1), _dif)
            inverse = _Short(builder, ita, iqa, (1, 2, 4, 8), _dit)
            pv, p2 = _moduli(builder, args[6])
            consts = _words(builder, *args[7:10])
            for i0, i1 in _blocks(builder, xa):
                c, d = _load(builder, xa, i0), _load(builder, xa, i1)
                if square:
                    a, b = forward.run(builder, c, d, pv, p2)
                    c, d = a, b
                else:
                    a, b = forward.run(builder, _load(builder, ya, i0), _load(builder, ya, i1),
                                       pv, p2)
                a = _montgomery(builder, a, c, pv, *consts)
                b = _montgomery(builder, b, d, pv, *consts)
                a, b = inverse.run(builder, a, b, pv, p2)
                _store(builder, a, xa, i0)
                _store(builder, b, xa, i1)
            return context.get_dummy_value()
        return types.void(x, y, tw, twq, itw, itwq, p, p_neg_inv, f, fq), codegen
    return intrinsic(typer)


product_short = _fused(False)
square_short = _fused(True)
