"""Validating ``axes=`` and the modes of a product over several axes at once.

The first stage of an N-D product (``validate -> plan -> engine -> shape``): the operands are
classified as for one axis (:mod:`polyconv.pipeline.inputs`), the convolution axes are checked
(integers, in range, no repeats, operands of one number of dimensions) and moved last in the
order given; the other axes broadcast as a batch (scipy.signal.fftconvolve's rule for ``axes=``).
Mode arithmetic per axis is that of :func:`polyconv.pipeline.plan.mode_window` (numpy.convolve's
definitions along each axis).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np

from . import inputs
from .plan import mode_window


@dataclass(frozen=True, slots=True)
class NdPair:
    """Two validated operands with the convolution axes moved last (in the order of ``axes``).

    Attributes
    ----------
    a, b : numpy.ndarray
        Batch axes first, then the ``d`` convolution axes.
    kind : str
        ``"real"``, ``"complex"``, ``"integer"`` or ``"bigint"``.
    batch_shape : tuple of int
        Broadcast shape of the batch axes.
    axes : tuple of int
        The user's axes, non-negative.
    shapes : tuple of (tuple of int, tuple of int)
        The operands' extents along the convolution axes.
    """

    a: np.ndarray
    b: np.ndarray
    kind: str
    batch_shape: tuple
    axes: tuple
    shapes: tuple


def normalise_axes(axes, ndim: int) -> tuple[int, ...]:
    """``axes`` as a tuple of distinct non-negative ints below ``ndim`` (an int is one axis).

    Raises
    ------
    TypeError
        When ``axes`` is not an int or a sequence of ints.
    ValueError
        On an empty sequence, an axis out of range or a repeated axis, naming ``axes``.
    """
    if isinstance(axes, (numbers.Integral, np.integer)) and not isinstance(axes, bool):
        axes = (axes,)
    try:
        items = tuple(axes)
    except TypeError:
        raise TypeError(f"axes must be an int or a sequence of ints, got "
                        f"{type(axes).__name__}") from None
    if not items:
        raise ValueError("axes must name at least one axis, got an empty sequence")
    out = []
    for ax in items:
        if isinstance(ax, bool) or not isinstance(ax, (numbers.Integral, np.integer)):
            raise TypeError(f"axes must hold ints, got {type(ax).__name__} in axes={items!r}")
        if not -ndim <= int(ax) < ndim:
            raise ValueError(f"axes={items!r}: axis {int(ax)} is out of range for operands "
                             f"with {ndim} dimensions")
        out.append(int(ax) % ndim)
    if len(set(out)) != len(out):
        raise ValueError(f"axes={items!r} names an axis more than once")
    return tuple(out)


def check_modes(mode, count: int) -> tuple[str, ...]:
    """One mode per convolution axis: a string applies to every axis, a sequence gives each."""
    if isinstance(mode, str):
        return (inputs.check_mode(mode),) * count
    try:
        modes = tuple(mode)
    except TypeError:
        raise TypeError(f"mode must be a string or a sequence of strings, got "
                        f"{type(mode).__name__}") from None
    if len(modes) != count:
        raise ValueError(f"mode gives {len(modes)} modes for {count} axes; give one string "
                         f"or one mode per entry of axes")
    for m in modes:
        if not isinstance(m, str):
            raise TypeError(f"mode must hold strings, got {type(m).__name__}")
        inputs.check_mode(m)
    return modes


def prepare_nd(a, b, axes) -> NdPair:
    """Validate two operands for a product over ``axes`` and move those axes last.

    Raises
    ------
    ValueError
        On operands of different numbers of dimensions, bad ``axes``, an operand empty along a
        convolution axis or batch axes that do not broadcast (each message names the argument).
    TypeError
        On non-numeric data or non-integer axes.
    """
    x = inputs.as_number_array(a, "a")
    y = inputs.as_number_array(b, "b")
    kind = inputs.combine_kinds(inputs.kind_of(x, "a"), inputs.kind_of(y, "b"))
    if x.ndim != y.ndim:
        raise ValueError(f"with axes=, a and b must have the same number of dimensions; got "
                         f"a.ndim={x.ndim} and b.ndim={y.ndim}")
    if x.ndim == 0:
        raise ValueError("a must be an array (at least 1-D) with axes=, got a scalar")
    norm = normalise_axes(axes, x.ndim)
    rest = [ax for ax in range(x.ndim) if ax not in norm]
    order = rest + list(norm)
    x, y = np.transpose(x, order), np.transpose(y, order)
    d = len(norm)
    sa, sb = tuple(x.shape[-d:]), tuple(y.shape[-d:])
    for shape, name in ((sa, "a"), (sb, "b")):
        if 0 in shape:
            raise ValueError(f"{name} is empty along a convolution axis (axes={norm}, extents "
                             f"{shape}): expected at least one element along each")
    try:
        batch = np.broadcast_shapes(x.shape[:-d], y.shape[:-d])
    except ValueError:
        raise ValueError(f"the other axes of a {x.shape[:-d]} and b {y.shape[:-d]} (all but "
                         f"axes={norm}) do not broadcast") from None
    return NdPair(x, y, kind, tuple(batch), norm, (sa, sb))


def windows(modes: tuple, shape_a: tuple, shape_b: tuple) -> tuple[tuple[int, int], ...]:
    """``(start, stop)`` of the full product that each axis' mode keeps."""
    return tuple(mode_window(m, n1, n2)
                 for m, n1, n2 in zip(modes, shape_a, shape_b, strict=True))


def place_axes(out: np.ndarray, axes: tuple) -> np.ndarray:
    """Undo :func:`prepare_nd`'s transpose: the convolution axes back where the user had them."""
    rest = [ax for ax in range(out.ndim) if ax not in axes]
    order = rest + list(axes)
    if order == list(range(out.ndim)):
        return out
    return np.transpose(out, np.argsort(order))
