"""PNG figures for the reports (matplotlib, Agg backend, imported only when a figure is drawn).

matplotlib is the optional extra ``plot``; without it :func:`available` is False and the commands
skip their figures with a one-line note.  Figures are rendered to bytes so the caller can write
them atomically.

What the distribution figure promises a reader (common practice, no source):

* amounts read as written: ``250,000`` below a million, ``1.5m`` / ``10m`` / ``2bn`` above
  (:func:`amount_text`), never ``1e7`` offsets;
* atoms (a probability mass at one amount, e.g. no claim at all, or claims capped at a limit)
  are drawn as stems with their probability written beside them, even when they dwarf the rest
  of the distribution (:func:`find_atoms`);
* the exceedance curve is drawn only where the grid has data: it stops at the last grid point,
  which is marked, with the probability beyond the grid said in words; the part below the
  error bound of the computation is drawn faint.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence

import numpy as np

from ..dist import Lattice
from .report import exceedance, fmt, number_name

MISSING_NOTE = "figures skipped: matplotlib is not installed (pip install 'polyconv[plot]')"

ATOM_RATIO = 8.0
"""A grid point is an atom when its probability is at least this many times that of each
neighbour (and at least :data:`ATOM_SMALLEST`)."""

ATOM_SMALLEST = 1e-4
MOST_ATOMS = 6
"""At most this many atoms are labelled (the largest)."""

STEM_POINTS = 400
"""A distribution panel showing at most this many grid points draws each as a stem (its
probability is a mass at that point); more points are drawn as a curve, atoms as stems."""

SCALES = ((1e9, 1e9, "bn"), (1e6, 1e6, "m"))
"""``(axis reach from which, unit, suffix)``: an axis reaching a million or more is labelled in
millions (``1m``, ``10m``, ``12.5m``), one reaching a billion or more in billions."""


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


# -- pieces a test can check without drawing ------------------------------------------------


def amount_text(value: float, top: float) -> str:
    """A tick label of an amount axis reaching ``top``.

    An axis reaching less than a million: thousands separators (``250,000``); from a million
    on, millions (``0.25m``, ``2.5m``, ``10m``); from a billion on, billions (``20bn``); at
    most three significant digits.
    """
    for reach, size, suffix in SCALES:
        if abs(top) >= reach:
            return f"{value / size:.3g}{suffix}" if value else "0"
    if abs(value) >= 1000:
        return f"{value:,.0f}"
    return f"{value:g}"


def find_atoms(pmf: np.ndarray) -> np.ndarray:
    """Indices of the grid points that carry an atom (see :data:`ATOM_RATIO`)."""
    p = np.asarray(pmf, dtype=float)
    left = np.concatenate(([0.0], p[:-1]))
    right = np.concatenate((p[1:], [0.0]))
    neighbour = np.maximum(left, right)
    return np.nonzero((p >= ATOM_SMALLEST) & (p >= ATOM_RATIO * neighbour))[0]


def error_level(lat: Lattice) -> float:
    """The error bound under which exceedance probabilities are not told apart from rounding
    noise: the lattice's L1 error bound when it has one, else its per-point bound."""
    errors = lat.errors
    return float(errors.l1) if math.isfinite(errors.l1) else float(errors.point)


def _probability(p: float) -> str:
    if p == 0:
        return "0"
    return f"{p:.2g}" if p >= 0.01 else f"{p:.1e}"


# -- the figures --------------------------------------------------------------------------


def distribution_figure(lat: Lattice, **options) -> bytes:
    """The PNG of :func:`distribution_panels` (same arguments)."""
    fig = distribution_panels(lat, **options)
    return _png(fig, _pyplot())


def distribution_panels(lat: Lattice, *, title: str, quantity: str, unit: str,
                        markers: Sequence[tuple[str, float]] = (),
                        deadlines: Sequence[tuple[float, float, float, float]] = ()):
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
    deadlines : sequence of (deadline, value, low, high)
        Deadlines marked on the exceedance curve with their miss probability (``value``, nan
        when refused) and its certified range ``[low, high]``.

    Returns
    -------
    matplotlib.figure.Figure
        The figure (close it with ``matplotlib.pyplot.close`` when done).
    """
    plt = _pyplot()
    from matplotlib.ticker import FuncFormatter, MaxNLocator

    x = lat.values
    pmf = np.asarray(lat.pmf)
    sf = exceedance(lat)
    noise = error_level(lat)
    lowest = max(noise * 1e-2, 1e-16)
    grid_end = float(x[-1])
    cdf = np.cumsum(pmf)
    body_level = min(0.9999, 0.999 * float(cdf[-1]))  # a heavy tail cut by the grid
    body_end = float(x[min(int(np.searchsorted(cdf, body_level)), x.size - 1)])
    body_end = max([body_end, float(x[min(1, x.size - 1)]), *(v for _, v in markers)])
    visible = np.nonzero(sf > lowest)[0]
    tail_end = float(x[visible[-1]]) if visible.size else grid_end
    right = min(max(tail_end, body_end) * 1.03 + lat.step, grid_end + 0.03 * (grid_end - x[0]))

    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(12, 6.4), constrained_layout=True)
    fig.suptitle(title, fontsize=12)
    _distribution_panel(ax1, lat, body_end, unit)
    _exceedance_panel(ax2, lat, sf, noise, lowest, unit)
    palette = ["#6a3d9a", "#33a02c", "#ff7f00", "#1f78b4", "#e31a1c", "#b15928"]
    for i, (label, v) in enumerate(markers):
        color = palette[i % len(palette)]
        text = f"{label}: {fmt(v)} {unit}"
        ax1.axvline(v, color=color, lw=0.9, ls="-.", label=text)
        ax2.axvline(v, color=color, lw=0.9, ls="-.", label=text)
    shapes = ["o", "s", "^", "D", "v", "P"]
    for i, (d, miss, low, high) in enumerate(deadlines):
        color = str(0.15 + 0.5 * i / max(len(deadlines), 1))
        ax2.axvline(d, color=color, lw=1.0, ls=":")
        if math.isfinite(miss):
            text, y = f"missed with probability {_probability(miss)}", miss
        else:  # refused: say what is known
            text, y = (f"not known on this grid (between {_probability(low)} and "
                       f"{_probability(high)})"), high
        ax2.plot([min(d, grid_end)], [max(y, lowest)], marker=shapes[i % len(shapes)],
                 color=color, ls="none", label=f"deadline {fmt(d)} {unit}: {text}")
    margin = 0.015 * (body_end - float(x[0])) + lat.step
    ax1.set_xlim(float(x[0]) - margin, body_end * 1.05 + lat.step)
    ax2.set_xlim(float(x[0]) - margin, right)
    for ax, top in ((ax1, body_end * 1.05), (ax2, right)):
        ax.xaxis.set_major_locator(MaxNLocator(nbins=7, steps=[1, 2, 2.5, 5, 10]))
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _pos, t=top: amount_text(v, t)))
        ax.set_xlabel(f"{quantity} x ({unit})")
    for ax in (ax1, ax2):  # below the panels: never over the data or the atom labels
        ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(0.0, -0.13), frameon=False)
    return fig


def _distribution_panel(ax, lat: Lattice, body_end: float, unit: str) -> None:
    """Probability of each grid point; atoms as labelled stems, kept visible above the rest."""
    x = lat.values
    pmf = np.asarray(lat.pmf)
    atoms = find_atoms(pmf)
    if atoms.size > MOST_ATOMS:
        atoms = np.sort(atoms[np.argsort(pmf[atoms])[-MOST_ATOMS:]])
    color = "#1f5f8b"
    in_view = int(np.searchsorted(x, body_end * 1.05 + lat.step))
    if in_view <= STEM_POINTS:
        ax.vlines(x, 0, pmf, color=color, lw=1.4,
                  label=f"probability at each grid point (step {number_name(lat.step)} {unit})")
        ax.plot(x[:in_view], pmf[:in_view], "o", color=color, ms=2.5)
        atoms = atoms[(atoms == 0) | (atoms == x.size - 1)]  # edge atoms still get a label
    else:
        smooth = pmf.copy()
        smooth[atoms] = np.nan
        ax.plot(x, smooth, color=color, lw=1.2,
                label=f"probability at each grid point (step {number_name(lat.step)} {unit})")
        ax.fill_between(x, np.nan_to_num(smooth), color=color, alpha=0.15)
    rest = np.delete(pmf, atoms)
    rest_top = float(rest.max()) if rest.size else 0.0
    atom_top = float(pmf[atoms].max()) if atoms.size else 0.0
    if rest_top == 0:
        top = max(atom_top * 1.25, 1e-300)
    elif atom_top <= 3 * rest_top:
        top = max(rest_top, atom_top) * 1.15
    else:  # atoms far above the rest: drawn to the top of the panel, value written
        top = rest_top * 1.4
    for j, k in enumerate(atoms):
        p = float(pmf[k])
        shown = min(p, top * (0.92 - 0.07 * j))
        ax.vlines([x[k]], 0, shown, color="#c0392b", lw=2.2,
                  label="atom: a probability mass at one value" if j == 0 else None)
        ax.plot([x[k]], [shown], marker="^" if p > shown else "o", color="#c0392b",
                ls="none")
        off = " (off scale)" if p > shown else ""
        ax.annotate(f"{_probability(p)} at {amount_text(float(x[k]), body_end)} {unit}{off}",
                    (x[k], shown), textcoords="offset points", xytext=(6, -4), fontsize=8,
                    color="#c0392b", va="top",
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                          "alpha": 0.85})
    ax.set_ylim(0, top)
    ax.set_ylabel("probability of each grid point")
    ax.set_title("distribution")
    ax.grid(alpha=0.3)


def _exceedance_panel(ax, lat: Lattice, sf: np.ndarray, noise: float, lowest: float,
                      unit: str) -> None:
    """``P(value > x)`` on the grid only: solid where it is known, faint below the error bound,
    a band where the probability beyond the grid may lie (``errors.truncated_from`` on), and a
    marked end of grid with the probability beyond it."""
    x = lat.values
    n = x.size
    errors = lat.errors
    beyond = float(errors.truncated)
    start = min(int(errors.truncated_from), n)  # from here the truncated mass may lie on grid
    known = np.arange(n) < start
    shown = np.where(sf > lowest, sf, np.nan)
    ax.step(x, np.where(known & (sf > noise), shown, np.nan), where="post", color="#b2402a",
            lw=1.5, label="probability of exceeding x")
    if noise > 0:
        faint = np.where(known & (sf <= noise * 1.0000001), shown, np.nan)
        ax.step(x, faint, where="post", color="#b2402a", lw=1.0, alpha=0.35, ls="--",
                label=f"below {noise:.1e}: not told apart from rounding error")
    if start < n and beyond > 0 and sf[start] > lowest:  # (a band out of view is not listed)
        lower = np.maximum(sf[start:] - beyond, lowest)
        ax.fill_between(x[start:], lower, np.maximum(sf[start:], lowest), step="post",
                        color="#b2402a", alpha=0.18, lw=0,
                        label=f"from {fmt(float(x[start]))} {unit}: only a range is known (the "
                        f"probability {_probability(beyond)} beyond the grid may lie here)")
    end = float(x[-1])
    if sf[-1] > lowest or beyond > lowest:
        ax.axvline(end, color="black", lw=1.2, ls=(0, (1, 1)),
                   label=f"end of the grid ({fmt(end)} {unit}): beyond it, probability "
                   f"{_probability(beyond) if beyond > 0 else '0'}, not drawn")
        ax.plot([end], [max(float(sf[-1]), lowest)], marker=">", color="black", ls="none")
    ax.set_yscale("log")
    seen = sf[sf > lowest]
    ax.set_ylim(max(lowest, 0.1 * float(seen.min())) if seen.size else lowest, 1.5)
    ax.set_ylabel("probability of exceeding x (log scale)")
    ax.set_title("exceedance curve")
    ax.grid(alpha=0.3, which="both")


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
