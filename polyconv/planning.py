"""Planning: predict each engine's cost from measured constants and choose one.

The chooser never computes a product.  It reads the cost table of :mod:`polyconv.costs`, predicts
seconds for every engine that can do the job, and returns a :class:`Plan` naming the fastest (or the
one the caller forced with ``method=``), with the parameters the engine needs (transform length,
block length, threads) and one sentence saying why.

Cost formulas (constants from the table; ``lg = log2``)

* direct, 1-D:     ``t = c0 + c_mac n1 n2 + c_out (n1 + n2)``
* direct, batched: ``t = c0 + m (c_step + c_elem B n)`` (``m`` shift-and-add passes over ``B n``)
* fft:             ``t = c0 + r(N) N lg N w``, ``w`` = transforms relative to one 1-D product
                   (batch sizes, 2x for complex), ``r`` interpolated from a table measured per lg N
* overlap-add:     ``t = c0 + r(N) N lg N (2 q B + 1) / 3 + c_pt q N B (+ c_big n B)`` for
                   ``q`` blocks of transform length ``N``; the block length minimising ``t`` is
                   chosen; one thread (each group of blocks is too small to split).
* arrays of ``LARGE_ARRAY`` entries and more pay a per-sample memory term (direct: the
  per-output constant is fitted on large arrays separately).
"""

from __future__ import annotations

import bisect
import math
import os
from dataclasses import dataclass, field
from functools import lru_cache

from . import costs as _costs
from .costs import load_costs
from .fastlen import fast_length

FLOAT_ENGINES = ("direct", "fft", "overlap-add")
EXACT_ENGINES = ("direct-exact", "fft-exact", "limbs", "kronecker", "ntt", "ntt-compiled")
METHODS = ("auto",) + FLOAT_ENGINES + EXACT_ENGINES

_CERTIFICATES = ("bound", "check", "construction", "none")


@dataclass(frozen=True, slots=True)
class Plan:
    """How one convolution will be computed, and why.

    Attributes
    ----------
    engine : str
        The engine that will run: ``"direct"``, ``"fft"``, ``"overlap-add"`` (floats);
        ``"direct-exact"``, ``"fft-exact"``, ``"limbs"``, ``"kronecker"``, ``"ntt"`` (integers).
    exact : bool
        True when every output coefficient is exactly the mathematical result.
    certificate : str
        Why the result can be trusted: ``"bound"`` (a rigorous a-priori error bound proves it),
        ``"check"`` (an a-posteriori check proves it), ``"construction"`` (exact arithmetic), or
        ``"none"`` (ordinary floating point; no claim beyond the usual rounding).
    error_bound : float
        Maximum absolute error of any output coefficient: ``0.0`` when exact, ``inf`` when no
        rigorous bound has been computed for this plan.
    predicted_seconds : float
        The cost model's prediction for the chosen engine.
    reason : str
        One sentence explaining the choice.
    kind : str
        Arithmetic kind of the operands (``"real"``, ``"complex"``, ``"integer"``, ``"bigint"``).
    mode : str
        ``"full"``, ``"same"`` or ``"valid"``.
    lengths : tuple of int
        ``(n1, n2)``, the operand lengths along the convolution axis.
    batch_shape : tuple of int
        Broadcast shape of the other axes.
    output_length : int
        Length of the result along the convolution axis.
    transform_length : int or None
        FFT length (per block for overlap-add).
    block_length : int or None
        Overlap-add block length.
    threads : int
        Threads the engine may use.
    alternatives : tuple of (str, float)
        Every engine considered with its predicted seconds, fastest first.
    settings : tuple of (str, value)
        Further engine parameters (limb sizes and counts for "limbs").
    fallback : str or None
        For certificate "check": the engine that recomputes the product if the check fails.
    modulus : int or None
        The modulus outputs are reduced by.
    output_int64 : bool
        For exact plans: whether the result is returned as int64 (else Python ints).
    """

    engine: str
    exact: bool
    certificate: str
    error_bound: float
    predicted_seconds: float
    reason: str
    kind: str = "real"
    mode: str = "full"
    lengths: tuple = (0, 0)
    batch_shape: tuple = ()
    output_length: int = 0
    transform_length: int | None = None
    block_length: int | None = None
    threads: int = 1
    alternatives: tuple = field(default=())
    settings: tuple = ()
    fallback: str | None = None
    modulus: int | None = None
    output_int64: bool = False

    def setting(self, name: str, default=None):
        """The engine parameter ``name`` from :attr:`settings` (``default`` if absent)."""
        for key, value in self.settings:
            if key == name:
                return value
        return default

    def __str__(self) -> str:
        n1, n2 = self.lengths
        batch = f" x batch {self.batch_shape}" if self.batch_shape else ""
        lines = [
            f"polyconv plan: {self.engine} for {self.kind} operands of lengths {n1} and {n2}"
            f"{batch}, mode {self.mode!r} -> {self.output_length} outputs",
            f"  why:         {self.reason}",
            f"  predicted:   {format_seconds(self.predicted_seconds)}",
            f"  exact:       {'yes' if self.exact else 'no'} (certificate: {self.certificate})",
            f"  error bound: {_fmt_bound(self.error_bound)}",
        ]
        if self.transform_length:
            detail = f"  transform:   length {self.transform_length}"
            if self.block_length:
                detail += f", blocks of {self.block_length}"
            detail += f", {self.threads} thread{'s' if self.threads != 1 else ''}"
            lines.append(detail)
        elif self.threads > 1:
            lines.append(f"  threads:     {self.threads}")
        if self.settings:
            lines.append("  settings:    " + ", ".join(f"{k}={v}" for k, v in self.settings))
        if self.modulus is not None:
            lines.append(f"  modulus:     {self.modulus} (outputs in [0, modulus))")
        if self.exact:
            lines.append(f"  output:      {'int64' if self.output_int64 else 'Python ints'}")
        if self.fallback:
            lines.append(f"  fallback:    {self.fallback} (if the check fails)")
        if len(self.alternatives) > 1:
            others = ", ".join(f"{name} {format_seconds(t)}" for name, t in self.alternatives)
            lines.append(f"  considered:  {others}")
        return "\n".join(lines)


def format_seconds(t: float) -> str:
    if t < 1e-3:
        return f"{t * 1e6:.1f} us"
    if t < 1.0:
        return f"{t * 1e3:.2f} ms"
    return f"{t:.2f} s"


def _fmt_bound(bound: float) -> str:
    if bound == 0.0:
        return "0 (exact)"
    if math.isinf(bound):
        return "not computed (floating point, no rigorous bound claimed)"
    return f"{bound:.3g} (absolute, any coefficient)"


def configured_threads() -> int:
    """Threads polyconv may use: ``POLYCONV_THREADS`` if set, else the usable CPU count."""
    env = os.environ.get("POLYCONV_THREADS")
    if env:
        try:
            return max(1, int(env))
        except ValueError:
            pass
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


#: Threads the planners allow (read once, at import).
THREADS = configured_threads()


# ----------------------------------------------------------------------------- cost predictions


class _RateTable:
    """The ``rate_by_log2n`` table as sorted arrays, built once per cost table."""

    __slots__ = ("source", "xs", "ys")

    def __init__(self, table: dict):
        self.source = table
        pairs = sorted((int(k), float(v)) for k, v in table.items())
        self.xs = [p[0] for p in pairs]
        self.ys = [p[1] for p in pairs]

    def at(self, x: float) -> float:
        xs, ys = self.xs, self.ys
        if x <= xs[0]:
            return ys[0]
        if x >= xs[-1]:
            return ys[-1]
        i = bisect.bisect_right(xs, x)
        w = (x - xs[i - 1]) / (xs[i] - xs[i - 1])
        return ys[i - 1] * (1.0 - w) + ys[i] * w


_rates: _RateTable | None = None


def fft_rate(costs: dict, n_fft: int) -> float:
    """Seconds per ``N log2 N`` of one real 1-D FFT product at length ``N``, interpolated."""
    global _rates
    table = costs["fft"]["rate_by_log2n"]
    if _rates is None or _rates.source is not table:
        _rates = _RateTable(table)
    return _rates.at(math.log2(max(n_fft, 2)))


def thread_speedup(costs: dict, points: int, threads: int, batched: bool) -> float:
    """Predicted speed-up from threads for a transform job of ``points`` total points."""
    t = costs["threads"]
    if threads < 2 or points < t["min_points"]:
        return 1.0
    return t["speedup_batch"] if batched else t["speedup_1d"]


#: Arrays from this many entries on (2 MiB of float64) no longer fit in the CPU cache: the direct
#: and overlap-add engines then pay memory traffic per sample, fitted separately.
LARGE_ARRAY = 2**18


def predict_direct(costs: dict, n1: int, n2: int, batch: int, mac_factor: float = 1.0) -> float:
    """Seconds for the direct engine (``mac_factor``: cost of one multiply-add relative to real
    float64, about 3.3 for complex, measured here)."""
    if batch == 1:
        c = costs["direct"]
        per_output = c["per_output_large"] if n1 + n2 >= LARGE_ARRAY else c["per_output"]
        return c["overhead"] + mac_factor * (c["per_mac"] * n1 * n2 + per_output * (n1 + n2))
    c = costs["direct_batch"]
    return c["overhead"] + min(n1, n2) * (
        c["per_step"] + mac_factor * c["per_element"] * batch * max(n1, n2))


def predict_fft(costs: dict, n_fft: int, work: float, threads: int, batched: bool) -> float:
    """Seconds for the fft engine: ``work`` counts 1-D real products of length ``n_fft``."""
    c = costs["fft"]
    flops = n_fft * math.log2(n_fft) * work
    speed = thread_speedup(costs, int(n_fft * work), threads, batched)
    return c["overhead"] + fft_rate(costs, n_fft) * flops / speed


def predict_overlap_add(costs: dict, n: int, m: int, n_fft: int, batch: int, complex_factor: float,
                        threads: int) -> float:
    """Seconds for overlap-add with block transforms of length ``n_fft``."""
    c = costs["overlap_add"]
    block = n_fft - m + 1
    blocks = -(-n // block)
    transforms = (2 * blocks * batch + 1) / 3 * complex_factor
    big = c["per_sample_large"] * n * batch if n * batch >= LARGE_ARRAY else 0.0
    return (c["overhead"] + fft_rate(costs, n_fft) * n_fft * math.log2(n_fft) * transforms
            + c["per_point"] * blocks * n_fft * batch + big)


def best_overlap_add(costs: dict, n: int, m: int, batch: int, complex_factor: float,
                     threads: int) -> tuple[float, int] | None:
    """Cheapest overlap-add transform length for a long ``n`` and a kernel ``m``, or None.

    Candidates are fast lengths from about ``2m`` up to below the one-shot transform length; a
    block must be at least ``m - 1`` long so that its tail overlaps only the next block.
    """
    full = fast_length(n + m - 1)
    best = None
    size = fast_length(max(2 * m, 16))
    while size < full:
        if size - m + 1 >= max(m - 1, 1):
            t = predict_overlap_add(costs, n, m, size, batch, complex_factor, threads)
            if best is None or t < best[0]:
                best = (t, size)
        size = fast_length(size * 2)
    return best


# ----------------------------------------------------------------------------- the chooser


def _prod(shape) -> int:
    p = 1
    for s in shape:
        p *= s
    return p


def output_length(mode: str, n1: int, n2: int) -> int:
    """Length along the axis of a ``mode`` convolution (numpy.convolve's definitions)."""
    if mode == "full":
        return n1 + n2 - 1
    if mode == "same":
        return max(n1, n2)
    return max(n1, n2) - min(n1, n2) + 1


def check_method(method) -> str:
    """Return ``method`` if it names "auto" or an engine, else raise ValueError."""
    if not isinstance(method, str) or method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(map(repr, METHODS))}; got {method!r}")
    return method


def choose(kind: str, n1: int, n2: int, batch_a: tuple, batch_b: tuple, batch: tuple,
           mode: str = "full", method: str = "auto", keep: int | None = None) -> Plan:
    """Predict every capable engine's cost and return the Plan for the chosen one.

    Plans are immutable and depend only on these arguments and the cost table in force, so they
    are memoised (repeated calls on same-shaped data cost a dictionary look-up).

    Parameters
    ----------
    kind : str
        Operand kind from :func:`polyconv.inputs.prepare_pair`.
    n1, n2 : int
        Operand lengths along the convolution axis.
    batch_a, batch_b, batch : tuple of int
        Leading shapes of ``a``, ``b`` and their broadcast.
    mode : str
        Validated mode.
    method : str
        ``"auto"`` or an engine name.
    keep : int, optional
        Entries of the full product needed (default all ``n1 + n2 - 1``).

    Raises
    ------
    ValueError
        If ``method`` is unknown or cannot handle this kind of operand.
    """
    check_method(method)
    if _costs.generation == 0:
        load_costs()
    return _choose_cached(_costs.generation, kind, n1, n2, batch_a, batch_b, batch, mode, method,
                          keep)


@lru_cache(maxsize=4096)
def _choose_cached(generation: int, kind: str, n1: int, n2: int, batch_a: tuple, batch_b: tuple,
                   batch: tuple, mode: str, method: str, keep: int | None) -> Plan:
    full = n1 + n2 - 1
    out_len = output_length(mode, n1, n2) if keep is None else keep
    common = dict(kind=kind, mode=mode, lengths=(n1, n2), batch_shape=batch, output_length=out_len)
    if method in EXACT_ENGINES:
        raise ValueError(
            f"method={method!r} is an exact integer engine; a and b hold {kind} numbers")

    costs = load_costs()
    threads = THREADS
    b_out = _prod(batch)
    b_a, b_b = _prod(batch_a), _prod(batch_b)
    cfac = 2.0 if kind == "complex" else 1.0
    batched = b_out > 1

    # transform length: valid needs only max(n1, n2) (wrap-around lands in dropped entries)
    need = max(n1, n2) if mode == "valid" else (full if keep is None else full)
    n_fft = fast_length(need, real=kind != "complex")
    work = (b_a + b_b + b_out) / 3.0 * cfac
    options = {
        "direct": predict_direct(costs, n1, n2, b_out, 3.3 if cfac > 1 else 1.0),
        "fft": predict_fft(costs, n_fft, work, threads, batched),
    }
    oa = None
    if mode != "valid" and min(n1, n2) > 1:
        n_long, n_short = max(n1, n2), min(n1, n2)
        batch_long = b_a if n1 >= n2 else b_b
        oa = best_overlap_add(costs, n_long, n_short, max(batch_long, 1), cfac, threads)
        if oa is not None:
            options["overlap-add"] = oa[0]
    ranked = tuple(sorted(options.items(), key=lambda kv: kv[1]))

    if method == "auto":
        engine = ranked[0][0]
        runner_up = ranked[1] if len(ranked) > 1 else None
        reason = f"{engine} is predicted fastest ({format_seconds(ranked[0][1])}"
        reason += f"; next {runner_up[0]} {format_seconds(runner_up[1])})" if runner_up else ")"
    else:
        if method not in options:
            raise ValueError(
                f"method={method!r} cannot run here: overlap-add needs mode 'full' or 'same' and "
                "a kernel shorter than half the long operand"
            )
        engine = method
        reason = f"{engine} was requested with method={method!r}"
    transform = block = None
    engine_threads = 1
    if engine == "fft":
        transform = n_fft
        engine_threads = threads if thread_speedup(costs, int(n_fft * work), threads,
                                                   batched) > 1 else 1
    elif engine == "overlap-add":
        transform = oa[1]
        block = transform - min(n1, n2) + 1  # one thread: a group's transform is too small to split
    return Plan(engine, False, "none", math.inf, options[engine], reason,
                transform_length=transform, block_length=block, threads=engine_threads,
                alternatives=ranked, **common)
