"""The plan of a product over several axes (:class:`NdPlan`) and the float chooser.

Float engines over ``d`` axes (kernels in :mod:`polyconv.engines.fft_nd`):

``"fft"``
    One pruned row-column real transform of shape ``N_1 x ... x N_d`` (``N_k`` a fast length
    ``>= n1_k + n2_k - 1``, or ``>= max`` for mode "valid" along that axis).  Cost: the 1-D FFT
    model of :func:`polyconv.engines.fft.predict_fft` at ``P = prod N_k`` points (a row-column
    transform does ``P log2 P`` butterfly work, as a 1-D transform of ``P`` points).
``"overlap-add"``
    Blocks along the axis where one operand is longest relative to the other, each block a
    transform of ``N_b x (the other N_k)``; offered when the operand is at least twice as long
    as the other there (blocks of at least ``m - 1``).  Cost: the block
    transforms (two thirds of a product each), one kernel spectrum, per-point accumulation
    (``costs["overlap_add"]["per_point"]``).
``"direct"``
    Shift-and-add, one pass per entry of the operand with fewer entries
    (``costs["direct_batch"]``: ``per_step`` per pass, ``per_element`` per entry added, twice
    that for the strided N-D views: a stated estimate).

The fastest offer wins unless ``method=`` forces one.  Integer operands are planned by
:mod:`polyconv.pipeline.nd_exact` (Kronecker substitution onto one axis).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..engines.direct import COMPLEX_MAC_FACTOR
from ..engines.fft import predict_fft, thread_speedup
from ..numerics import transforms as tf
from ..tuning.costs import load_costs
from ..tuning.threads import THREADS
from .plan import PlanHead, format_seconds

FLOAT_ND_METHODS = ("auto", "direct", "fft", "overlap-add")

#: Shift-and-add over N-D strided views costs about this many times the per-element constant of
#: the batched 1-D direct engine (measured here: 1.7x at 300 x 300 * 2 x 2, 6x at 1000 x 1000 *
#: 3 x 3 on a busy 2-core machine).
STRIDED_FACTOR = 4.0
#: A pruned row-column transform of ``P`` points costs about this many times the 1-D model at
#: ``P`` points (strided passes, the zero-padding copies; measured here at 1024^2 * 64^2).
ND_TRANSFORM_FACTOR = 2.5
#: Overlap-add's blocks cost this much more again (the block copies and moves, the additions;
#: measured here: 1.4-5x the one-shot transform at 200^2 * 20^2 .. 1000^2 * 3^2).
OVERLAP_ADD_FACTOR = 2.0


@dataclass(frozen=True, slots=True)
class NdPlan(PlanHead):
    """How a product over several axes will be computed, and why.

    Attributes
    ----------
    engine : str
        ``"direct"``, ``"fft"``, ``"overlap-add"`` (floats) or ``"kronecker-nd"`` (integers:
        the axes flattened into one, then the 1-D exact product of :attr:`flat`).
    exact, certificate, error_bound, predicted_seconds, reason, kind, threads, modulus,
    output_int64, alternatives
        As in :class:`polyconv.pipeline.plan.Plan`.
    axes : tuple of int
        The convolution axes (non-negative, in the order given).
    modes : tuple of str
        The mode along each axis.
    shapes : ((int, ...), (int, ...))
        The operands' extents along the axes.
    batch_shape : tuple of int
        Broadcast shape of the other axes.
    output_shape : tuple of int
        The result's extents along the axes.
    windows : tuple of (int, int)
        The entries of the full product kept along each axis.
    transform_shape : tuple of int or None
        Transform lengths (per block for overlap-add).
    block_length : int or None
        Overlap-add block length along :attr:`block_axis`.
    block_axis : int or None
        Which convolution axis (counted in :attr:`axes`) overlap-add cuts.
    flat : Plan or None
        For integers: the 1-D plan of the flattened product (its certificate applies).
    flat_lengths : (int, int) or None
        Lengths of the flattened operands.
    """

    kind: str
    axes: tuple
    modes: tuple
    shapes: tuple
    batch_shape: tuple
    output_shape: tuple
    windows: tuple
    transform_shape: tuple | None = None
    block_length: int | None = None
    block_axis: int | None = None
    threads: int = 1
    alternatives: tuple = field(default=())
    modulus: int | None = None
    output_int64: bool = False
    flat: object = None
    flat_lengths: tuple | None = None

    def __str__(self) -> str:
        sa, sb = self.shapes
        batch = f" x batch {self.batch_shape}" if self.batch_shape else ""
        modes = self.modes[0] if len(set(self.modes)) == 1 else self.modes
        lines = [
            f"polyconv plan: {self.engine} over axes {self.axes} for {self.kind} operands of "
            f"extents {sa} and {sb}{batch}, mode {modes!r} -> {self.output_shape}",
            *self._verdict_lines("0 (exact)" if self.error_bound == 0 else
                                 "not computed" if math.isinf(self.error_bound) else
                                 f"{self.error_bound:.3g} (absolute, any coefficient)"),
        ]
        if self.transform_shape:
            shape = " x ".join(map(str, self.transform_shape))
            detail = f"  transform:   {shape}"
            if self.block_length:
                detail += f", blocks of {self.block_length} along axis {self.block_axis_user}"
            lines.append(detail + f", {self.threads} thread{'s' if self.threads != 1 else ''}")
        if self.flat is not None:
            lines.append(f"  flattened:   lengths {self.flat_lengths[0]} and "
                         f"{self.flat_lengths[1]} -> 1-D {self.flat.engine}")
        if self.modulus is not None:
            lines.append(f"  modulus:     {self.modulus} (outputs in [0, modulus))")
        if self.exact:
            lines.append(f"  output:      {'int64' if self.output_int64 else 'Python ints'}")
        if len(self.alternatives) > 1:
            lines.append("  considered:  " + ", ".join(
                f"{name} {format_seconds(t)}" for name, t in self.alternatives))
        return "\n".join(lines)

    @property
    def block_axis_user(self) -> int | None:
        """The user's axis overlap-add cuts."""
        return None if self.block_axis is None else self.axes[self.block_axis]


def transform_shape(modes: tuple, sa: tuple, sb: tuple, real: bool) -> tuple:
    """Fast transform lengths per axis: ``>= n1 + n2 - 1``, or ``>= max(n1, n2)`` for "valid"
    (the last axis real when the operands are)."""
    d = len(sa)
    return tuple(tf.fast_length(max(n1, n2) if m == "valid" else n1 + n2 - 1,
                                real=real and k == d - 1)
                 for k, (m, n1, n2) in enumerate(zip(modes, sa, sb, strict=True)))


def _fft_seconds(costs: dict, points: int, work: float) -> tuple[float, int]:
    """Predicted seconds and threads of transform work on ``points``-point transforms."""
    speed = thread_speedup(costs, int(points * work), THREADS, True)
    threads = THREADS if speed > 1 else 1
    return ND_TRANSFORM_FACTOR * predict_fft(costs, max(points, 2), work, threads, True), threads


def _offers(kind: str, modes: tuple, sa: tuple, sb: tuple, rows: tuple) -> dict:
    """Every float engine's offer: name -> (seconds, settings)."""
    costs = load_costs()
    real = kind != "complex"
    factor = 1.0 if real else 2.0
    rows_a, rows_b, rows_out = rows
    shape = transform_shape(modes, sa, sb, real)
    work = (rows_a + rows_b + rows_out) / 3.0 * factor
    seconds, threads = _fft_seconds(costs, math.prod(shape), work)
    offers = {"fft": (seconds, {"transform_shape": shape, "threads": threads})}
    small, big = sorted((math.prod(sa), math.prod(sb)))
    c = costs["direct_batch"]
    mac = COMPLEX_MAC_FACTOR if not real else 1.0
    offers["direct"] = (c["overhead"] + small * (
        c["per_step"] + STRIDED_FACTOR * mac * c["per_element"] * rows_out * big), {})
    oa = _overlap_add_offer(costs, modes, sa, sb, rows, shape, factor, real)
    if oa is not None:
        offers["overlap-add"] = oa
    return offers


def _overlap_add_offer(costs, modes, sa, sb, rows, shape, factor, real):
    """The cheapest overlap-add along the axis of largest length ratio, or None."""
    if math.prod(sa) < math.prod(sb):
        sa, sb, rows = sb, sa, (rows[1], rows[0], rows[2])
    ratios = [n / m for n, m in zip(sa, sb, strict=True)]
    axis = max(range(len(sa)), key=ratios.__getitem__)
    n, m = sa[axis], sb[axis]
    if n < 2 * m:
        return None
    c = costs["overlap_add"]
    others = math.prod(shape) // shape[axis]
    best = None
    size = tf.fast_length(max(2 * m - 1, 2), real=real and axis == len(sa) - 1)
    while size < shape[axis]:
        block = size - m + 1
        if block >= max(m - 1, 1):
            blocks = -(-n // block)
            points = size * others
            work = (2 * blocks * max(rows[0], rows[2]) + rows[1]) / 3.0 * factor
            seconds, threads = _fft_seconds(costs, points, work)
            seconds = OVERLAP_ADD_FACTOR * (seconds + c["per_point"] * blocks * points * rows[2])
            if best is None or seconds < best[0]:
                tshape = shape[:axis] + (size,) + shape[axis + 1:]
                best = (seconds, {"transform_shape": tshape, "threads": threads,
                                  "block_length": block, "block_axis": axis})
        size = tf.fast_length(size * 2, real=real and axis == len(sa) - 1)
    return best


def choose_float(kind: str, modes: tuple, sa: tuple, sb: tuple, batch_a: tuple,
                 batch_b: tuple, batch: tuple, axes: tuple, windows: tuple,
                 method: str) -> NdPlan:
    """The :class:`NdPlan` of a float product: the fastest offer, or the forced ``method``."""
    if method not in FLOAT_ND_METHODS:
        raise ValueError(f"method must be one of {', '.join(map(repr, FLOAT_ND_METHODS))} for "
                         f"a float product over axes={axes}; got {method!r}")
    rows = tuple(math.prod(s) if s else 1 for s in (batch_a, batch_b, batch))
    offers = _offers(kind, modes, sa, sb, rows)
    if method == "overlap-add" and method not in offers:
        raise ValueError(f"method='overlap-add' cannot run here: over axes={axes} neither "
                         "operand is at least twice as long as the other along one axis")
    ranked = tuple(sorted(((k, v[0]) for k, v in offers.items()), key=lambda kv: kv[1]))
    name = ranked[0][0] if method == "auto" else method
    seconds, settings = offers[name]
    return NdPlan(name, False, "none", math.inf, seconds, _reason(name, method, ranked, axes,
                                                                  settings, sa, sb),
                  kind, axes, modes, (sa, sb), batch,
                  tuple(stop - start for start, stop in windows), windows,
                  transform_shape=settings.get("transform_shape"),
                  block_length=settings.get("block_length"),
                  block_axis=settings.get("block_axis"), threads=settings.get("threads", 1),
                  alternatives=ranked)


def _reason(name, method, ranked, axes, settings, sa, sb) -> str:
    what = {
        "fft": lambda: (f"one {len(axes)}-D real transform of "
                        f"{' x '.join(map(str, settings['transform_shape']))} over axes {axes}"),
        "direct": lambda: (f"direct shift-and-add over axes {axes} "
                           f"({min(math.prod(sa), math.prod(sb))} passes)"),
        "overlap-add": lambda: (f"overlap-add along axis {axes[settings['block_axis']]} "
                                f"in blocks of {settings['block_length']}, each a "
                                f"{' x '.join(map(str, settings['transform_shape']))} "
                                f"transform over axes {axes}"),
    }[name]()
    if method != "auto":
        return f"{what}, requested with method={method!r}"
    reason = f"{what} is predicted fastest ({format_seconds(ranked[0][1])}"
    if len(ranked) > 1:
        reason += "; " + ", ".join(f"{k} {format_seconds(t)}" for k, t in ranked[1:])
    return reason + ")"
