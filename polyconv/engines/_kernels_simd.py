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


def _shoup(builder, d, w, wq, pv):
    """``d w mod p`` in ``[0, 2p)`` for ``d < 2^32``: ``d w - floor(d w' / 2^32) p`` mod 2^32."""
    wide = builder.mul(builder.zext(d, _V64), builder.zext(wq, _V64))
    q = builder.trunc(builder.lshr(wide, ir.Constant(_V64, [32] * LANES)), _V)
    return builder.sub(builder.mul(d, w), builder.mul(q, pv))


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


def _quad(dif):
    """An intrinsic ``(x, i0, q, tw, twq, j, p)``: two stages on ``x[i0 + m q + k]``,
    ``m = 0..3``, ``k < 16``, where ``i0`` is ``j`` words into a run of ``q``: DIF stages of
    half-lengths ``2q`` (twiddles ``tw[2q + j + k]``, ``tw[3q + j + k]``) then ``q``
    (``tw[q + j + k]``), or the DIT stages ``q`` then ``2q``."""
    def typer(typingctx, x, i0, q, tw, twq, j, p):
        def codegen(context, builder, sig, args):
            xa = _array(context, builder, sig.args[0], args[0])
            ta = _array(context, builder, sig.args[3], args[3])
            qa = _array(context, builder, sig.args[4], args[4])
            start, step, offset = args[1], args[2], args[5]
            pv, p2 = _moduli(builder, args[6])
            index = [start]
            for _ in range(3):
                index.append(builder.add(index[-1], step))
            a0, a1, a2, a3 = (_load(builder, xa, i) for i in index)
            t_long = builder.add(builder.add(step, step), offset)
            twiddles = []
            for t in (t_long, builder.add(t_long, step), builder.add(step, offset)):
                twiddles.append((_load(builder, ta, t), _load(builder, qa, t)))
            (w1, q1), (w2, q2), (w3, q3) = twiddles
            if dif:
                b0, b2 = _dif(builder, a0, a2, w1, q1, pv, p2)
                b1, b3 = _dif(builder, a1, a3, w2, q2, pv, p2)
                c0, c1 = _dif(builder, b0, b1, w3, q3, pv, p2)
                c2, c3 = _dif(builder, b2, b3, w3, q3, pv, p2)
            else:
                b0, b1 = _dit(builder, a0, a1, w3, q3, pv, p2)
                b2, b3 = _dit(builder, a2, a3, w3, q3, pv, p2)
                c0, c2 = _dit(builder, b0, b2, w1, q1, pv, p2)
                c1, c3 = _dit(builder, b1, b3, w2, q2, pv, p2)
            for i, c in zip(index, (c0, c1, c2, c3), strict=True):
                _store(builder, c, xa, i)
            return context.get_dummy_value()
        return types.void(x, i0, q, tw, twq, j, p), codegen
    return intrinsic(typer)


dif_quad = _quad(True)
dit_quad = _quad(False)


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


def _short_stages(context, builder, sig, args, halves, butterfly):
    """Every 32-word block of ``x`` (``args``: x, tw, twq, p) through the stages ``halves``."""
    xa = _array(context, builder, sig.args[0], args[0])
    ta = _array(context, builder, sig.args[1], args[1])
    qa = _array(context, builder, sig.args[2], args[2])
    pv, p2 = _moduli(builder, args[3])
    steps, back = _short_plan(halves)
    undef = ir.Constant(_V, ir.Undefined)
    twiddles = []  # loaded once, spread over the lanes (table[h:2h] holds w_{2h}^j)
    for h, _, _, offsets in steps:
        if h == 1:
            twiddles.append((None, None))
            continue
        at = ir.Constant(_I64, h)
        twiddles.append((_shuffle(builder, _load(builder, ta, at), undef, offsets),
                         _shuffle(builder, _load(builder, qa, at), undef, offsets)))
    n = builder.extract_value(xa.shape, 0)
    with cgutils.for_range(builder, builder.udiv(n, ir.Constant(_I64, 32))) as loop:
        i0 = builder.mul(loop.index, ir.Constant(_I64, 32))
        i1 = builder.add(i0, ir.Constant(_I64, 16))
        a, b = _load(builder, xa, i0), _load(builder, xa, i1)
        for (_, mask_u, mask_v, _), (w, wq) in zip(steps, twiddles, strict=True):
            u, v = _shuffle(builder, a, b, mask_u), _shuffle(builder, a, b, mask_v)
            a, b = butterfly(builder, u, v, w, wq, pv, p2)
        _store(builder, _shuffle(builder, a, b, back[0]), xa, i0)
        _store(builder, _shuffle(builder, a, b, back[1]), xa, i1)
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
