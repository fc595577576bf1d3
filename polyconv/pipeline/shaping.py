"""The last stage: turn an engine's full product into the requested mode, dtype and axis.

Also the small helpers that sit between validation and the engines: the working float dtype and
the non-finite policy of the transform engines (see :func:`polyconv.convolve`).
"""

from __future__ import annotations

import math

import numpy as np

from .plan import Plan, mode_window

_F32 = np.dtype(np.float32)
_F64 = np.dtype(np.float64)
_C128 = np.dtype(np.complex128)


_work_dtypes: dict = {}


def float_work_dtype(dx: np.dtype, dy: np.dtype, kind: str) -> np.dtype:
    """Floating dtype to compute in: numpy's promotion, at least float32, objects as float64.

    Integer operands mixed with floats are promoted as numpy promotes them (int64 with float32
    gives float64).
    """
    key = (dx, dy, kind)
    dt = _work_dtypes.get(key)
    if dt is None:
        fx = (_C128 if kind == "complex" else _F64) if dx.kind == "O" else dx
        fy = (_C128 if kind == "complex" else _F64) if dy.kind == "O" else dy
        dt = np.result_type(fx, fy, np.float16)
        if dt.itemsize < 4 and dt.kind == "f":
            dt = _F32
        if dt.kind in "iub":
            dt = _F64
        _work_dtypes[key] = dt
    return dt


def shape_result(full: np.ndarray, the_plan: Plan, out_axis: int,
                 length: int | None) -> np.ndarray:
    """Slice an engine's product to the plan's mode, pad a truncation, put the axis back."""
    mode = the_plan.mode
    if mode == "full" and length is None and full.ndim == 1:
        return full if full.shape[0] == the_plan.output_length else full[: the_plan.output_length]
    if mode == "full":
        out = full[..., : the_plan.output_length]
        if length is not None and length > out.shape[-1]:
            pad = np.zeros(out.shape[:-1] + (length - out.shape[-1],), dtype=out.dtype)
            if out.dtype == object:
                pad[...] = 0
            out = np.concatenate([out, pad], axis=-1)
    else:
        start, stop = mode_window(mode, *the_plan.lengths)
        out = full[..., start:stop]
    if out.ndim > 1 and out_axis != out.ndim - 1:
        out = np.moveaxis(out, -1, out_axis)
    return out


def empty_result(the_plan: Plan, kind: str, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """A full-length result for a batch with no members (some batch axis has size 0)."""
    n1, n2 = the_plan.lengths
    length = the_plan.output_length if the_plan.mode == "full" else n1 + n2 - 1
    if kind in ("integer", "bigint"):
        dtype = np.dtype(np.int64)
    else:
        dtype = float_work_dtype(x.dtype, y.dtype, kind)
    return np.zeros(the_plan.batch_shape + (length,), dtype=dtype)


def _all_finite(x: np.ndarray) -> bool:
    total = np.add.reduce(x, axis=None)
    if np.isfinite(total):
        return True
    return bool(np.isfinite(x).all())  # a finite array whose sum overflowed


def looks_finite(out: np.ndarray, first_entries_only: bool) -> bool:
    """Cheap test that a transform engine saw no NaN or inf.

    A non-finite input entry makes every bin of its spectrum non-finite, and every output of an
    inverse transform is a sum over all bins; so one output per transform tells (the first entry
    of each row for the fft engine; overlap-add has a transform per block, so all entries).  A
    false alarm (a finite sum that overflowed) only costs a careful look at the inputs.
    """
    if first_entries_only:
        if out.ndim == 1 and out.dtype.kind == "f":
            return math.isfinite(out[0])
        return bool(np.isfinite(out[..., 0]).all())
    return bool(np.isfinite(np.add.reduce(out, axis=None)))


def nonfinite_masks(x: np.ndarray, y: np.ndarray):
    """``None`` when both operands are finite, else their boolean masks of non-finite entries."""
    if _all_finite(x) and _all_finite(y):
        return None
    return ~np.isfinite(x), ~np.isfinite(y)


def zero_nonfinite(x: np.ndarray) -> np.ndarray:
    """A copy of ``x`` with NaN and inf entries set to zero (``x`` itself if none)."""
    bad = ~np.isfinite(x)
    if not bad.any():
        return x
    x = x.copy()
    x[bad] = 0
    return x


def run_scaled(product, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """``product(x, y)`` computed as ``2^(ex + ey) product(x 2^-ex, y 2^-ey)`` per row.

    ``2^e`` is the power of two just above each row's largest magnitude, so the scaled operands
    lie below 1 and no transform overflows; scaling by powers of two is exact (``numpy.ldexp``,
    save entries pushed below the normal range, which lose less than ``2^-1074`` times the
    scale, far inside the float error bound), and the final ``ldexp`` rounds once, giving
    ``+-inf`` exactly where the coefficient overflows float64, as numpy.convolve does.  Operands
    must be finite.
    """
    ex, ey = _row_exponents(x), _row_exponents(y)
    with np.errstate(invalid="ignore", over="ignore"):
        out = product(_ldexp(x, -ex), _ldexp(y, -ey))
        return _ldexp(out, ex + ey)


def _row_exponents(x: np.ndarray) -> np.ndarray:
    largest = np.max(np.abs(x), axis=-1, keepdims=True)
    return np.frexp(largest)[1]


def _ldexp(x: np.ndarray, e: np.ndarray) -> np.ndarray:
    if x.dtype.kind != "c":
        return np.ldexp(x, e.astype(np.int32))
    out = np.empty(np.broadcast_shapes(x.shape, e.shape), dtype=x.dtype)
    out.real = np.ldexp(x.real, e.astype(np.int32))
    out.imag = np.ldexp(x.imag, e.astype(np.int32))
    return out


def _windows_hit(mask: np.ndarray, width: int) -> np.ndarray:
    """Full-product positions ``k`` with some ``mask[i]`` true for ``k - width < i <= k``."""
    n = mask.shape[-1]
    running = np.zeros(mask.shape[:-1] + (n + width - 1,), dtype=np.int64)
    np.cumsum(mask, axis=-1, out=running[..., :n])
    running[..., n:] = running[..., n - 1: n]
    window = running.copy()
    window[..., width:] -= running[..., : n - 1]
    return window > 0


def mark_nonfinite(out: np.ndarray, masks, n1: int, n2: int) -> np.ndarray:
    """Set to NaN every output that a non-finite input entry contributes to."""
    mask_x, mask_y = masks
    hit = np.logical_or(_windows_hit(mask_x, n2), _windows_hit(mask_y, n1))
    hit = np.broadcast_to(hit[..., : out.shape[-1]], out.shape)
    if hit.any():
        out = np.array(out, copy=True)
        out[hit] = np.nan
    return out
