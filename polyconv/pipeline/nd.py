"""Products over several axes at once: validate -> plan -> engine -> shape.

:func:`convolve_nd` is :func:`polyconv.api.convolve` with ``axes=`` naming two or more axes:
:mod:`polyconv.pipeline.axes` validates and moves the axes last, floats are planned by
:func:`polyconv.pipeline.nd_plan.choose_float` and run by :mod:`polyconv.engines.fft_nd`,
integers (and residues) go through the Kronecker substitution of
:mod:`polyconv.pipeline.nd_exact`; the result's axes are put back where the caller had them.

Error bounds (:func:`float_bound_nd`), for operand norms ``||a||_2``, ``||b||_2`` over all the
convolution axes (the largest over the batch):

* fft: Percival's bound (Math. Comp. 72 (2003), Theorem 5.1) for a transform of ``P = prod
  N_k`` points.  The row-column transform of ``N_1 x ... x N_d`` is the composition of the
  ``sum_k log2 N_k = log2 P`` butterfly levels of the 1-D transforms along each axis, each level
  the same (scaled) unitary butterfly Percival's induction bounds, so his bound holds with ``n =
  log2 P`` levels; each axis is charged :func:`polyconv.numerics.bounds.
  mixed_radix_levels_length` (one level more for a length that is not a power of two).
* overlap-add: every output gathers at most two block products (block ``>= m - 1``): twice the
  bound at the block transform's ``P``.
* direct: ``gamma_m ||a||_2 ||b||_2`` with ``m = prod_k min(n1_k, n2_k)`` terms per output
  (Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 3.1).
* integers: the plan is exact (certificate of the flattened 1-D product).

Non-finite inputs: as for one axis, the direct engine propagates NaN and inf as a direct sum
does; the transform engines compute with them set to zero and set to NaN every output a
non-finite input reaches (the product's support is a box per axis, so reach is a separable
box sum); finite inputs whose product overflows are computed scaled by powers of two.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from ..engines import fft_nd
from ..engines.fft_nd import GROUP_BYTES
from ..numerics.bounds import (
    convolution_error_bound,
    fft_error_bound,
    mixed_radix_levels_length,
    norm2_upper,
)
from ..numerics.budget import check_allocation, coefficient_bytes
from . import axes as ax
from . import inputs, shaping
from .nd_exact import convolve_exact_nd, plan_exact_nd
from .nd_plan import NdPlan, choose_float
from .prepare import _float_operand

#: Complex arrays the transform engines hold at once (two spectra; the inverse works in place).
TRANSFORM_ARRAYS = 2


def _prepared(a, b, axes, mode, method, modulus, length):
    """Validate everything; the pair, the modes, the windows and the checked modulus."""
    if length is not None:
        raise ValueError("length= is defined for one axis only; with axes= over several axes "
                         "use mode= (per axis) and slice the result")
    pair = ax.prepare_nd(a, b, axes)
    modes = ax.check_modes(mode, len(pair.axes))
    mod = inputs.check_modulus(modulus, pair.kind)
    if not isinstance(method, str):
        raise ValueError(f"method must be a string such as 'auto'; got {method!r}")
    return pair, modes, ax.windows(modes, *pair.shapes), mod


def _float_plan(pair: ax.NdPair, modes, windows, method) -> NdPlan:
    d = len(pair.axes)
    the_plan = choose_float(pair.kind, modes, *pair.shapes, pair.a.shape[:-d],
                            pair.b.shape[:-d], pair.batch_shape, pair.axes, windows, method)
    rows = math.prod(pair.batch_shape) if pair.batch_shape else 1
    result = rows * math.prod(the_plan.output_shape) * coefficient_bytes(pair.kind)
    work = 0.0
    if the_plan.engine == "overlap-add":  # the padded copy of the long operand, one group
        work = 8.0 * max(pair.a.size, pair.b.size) * (2 if pair.kind == "complex" else 1) \
            + TRANSFORM_ARRAYS * GROUP_BYTES
    elif the_plan.transform_shape:
        work = TRANSFORM_ARRAYS * 16.0 * math.prod(the_plan.transform_shape) * rows
    sa, sb = pair.shapes
    check_allocation(result + work, f"the product of a {sa} and b {sb} over axes={pair.axes}"
                     + (f" in a batch of {rows}" if rows > 1 else ""))
    return the_plan


def plan_nd(a, b, *, axes, mode="full", method="auto", modulus=None, length=None) -> NdPlan:
    """The :class:`NdPlan` :func:`convolve_nd` would follow, float error bound computed."""
    pair, modes, windows, mod = _prepared(a, b, axes, mode, method, modulus, length)
    if pair.kind in ("integer", "bigint"):
        return plan_exact_nd(pair, modes, windows, method, mod)
    the_plan = _float_plan(pair, modes, windows, method)
    return dataclasses.replace(the_plan, error_bound=float_bound_nd(the_plan, pair))


def convolve_nd(a, b, *, axes, mode="full", method="auto", modulus=None,
                length=None) -> tuple[np.ndarray, NdPlan]:
    """The product over ``axes`` (two or more) and the plan it followed (module notes)."""
    pair, modes, windows, mod = _prepared(a, b, axes, mode, method, modulus, length)
    if pair.kind in ("integer", "bigint"):
        out, the_plan = convolve_exact_nd(pair, modes, windows, method, mod)
        return ax.place_axes(out, pair.axes), the_plan
    the_plan = _float_plan(pair, modes, windows, method)
    work = shaping.float_work_dtype(pair.a.dtype, pair.b.dtype, pair.kind)
    x = _float_operand(pair.a, work, "a")
    y = _float_operand(pair.b, work, "b")
    if 0 in pair.batch_shape:
        out = np.zeros(pair.batch_shape + the_plan.output_shape, dtype=work)
    else:
        out = run_float(the_plan, x, y)
    return ax.place_axes(out, pair.axes), the_plan


def _engine(the_plan: NdPlan):
    """The kernel call of a float plan: ``product(x, y)``."""
    shape, windows, threads = the_plan.transform_shape, the_plan.windows, the_plan.threads
    if the_plan.engine == "direct":
        return lambda x, y: fft_nd.convolve_direct_nd(x, y, windows)
    if the_plan.engine == "fft":
        return lambda x, y: fft_nd.convolve_fftn(x, y, shape, windows, threads)

    def overlap_add(x, y):
        d = len(windows)
        if math.prod(x.shape[-d:]) < math.prod(y.shape[-d:]):
            x, y = y, x
        return fft_nd.convolve_overlap_add_nd(x, y, shape, the_plan.block_length,
                                              the_plan.block_axis, windows, threads)
    return overlap_add


def run_float(the_plan: NdPlan, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Run a float plan on prepared operands (axes last), with the non-finite policy."""
    product = _engine(the_plan)
    if the_plan.engine == "direct":
        return product(x, y)
    with np.errstate(invalid="ignore", over="ignore"):
        out = product(x, y)
    if np.isfinite(np.add.reduce(out, axis=None)) or np.isfinite(out).all():
        return out
    d = len(the_plan.axes)
    bad_x, bad_y = ~np.isfinite(x), ~np.isfinite(y)
    if bad_x.any() or bad_y.any():
        out = product(np.where(bad_x, 0, x), np.where(bad_y, 0, y))
        hit = _reach(bad_x, y.shape[-d:], the_plan.windows) | _reach(bad_y, x.shape[-d:],
                                                                   the_plan.windows)
        out = np.array(out, copy=True)
        out[np.broadcast_to(hit, out.shape)] = np.nan
        return out
    # scaled by powers of two (exact, real or complex; Python floats keep the precision)
    ex = math.frexp(float(np.max(np.abs(x))))[1]
    ey = math.frexp(float(np.max(np.abs(y))))[1]
    with np.errstate(invalid="ignore", over="ignore"):
        out = product(x * math.ldexp(1.0, -ex), y * math.ldexp(1.0, -ey))
        return out * math.ldexp(1.0, ex) * math.ldexp(1.0, ey)


def _reach(mask: np.ndarray, other: tuple, windows: tuple) -> np.ndarray:
    """Outputs (cut to ``windows``) that some true entry of ``mask`` contributes to when
    convolved with an operand of extents ``other``: a box sum of width ``w`` per axis,
    ``r[k] = S[k + w + 1] - S[k + 1]`` from the prefix sums ``S`` of the zero-padded mask."""
    d = len(other)
    count = mask.astype(np.int64)
    for k, width in enumerate(other):
        axis = count.ndim - d + k
        n = count.shape[axis]
        pad = [(0, 0)] * count.ndim
        pad[axis] = (width + 1, width - 1)  # one more zero in front: S[0] = 0
        prefix = np.cumsum(np.pad(count, pad), axis=axis)
        take = [slice(None)] * count.ndim
        take[axis] = slice(width + 1, n + 2 * width)
        upper = prefix[tuple(take)]
        take[axis] = slice(1, n + width)
        count = upper - prefix[tuple(take)]
    return (count > 0)[(Ellipsis,) + tuple(slice(start, stop) for start, stop in windows)]


def float_bound_nd(the_plan: NdPlan, pair: ax.NdPair) -> float:
    """Rigorous bound of any output's absolute error for a float plan (module notes)."""
    d = len(pair.axes)
    dtype = np.complex128 if pair.kind == "complex" else np.float64
    norms = []
    for arr in (pair.a, pair.b):
        rows = np.abs(np.asarray(arr, dtype=dtype)).reshape(-1, math.prod(arr.shape[-d:]))
        norms.append(max(norm2_upper(r) for r in rows))
    sa, sb = pair.shapes
    if the_plan.engine == "direct":
        terms = math.prod(min(n, m) for n, m in zip(sa, sb, strict=True))
        return convolution_error_bound("direct", norms[0], norms[1], None, terms)
    points = math.prod(mixed_radix_levels_length(n) for n in the_plan.transform_shape)
    bound = fft_error_bound(norms[0], norms[1], points)
    return 2 * bound if the_plan.engine == "overlap-add" else bound


def error_bound_nd(a, b, the_plan: NdPlan | None = None, *, axes) -> float:
    """:func:`polyconv.api.error_bound` for a product over ``axes``."""
    if the_plan is None:
        return plan_nd(a, b, axes=axes).error_bound
    if the_plan.exact:
        return 0.0
    return float_bound_nd(the_plan, ax.prepare_nd(a, b, axes))


def single_axis(axes):
    """The one axis ``axes`` names (an int or a one-entry sequence), else None: a product over
    one axis takes the 1-D pipeline."""
    if isinstance(axes, (int, np.integer)) and not isinstance(axes, bool):
        return axes
    try:
        items = tuple(axes)
    except TypeError:
        raise TypeError(f"axes must be an int or a sequence of ints, got "
                        f"{type(axes).__name__}") from None
    return items[0] if len(items) == 1 else None
