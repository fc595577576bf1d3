"""Exact products over several axes by Kronecker substitution onto one axis.

For ``d`` axes with extents ``n_k`` (of ``a``) and ``m_k`` (of ``b``), every axis but the first
is padded to ``L_k = n_k + m_k - 1`` and the axes are flattened row-major: entry ``(i_1, ...,
i_d)`` goes to ``i_1 S_1 + ... + i_d S_d`` with ``S_d = 1``, ``S_k = L_(k+1) S_(k+1)``.  That is
the substitution ``x_k = x^(S_k)`` of the multivariate product (Kronecker 1882; von zur Gathen &
Gerhard, *Modern Computer Algebra*, 3rd ed., section 8.4): because the product's degree in
``x_k`` is below ``L_k``, no two exponents of the product collide, so the 1-D product of the
flattened sequences *is* the N-D product, flattened; un-flattening is a reshape.  The 1-D
product runs through the ordinary exact pipeline (:func:`polyconv.pipeline.execute.
convolve_prepared`: plan, certificate, check, fallback), so its certificate applies unchanged.
Only the rows along the first axis that the mode reads are computed (``length=``).
"""

from __future__ import annotations

import math

import numpy as np

from ..numerics.budget import check_allocation
from . import execute, prepare
from .axes import NdPair
from .nd_plan import NdPlan
from .plan import format_seconds

#: Bytes one padded entry takes (an int64, or an object array's pointer: the zeros share one
#: small int object).
PADDED_ENTRY_BYTES = 8


def _strides(sa: tuple, sb: tuple) -> tuple[int, ...]:
    """``S_1, ..., S_d`` of the substitution (module notes)."""
    inner = [n + m - 1 for n, m in zip(sa[1:], sb[1:], strict=True)]
    out = [1]
    for length in reversed(inner):
        out.append(out[-1] * length)
    return tuple(reversed(out))


def flatten(x: np.ndarray, ext: tuple, strides: tuple) -> np.ndarray:
    """``x`` (batch axes, then the ``d`` axes) padded and flattened to batch + one axis, with
    its trailing zeros dropped."""
    d = len(ext)
    inner = tuple(strides[k - 1] // strides[k] for k in range(1, d))
    padded = np.zeros(x.shape[:-d] + (ext[0],) + inner, dtype=x.dtype)
    padded[(Ellipsis,) + tuple(slice(0, n) for n in ext)] = x
    last = sum((n - 1) * s for n, s in zip(ext, strides, strict=True)) + 1
    return padded.reshape(x.shape[:-d] + (-1,))[..., :last]


def _flat_operands(pair: NdPair, windows: tuple):
    """The flattened operands, the 1-D length the mode reads and the strides (budget checked)."""
    sa, sb = pair.shapes
    strides = _strides(sa, sb)
    d = len(sa)
    rows_a = math.prod(pair.a.shape[:-d]) if pair.a.ndim > d else 1
    rows_b = math.prod(pair.b.shape[:-d]) if pair.b.ndim > d else 1
    padded = (rows_a * sa[0] + rows_b * sb[0]) * strides[0]
    check_allocation(PADDED_ENTRY_BYTES * padded,
                     f"the Kronecker substitution of a {sa} and b {sb} over the axes "
                     f"(padded to {padded} entries)")
    fx = flatten(pair.a, sa, strides)
    fy = flatten(pair.b, sb, strides)
    return fx, fy, windows[0][1] * strides[0], strides


def plan_exact_nd(pair: NdPair, modes: tuple, windows: tuple, method: str,
                  modulus: int | None) -> NdPlan:
    """The :class:`NdPlan` of the exact product, without computing it."""
    fx, fy, length, strides = _flat_operands(pair, windows)
    flat_plan = prepare.plan(fx, fy, mode="full", method=method, modulus=modulus,
                             length=length, axis=-1)
    return describe(pair, modes, windows, flat_plan, (fx.shape[-1], fy.shape[-1]), strides)


def convolve_exact_nd(pair: NdPair, modes: tuple, windows: tuple, method: str,
                      modulus: int | None) -> tuple[np.ndarray, NdPlan]:
    """The exact product over the pair's axes and its :class:`NdPlan` (module notes)."""
    fx, fy, length, strides = _flat_operands(pair, windows)
    flat_out, flat_plan = execute.convolve_prepared(fx, fy, mode="full", method=method,
                                                    modulus=modulus, length=length, axis=-1)
    d = len(strides)
    inner = tuple(strides[k - 1] // strides[k] for k in range(1, d))
    out = flat_out.reshape(flat_out.shape[:-1] + (windows[0][1],) + inner)
    out = out[(Ellipsis,) + tuple(slice(start, stop) for start, stop in windows)]
    return out, describe(pair, modes, windows, flat_plan, (fx.shape[-1], fy.shape[-1]), strides)


def describe(pair: NdPair, modes: tuple, windows: tuple, flat_plan, flat_lengths: tuple,
             strides: tuple) -> NdPlan:
    """The :class:`NdPlan` of a Kronecker-flattened exact product."""
    sa, sb = pair.shapes
    pads = ", ".join(f"axis {ax}: {n + m - 1}" for ax, n, m in
                     zip(pair.axes[1:], sa[1:], sb[1:], strict=True))
    reason = (f"Kronecker substitution: axes {pair.axes} flattened into one (strides "
              f"{strides}; inner axes padded to n1 + n2 - 1 so no exponents collide: {pads}), "
              f"then the exact 1-D product of lengths {flat_lengths[0]} and {flat_lengths[1]}"
              f" by {flat_plan.engine} ({format_seconds(flat_plan.predicted_seconds)}): "
              f"{flat_plan.reason}")
    return NdPlan("kronecker-nd", True, flat_plan.certificate, 0.0, flat_plan.predicted_seconds,
                  reason, pair.kind, pair.axes, modes, (sa, sb), pair.batch_shape,
                  tuple(stop - start for start, stop in windows), windows,
                  threads=flat_plan.threads, alternatives=((flat_plan.engine,
                                                            flat_plan.predicted_seconds),),
                  modulus=flat_plan.modulus, output_int64=flat_plan.output_int64,
                  flat=flat_plan, flat_lengths=flat_lengths)
