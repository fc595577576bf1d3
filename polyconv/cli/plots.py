"""PNG figures for the reports (matplotlib, Agg backend, imported only when a figure is drawn).

matplotlib is the optional extra ``plot``; without it :func:`available` is False and the commands
skip their figures with a one-line note.  Figures are rendered to bytes so the caller can write
them atomically.
"""

from __future__ import annotations

import io
from collections.abc import Sequence

import numpy as np

from ..dist import Lattice
from .report import exceedance

MISSING_NOTE = "figures skipped: matplotlib is not installed (pip install 'polyconv[plot]')"


def available() -> bool:
    """True when matplotlib can be imported."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def distribution_figure(lat: Lattice, *, title: str, quantity: str, unit: str,
                        markers: Sequence[tuple[str, float]] = (),
                        deadlines: Sequence[float] = (), floor_label: str = "trust floor"
                        ) -> bytes:
    """Two panels: the probability of each grid point, and the exceedance curve on a log scale.

    Parameters
    ----------
    lat : Lattice
        The distribution.
    title : str
        Figure title.
    quantity : str
        What the axis measures, e.g. ``"aggregate loss"`` or ``"end-to-end delay"``.
    unit : str
        Unit of the values, e.g. ``"EUR"`` or ``"ms"``.
    markers : sequence of (label, value)
        Vertical lines (e.g. VaR or percentiles) drawn on both panels.
    deadlines : sequence of float
        Vertical dotted lines on the exceedance panel.
    floor_label : str
        Legend text of the horizontal trust-floor line.

    Returns
    -------
    bytes
        The PNG.
    """
    plt = _pyplot()
    x = lat.values
    pmf = np.asarray(lat.pmf)
    sf = exceedance(lat)
    floor = lat.trust_floor
    lowest = max(floor * 1e-2, 1e-16)
    visible = np.nonzero(sf > lowest)[0]
    x_end = x[min(visible[-1] + 1, x.size - 1)] if visible.size else x[-1]
    cdf = np.cumsum(pmf)
    body_end = x[min(int(np.searchsorted(cdf, 0.9999)), x.size - 1)]
    for _, v in markers:
        body_end = max(body_end, v)
    body_end = max(body_end, x[min(1, x.size - 1)])

    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(12, 4.6), constrained_layout=True)
    fig.suptitle(title, fontsize=12)
    ax1.plot(x, pmf, color="#1f5f8b", lw=1.2, label=f"P(value = x), grid step {lat.step:g} {unit}")
    ax1.fill_between(x, pmf, color="#1f5f8b", alpha=0.15, step=None)
    ax1.set_xlim(x[0], body_end * 1.05 if body_end > 0 else 1)
    ax1.set_xlabel(f"{quantity} x ({unit})")
    ax1.set_ylabel("probability of each grid point")
    ax1.set_title("distribution")
    ax1.grid(alpha=0.3)

    ok = sf > 0
    ax2.step(x[ok], sf[ok], where="post", color="#b2402a", lw=1.4, label="P(value > x)")
    if floor > 0:
        ax2.axhline(floor, color="0.35", ls="--", lw=1.0,
                    label=f"{floor_label} {floor:.1e}: below it, noise")
    palette = ["#6a3d9a", "#33a02c", "#ff7f00", "#1f78b4", "#e31a1c", "#b15928"]
    for i, (label, v) in enumerate(markers):
        color = palette[i % len(palette)]
        text = f"{label} = {v:,.6g} {unit}"
        ax1.axvline(v, color=color, lw=0.9, ls="-.", label=text)
        ax2.axvline(v, color=color, lw=0.9, ls="-.", label=text)
    shapes = ["o", "s", "^", "D", "v", "P"]
    for i, d in enumerate(deadlines):
        k = int(np.clip(np.floor((d - lat.origin) / lat.step + 1e-9), 0, x.size - 1))
        miss = float(sf[k]) if d >= lat.origin else 1.0
        color = str(0.15 + 0.5 * i / max(len(deadlines), 1))
        ax2.axvline(d, color=color, lw=1.0, ls=":")
        ax2.plot([d], [max(miss, lowest)], marker=shapes[i % len(shapes)], color=color,
                 ls="none", label=f"deadline {d:,.6g} {unit}: P(value > deadline) = {miss:.1e}")
    ax2.set_yscale("log")
    ax2.set_ylim(lowest, 1.5)
    ax2.set_xlim(x[0], max(x_end, body_end) * 1.02 if x_end > 0 else 1)
    ax2.set_xlabel(f"{quantity} x ({unit})")
    ax2.set_ylabel("exceedance probability P(value > x), log scale")
    ax2.set_title("exceedance curve")
    ax2.grid(alpha=0.3, which="both")
    from matplotlib.ticker import FuncFormatter

    thousands = FuncFormatter(lambda v, _pos: f"{v:,.0f}" if abs(v) >= 1000 else f"{v:g}")
    ax1.xaxis.set_major_formatter(thousands)
    ax2.xaxis.set_major_formatter(thousands)
    ax1.legend(fontsize=8, loc="upper right")
    ax2.legend(fontsize=8, loc="lower left")
    return _png(fig, plt)


def counts_figure(totals: Sequence[int], ways: Sequence[int], *, title: str, xlabel: str,
                  ylabel: str) -> bytes:
    """A bar chart of exact counts (e.g. ways to roll each total)."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 4), constrained_layout=True)
    ax.bar(totals, [float(w) for w in ways], color="#1f5f8b", label="exact count")
    for t, w in zip(totals, ways, strict=True):
        ax.annotate(str(w), (t, float(w)), ha="center", va="bottom", fontsize=7)
    ax.set_title(title)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_xticks(list(totals))
    ax.grid(alpha=0.3, axis="y")
    ax.legend(fontsize=8)
    return _png(fig, plt)


def _png(fig, plt) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    return buf.getvalue()
