"""The figure of a ``delays`` report: the end-to-end delay and its exceedance curve.

* left: probability of each grid point of the end-to-end delay, and on request
  (``report.stage_curves``) each named stage's, on one time axis;
* right: ``P(delay > x)`` on a log scale, with the band the error ledger allows (for measured
  stages the DKW band at the report's confidence) shaded around it;
* the time axis is logarithmic when the tail is heavy (``report.time_axis = "auto"``: the
  99.9th percentile more than :data:`HEAVY_RATIO` times the median) or when asked;
* deadlines and percentiles are marked where they fall inside the plotted range; markers
  outside it are not drawn and not listed in the legend (the tables carry every number).

Drawn on a bare ``matplotlib.figure.Figure`` with the Agg canvas and fixed margins (no pyplot,
no constrained layout): importing pyplot and solving the layout cost about a second of the
``delays`` command's run (measured with cProfile on the 20-stage benchmark,
``bench/latency_bench.py``).
"""

from __future__ import annotations

import math

import numpy as np

from ..dist import Lattice
from .plots import error_level
from .report import exceedance, fmt

HEAVY_RATIO = 8.0
"""p99.9 / p50 above which ``time_axis = "auto"`` draws a log time axis."""

MOST_STAGE_CURVES = 8
"""Most per-stage curves drawn (the first stages of the network in evaluation order)."""

MOST_POINTS = 2000
"""Most points of one drawn curve: longer grids are shown by block means (probabilities per
point, area kept) or block starts (the exceedance curve, monotone), so a 10^5-point grid draws
in a fraction of a second."""


def _thin(x: np.ndarray, y: np.ndarray, lo: float, hi: float, how: str):
    """``x, y`` within ``[lo, hi]`` with at most :data:`MOST_POINTS` points."""
    keep = (x >= lo) & (x <= hi)
    x, y = x[keep], y[keep]
    if x.size <= MOST_POINTS:
        return x, y
    block = -(-x.size // MOST_POINTS)
    m = x.size // block * block
    xs = x[:m:block]
    ys = y[:m].reshape(-1, block).mean(axis=1) if how == "mean" else y[:m:block]
    return xs, ys


def _q(lat: Lattice, p: float) -> float:
    """The grid point where the lattice's own cdf first reaches ``p`` (a point estimate for
    drawing only: no bracket, so a percentile the error band leaves open still places the
    axis; the last point when the grid holds less than ``p``)."""
    cdf = np.cumsum(np.asarray(lat.pmf, dtype=float))
    i = int(np.searchsorted(cdf, p * (1 - 1e-12)))
    return float(lat.origin + lat.step * min(i, cdf.size - 1))


def use_log_axis(lat: Lattice, axis: str) -> bool:
    """Whether the time axis is logarithmic (module docstring)."""
    if axis != "auto":
        return axis == "log"
    median = _q(lat, 0.5)
    return median > 0 and _q(lat, 0.999) > HEAVY_RATIO * median


DPI = 110
"""Resolution of the PNG."""


def _figure(size: tuple[float, float]):
    """A figure on the Agg canvas, outside pyplot's registry (nothing to close)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size)
    FigureCanvasAgg(fig)
    return fig


def warm() -> None:
    """Import the figure's matplotlib modules now (about 0.4 s of CPU): ``polyconv delays``
    calls it while the samples files are parsed on a worker thread
    (:mod:`polyconv.cli.delays_prefetch`), so the two overlap."""
    try:
        import matplotlib.backends.backend_agg  # noqa: F401
        import matplotlib.figure  # noqa: F401
    except ImportError:  # no figure then (the report says so)
        pass


def delays_figure(total: Lattice, **options) -> bytes:
    """The PNG of :func:`delays_panels` (same arguments)."""
    import io

    buf = io.BytesIO()
    delays_panels(total, **options).savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def delays_panels(total: Lattice, *, title: str, unit: str, axis: str = "auto",
                  stages: dict[str, Lattice] | None = None,
                  markers: list[tuple[str, float]] = (),
                  deadlines: list[tuple[float, float, float, float]] = ()):
    """The matplotlib figure (module docstring); ``deadlines`` are ``(deadline, value, low,
    high)``.  It is not registered with pyplot (garbage-collected when dropped)."""
    log_x = use_log_axis(total, axis)
    x = total.values
    pmf = np.asarray(total.pmf)
    sf = exceedance(total)
    band = min(float(total.errors.cumulative), float(total.errors.l1))
    noise = max(error_level(total), 1e-16)
    left = max(total.step, _q(total, 0.001)) if log_x else float(x[0])
    right = max(_q(total, 0.9999), *(v for _, v in markers), left * 1.5 + total.step)
    right = min(right * 1.05 + total.step, float(x[-1]) + total.step)
    fig = _figure((12, 6.2))
    ax1, ax2 = fig.subplots(1, 2)
    fig.subplots_adjust(left=0.075, right=0.985, top=0.9, bottom=0.34, wspace=0.2)
    fig.suptitle(title, fontsize=12)
    ax1.plot(*_thin(x, pmf, left, right, "mean"), color="#1f5f8b", lw=1.4,
             label="end-to-end delay")
    for i, (name, lat) in enumerate((stages or {}).items()):
        if i >= MOST_STAGE_CURVES:
            break
        ax1.plot(*_thin(lat.values, np.asarray(lat.pmf), left, right, "mean"), lw=0.9,
                 alpha=0.8, label=f"stage {name}")
    ax1.set_ylabel("probability of each grid point")
    ax1.set_title("distribution", y=1.0)  # y given: no title layout pass (0.3 s)
    xs, sfs = _thin(x, sf, left, right, "start")
    shown = np.where(sfs > noise * 1e-2, sfs, np.nan)
    ax2.step(xs, shown, where="post", color="#b2402a", lw=1.5, label="P(delay > x)")
    if band > 0:
        ax2.fill_between(xs, np.maximum(sfs - band, noise * 1e-2), np.minimum(sfs + band, 1.0),
                         step="post", color="#b2402a", alpha=0.15, lw=0,
                         label=f"band of the error ledger (+/- {band:.1e}; for measured "
                         "stages the sample-size band)")
    ax2.set_yscale("log")
    seen = sf[sf > noise * 1e-2]
    floor = max(noise * 1e-2, 0.1 * float(seen.min())) if seen.size else noise
    ax2.set_ylim(max(floor, 1e-16), 1.5)
    ax2.set_ylabel("probability of exceeding x (log scale)")
    ax2.set_title("exceedance curve", y=1.0)
    palette = ["#6a3d9a", "#33a02c", "#ff7f00", "#1f78b4", "#e31a1c", "#b15928"]
    for i, (label, v) in enumerate(markers):
        if not left <= v <= right:
            continue  # outside the plot: not drawn, not in the legend
        for ax in (ax1, ax2):
            ax.axvline(v, color=palette[i % len(palette)], lw=0.9, ls="-.",
                       label=f"{label}: {fmt(v)} {unit}" if ax is ax2 else None)
    for i, (d, miss, low, high) in enumerate(deadlines):
        if not left <= d <= right:
            continue
        text = f"missed with probability {miss:.2g}" if math.isfinite(miss) else \
            f"miss probability between {low:.2g} and {high:.2g}"
        ax2.axvline(d, color=str(0.2 + 0.4 * i / max(len(deadlines), 1)), lw=1.0, ls=":",
                    label=f"deadline {fmt(d)} {unit}: {text}")
    for ax in (ax1, ax2):
        if log_x:
            ax.set_xscale("log")
        ax.set_xlim(left if log_x else left - total.step, right)
        ax.set_xlabel(f"delay x ({unit}{', log scale' if log_x else ''})")
        ax.grid(alpha=0.3, which="both")
        ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(0.0, -0.12), frameon=False)
    return fig
