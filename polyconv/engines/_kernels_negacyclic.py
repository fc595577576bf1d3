"""Compiled (numba) passes of the negacyclic real product (:mod:`polyconv.numerics.negacyclic`).

Loaded with the kernel modules (:data:`polyconv.engines.jit_state.KERNEL_MODULES`); the fft
engine hands this module to :func:`polyconv.numerics.negacyclic.real_product` only when the
kernels are already loaded in this process and a self-check found the passes bit-identical to
the numpy ones (:func:`polyconv.engines.fft.negacyclic_kernels`).  Each pass does in one sweep
what the numpy route does in two or three (fold + zero fill + twist; untwist + output split),
with **the same expression per element**: numpy 2's complex multiply on x86-64 with FMA is
``(a + ib)(c + id) = fma(a, c, -(b d)) + i fma(a, d, b c)`` (its SIMD loop
``npyv_muladdsub``; checked element by element in tests/engines), a real operand entering as
``a + 0i``.  So the roundings per element, and with them the certificate of
:mod:`polyconv.numerics.negacyclic`, are those of the numpy route (no ``fastmath``: nothing is
reassociated or contracted beyond the explicit ``fma``).  Where numpy computes complex
products differently (no FMA), the self-check fails and the numpy route runs.
"""

from __future__ import annotations

from llvmlite import ir
from numba import njit, types
from numba.extending import intrinsic

from . import jit_state as _jit

CACHE = _jit.cache_enabled()

_RO_F64 = types.Array(types.float64, 1, "C", readonly=True)
_C128 = types.complex128[::1]
#: Signatures with the real operand writable or read-only (operands of the distributions and
#: the CLI arrive as read-only views).
_TWIST_UNSPLIT = [types.void(types.float64[::1], _C128, _C128), types.void(_RO_F64, _C128, _C128)]
_TWIST_SPLIT = [types.void(types.float64[::1], _C128, types.complex128[:, ::1]),
                types.void(_RO_F64, _C128, types.complex128[:, ::1])]


@intrinsic
def _fma(typingctx, x, y, z):
    """``x y + z`` rounded once (LLVM's ``llvm.fma.f64``)."""
    def codegen(context, builder, signature, args):
        d = ir.DoubleType()
        fn = builder.module.declare_intrinsic("llvm.fma", [d], ir.FunctionType(d, [d, d, d]))
        return builder.call(fn, args)
    return types.float64(types.float64, types.float64, types.float64), codegen


@njit(inline="always")
def _mul(a, b, c, d):
    """``(a + ib)(c + id)`` as numpy 2 computes it (module notes): (real, imaginary)."""
    return _fma(a, c, -(b * d)), _fma(a, d, b * c)


@njit(_TWIST_UNSPLIT, cache=CACHE)
def twist_unsplit(a, twist, u):
    """``u = fold(a) * twist`` for the unsplit product (``m = len(u)``): for ``len(a) <= m``
    ``u[j] = twist[j] (a_j + 0i)`` and zeros after (``np.multiply(twist[:n], a)``); else
    ``u[j] = (a_j + i a_(j+m)) twist[j]`` (``u *= twist`` on the folded operand)."""
    m, n = u.shape[0], a.shape[0]
    if n <= m:
        for j in range(n):
            t = twist[j]
            re, im = _mul(t.real, t.imag, a[j], 0.0)
            u[j] = complex(re, im)
        for j in range(n, m):
            u[j] = 0
        return
    for j in range(m):
        t = twist[j]
        hi = a[j + m] if j + m < n else 0.0
        re, im = _mul(a[j], hi, t.real, t.imag)
        u[j] = complex(re, im)


@njit(_TWIST_SPLIT, cache=CACHE)
def twist_split(a, twist, u2):
    """The split product's twist (row part ``twist[q]`` per row of the ``(R, C)`` view ``u2``):
    for ``len(a) <= m`` ``u2[q, k] = (a_(qC+k) + 0i) twist[q]`` and zeros after
    (``np.multiply(a2, twist[:, None])``); else ``u2[q, k] = (a_j + i a_(j+m)) twist[q]``."""
    rows, cols = u2.shape
    m, n = rows * cols, a.shape[0]
    for q in range(rows):
        tr, ti = twist[q].real, twist[q].imag
        for k in range(cols):
            j = q * cols + k
            if n <= m:
                if j < n:
                    re, im = _mul(a[j], 0.0, tr, ti)
                    u2[q, k] = complex(re, im)
                else:
                    u2[q, k] = 0
            else:
                hi = a[j + m] if j + m < n else 0.0
                re, im = _mul(a[j], hi, tr, ti)
                u2[q, k] = complex(re, im)


@njit("void(complex128[::1], complex128[::1], float64[::1])", cache=CACHE)
def untwist_unsplit(u, twist, out):
    """The unsplit product's output from the forward transform ``u`` of the spectrum product
    (:func:`polyconv.numerics.negacyclic._real_product`): ``G = u * twist`` (only the entries
    read), ``out[0] = Re G[0]``, ``out[j] = Im G[m-j]``, ``out[m] = Im G[0]``, ``out[m+j] =
    -Re G[m-j]`` for ``1 <= j``, up to ``len(out)``."""
    m, keep = u.shape[0], out.shape[0]
    low = min(keep, m)
    g0r, g0i = _mul(u[0].real, u[0].imag, twist[0].real, twist[0].imag)
    out[0] = g0r
    if keep > m:
        out[m] = g0i
    high = keep - m
    for j in range(1, max(low, high)):
        k = m - j
        gr, gi = _mul(u[k].real, u[k].imag, twist[k].real, twist[k].imag)
        if j < low:
            out[j] = gi
        if j < high:
            out[m + j] = -gr


@njit("void(complex128[:, ::1], complex128[::1], float64[::1])", cache=CACHE)
def untwist_split(u2, untwist, out):
    """The split product's output: ``w = u2 * untwist[:, None]`` (entries read only),
    ``out[:m] = Re w``, ``out[m:] = Im w`` up to ``len(out)``."""
    rows, cols = u2.shape
    m, keep = rows * cols, out.shape[0]
    for q in range(rows):
        tr, ti = untwist[q].real, untwist[q].imag
        for k in range(cols):
            j = q * cols + k
            if j >= keep and j + m >= keep:
                return
            re, im = _mul(u2[q, k].real, u2[q, k].imag, tr, ti)
            if j < keep:
                out[j] = re
            if j + m < keep:
                out[j + m] = im
