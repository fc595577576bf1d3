"""``polyconv bench``: a quick table of speed ratios against the reference implementations.

A handful of products (floats short and long, a long signal with a short kernel, 20-bit and
256-bit integers) are timed with ``polyconv.convolve`` and with each reference that is installed:
``numpy.convolve``, ``scipy.signal.fftconvolve`` and python-flint's ``fmpz_poly`` (exact integer
polynomials).  Each cell is the reference's time and ``ratio = reference / polyconv`` (above 1:
polyconv is faster).  Results are also compared (exactly for integers, to a relative 1e-9 for
floats).  A reference that would be quadratic on a large case is skipped, not timed.

This is a smoke-level comparison meant to run in a few seconds; the scripts in ``bench/`` of the
source tree measure properly.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..pipeline.execute import convolve
from ..pipeline.prepare import plan
from .progress import track
from .report import add_command, dumps, text_table

EXAMPLE = """example:
  polyconv bench            a table in a few seconds
  polyconv bench --json     the same numbers as JSON
"""

MIN_TIME = 0.05
"""Each measurement repeats its call until this many seconds have passed (at least twice)."""

QUADRATIC_LIMIT = 2e8
"""Multiply-adds above which numpy.convolve (direct summation) is skipped."""


def register(sub) -> None:
    """Add the ``bench`` sub-command to ``sub``."""
    p = add_command(
        sub, "bench",
        help="quick speed ratios against numpy, scipy and python-flint",
        description=(
            "Time a few products with polyconv and with the reference implementations "
            "installed here; print each reference's time and its ratio to polyconv's."),
        epilog=EXAMPLE,
    )
    p.add_argument("--json", action="store_true", help="print the results as JSON")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


@dataclass
class Case:
    """One product to time."""

    name: str
    a: np.ndarray
    b: np.ndarray
    exact: bool


def cases(rng: np.random.Generator) -> list[Case]:
    """The products timed (invented random data, fixed seed)."""
    ints = rng.integers(0, 2**62, size=(2, 2000))
    a_big = np.array([int(v) * (2**193) + 12345 for v in ints[0]], dtype=object)
    b_big = np.array([int(v) * (2**193) - 54321 for v in ints[1]], dtype=object)
    return [
        Case("float 1,000 x 1,000", rng.standard_normal(1000), rng.standard_normal(1000), False),
        Case("float 100,000 x 100,000", rng.standard_normal(100_000),
             rng.standard_normal(100_000), False),
        Case("float 1,000,000 x 129", rng.standard_normal(1_000_000), rng.standard_normal(129),
             False),
        Case("int 20-bit 10,000 x 10,000", rng.integers(0, 2**20, 10_000),
             rng.integers(0, 2**20, 10_000), True),
        Case("int 256-bit 2,000 x 2,000", a_big, b_big, True),
    ]


def references() -> dict[str, Callable[[Case], Callable[[], object] | None]]:
    """Installed references: name -> (case -> zero-argument callable, or None to skip)."""
    refs: dict[str, Callable[[Case], Callable[[], object] | None]] = {}

    def numpy_ref(case: Case):
        if case.a.dtype == object or case.a.size * case.b.size > QUADRATIC_LIMIT:
            return None
        return lambda: np.convolve(case.a, case.b)

    refs["numpy.convolve"] = numpy_ref
    try:
        from scipy import signal

        def scipy_ref(case: Case):
            if case.exact:
                return None  # floating point: not exact for integers
            return lambda: signal.fftconvolve(case.a, case.b)

        refs["scipy fftconvolve"] = scipy_ref
    except ImportError:  # pragma: no cover - scipy is a dependency
        pass
    try:
        import flint

        def flint_ref(case: Case):
            if not case.exact:
                return None
            fa = flint.fmpz_poly([int(v) for v in case.a])
            fb = flint.fmpz_poly([int(v) for v in case.b])
            return lambda: fa * fb

        refs["python-flint"] = flint_ref
    except ImportError:
        pass
    return refs


def best_time(fn: Callable[[], object]) -> tuple[float, object]:
    """Fastest of repeated calls (at least two, until :data:`MIN_TIME` has passed)."""
    best = float("inf")
    spent = 0.0
    runs = 0
    out = None
    while runs < 2 or (spent < MIN_TIME and runs < 50):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        best = min(best, dt)
        spent += dt
        runs += 1
    return best, out


def _agrees(ours: np.ndarray, theirs: object, exact: bool) -> bool:
    if hasattr(theirs, "coeffs"):  # fmpz_poly
        theirs = [int(v) for v in theirs.coeffs()]
        theirs = theirs + [0] * (len(ours) - len(theirs))
        return [int(v) for v in ours] == theirs
    theirs = np.asarray(theirs)
    if exact:
        return bool(np.array_equal(np.asarray(ours, dtype=object), theirs.astype(object)))
    scale = float(np.max(np.abs(theirs))) or 1.0
    return bool(np.max(np.abs(np.asarray(ours, dtype=float) - theirs)) <= 1e-9 * scale)


def measure(quiet: bool = True) -> list[dict]:
    """Run every case against every installed reference; one dict per case."""
    rng = np.random.default_rng(20240601)
    refs = references()
    rows = []
    for case in track(cases(rng), "bench", quiet):
        the_plan = plan(case.a, case.b)
        ours_t, ours = best_time(lambda c=case: convolve(c.a, c.b))
        row = {"case": case.name, "engine": the_plan.engine, "polyconv_seconds": ours_t,
               "references": {}}
        for name, make in refs.items():
            fn = make(case)
            if fn is None:
                row["references"][name] = None
                continue
            t, theirs = best_time(fn)
            row["references"][name] = {"seconds": t, "ratio": t / ours_t,
                                       "agrees": _agrees(ours, theirs, case.exact)}
        rows.append(row)
    return rows


def _fmt_t(t: float) -> str:
    return f"{t * 1e3:.2f} ms" if t < 1 else f"{t:.2f} s"


def table(rows: list[dict]) -> str:
    """The terminal table."""
    names = list(rows[0]["references"]) if rows else []
    header = ["case", "polyconv (engine)"] + names
    body = []
    for r in rows:
        line = [r["case"], f"{_fmt_t(r['polyconv_seconds'])} ({r['engine']})"]
        for n in names:
            ref = r["references"][n]
            if ref is None:
                line.append("-")
            else:
                flag = "" if ref["agrees"] else " DIFFERS"
                line.append(f"{_fmt_t(ref['seconds'])} ({ref['ratio']:.2f}x){flag}")
        body.append(line)
    return text_table(header, body)


def run(args) -> int:
    """Entry point of ``polyconv bench``."""
    rows = measure(args.quiet)
    if args.json:
        print(dumps({"ratio_means": "reference seconds / polyconv seconds (above 1: polyconv "
                     "faster)", "results": rows}))
        return 0
    print("polyconv bench: best-of-several wall times on this machine; in brackets the ratio "
          "reference / polyconv\n(above 1: polyconv is faster; '-' not applicable or skipped as "
          "quadratic)\n")
    print(table(rows))
    return 0
