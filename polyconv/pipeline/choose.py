"""Planning for float operands: predict each engine's cost from measured constants and choose one.

The float chooser never computes a product.  It reads the cost table of
:mod:`polyconv.tuning.costs`, predicts
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

import math
from functools import lru_cache

from ..numerics.transforms import fast_length
from ..tuning import costs as _costs
from ..tuning.costs import fft_rate, load_costs
from ..tuning.threads import THREADS
from .plan import EXACT_ENGINES, Plan, check_method, format_seconds, output_length

# ----------------------------------------------------------------------------- cost predictions


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


def choose(kind: str, n1: int, n2: int, batch_a: tuple, batch_b: tuple, batch: tuple,
           mode: str = "full", method: str = "auto", keep: int | None = None) -> Plan:
    """Predict every capable engine's cost and return the Plan for the chosen one.

    Plans are immutable and depend only on these arguments and the cost table in force, so they
    are memoised (repeated calls on same-shaped data cost a dictionary look-up).

    Parameters
    ----------
    kind : str
        Operand kind from :func:`polyconv.pipeline.inputs.prepare_pair`.
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
