"""polyconv benchmarks: ratios against numpy, scipy and python-flint measured in the same run.

Usage::

    python bench/run.py float            # float engines vs numpy / scipy (writes bench/RESULTS.md)
    python bench/run.py float --quick    # fewer sizes, fewer repeats (does not write)

Every contender is timed in one process, interleaved round by round (so drift in machine load hits
all of them alike), and the best of the rounds is kept.  A ratio below 1 means polyconv is faster.
The float tables include the lean scipy.fft recipe of issue #12's goal: ``rfft`` of both operands
at ``scipy.fft.next_fast_len(n1 + n2 - 1, real=True)``, a product, ``irfft`` (scipy.fft's default
of one worker).
The env notes say OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE may be set on this machine; they do not
touch the FFT paths measured here, so this script leaves them alone; with ``POLYCONV_THREADS=1``
it caps BLAS and OpenMP pools at one thread too (OPENBLAS_NUM_THREADS, OMP_NUM_THREADS, unless
set), so that every contender runs on one thread.
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import sys
import time
from pathlib import Path

if os.environ.get("POLYCONV_THREADS", "").strip() == "1":  # before numpy starts its pools
    for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS"):
        os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402
import scipy  # noqa: E402
import scipy.fft as sfft  # noqa: E402
import scipy.signal as ss  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import polyconv  # noqa: E402
from polyconv.tuning.threads import configured_threads  # noqa: E402

RESULTS = HERE / "RESULTS.md"


#: the clock timings read: wall time (default), or with ``--clock cpu`` this process's CPU time,
#: which leaves out the time other processes hold the cores (a shared, loaded machine)
CLOCK = time.perf_counter


def time_once(fn, min_seconds: float) -> float:
    """Seconds per call of ``fn`` over a loop lasting at least ``min_seconds``."""
    loops, total = 0, 0.0
    start = CLOCK()
    while True:
        fn()
        loops += 1
        total = CLOCK() - start
        if total >= min_seconds:
            return total / loops


def interleaved_best(contenders: dict, rounds: int, min_seconds: float) -> dict:
    """Best-of-``rounds`` seconds per contender, each round timing every contender once."""
    for fn in contenders.values():
        fn()  # warm-up: plans, caches, thread start
    best = {name: math.inf for name in contenders}
    for _ in range(rounds):
        for name, fn in contenders.items():
            best[name] = min(best[name], time_once(fn, min_seconds))
    return best


def all_contenders(x, y, with_numpy: bool, with_direct: bool) -> dict:
    """auto, the references and polyconv's own engines on one pair."""
    c = {"auto": lambda: polyconv.convolve(x, y),
         "lean": lean_recipe(x, y),
         "fftconvolve": lambda: ss.fftconvolve(x, y),
         "oaconvolve": lambda: ss.oaconvolve(x, y)}
    if with_numpy:
        c["numpy"] = lambda: np.convolve(x, y)
    c.update(engine_contenders(x, y))
    if not with_direct:
        c.pop("pc:direct", None)
    return c


def lean_recipe(x, y):
    """Issue #12's reference: rfft, multiply, irfft at scipy's fast real length (one worker)."""
    full = x.shape[-1] + y.shape[-1] - 1
    size = sfft.next_fast_len(full, real=True)
    return lambda: sfft.irfft(sfft.rfft(x, size) * sfft.rfft(y, size), size)[:full]


def engine_contenders(x, y) -> dict:
    """polyconv's own engines that can run on this pair (forced with method=)."""
    out = {}
    n1, n2 = x.shape[-1], y.shape[-1]
    if n1 * n2 <= 2**31:
        out["pc:direct"] = lambda: polyconv.convolve(x, y, method="direct")
    out["pc:fft"] = lambda: polyconv.convolve(x, y, method="fft")
    try:
        polyconv.plan(x, y, method="overlap-add")
        out["pc:overlap-add"] = lambda: polyconv.convolve(x, y, method="overlap-add")
    except ValueError:
        pass
    return out


def bench_float(quick: bool) -> tuple[list[str], list[str]]:
    rng = np.random.default_rng(1)
    rounds = 3 if quick else 5
    min_seconds = 0.02 if quick else 0.1
    equal_rows, long_rows = [], []

    exps = range(6, 17, 2) if quick else range(6, 23)
    for e in exps:
        n = 2**e
        x, y = rng.standard_normal(n), rng.standard_normal(n)
        c = all_contenders(x, y, with_numpy=n <= 2**14, with_direct=n <= 2**14)
        t = interleaved_best(c, rounds if n < 2**20 else 3, min_seconds)
        equal_rows.append(_row(f"2^{e} x 2^{e}", t, polyconv.plan(x, y).engine, _goal(n)))
        print(equal_rows[-1], flush=True)

    n = 2**18 if quick else 2**22
    x = rng.standard_normal(n)
    for m in ([16, 256, 4096] if quick else [16, 32, 64, 128, 256, 512, 1024, 2048, 4096]):
        y = rng.standard_normal(m)
        c = all_contenders(x, y, with_numpy=m <= 512, with_direct=m <= 512)
        t = interleaved_best(c, 3, min_seconds)
        long_rows.append(_row(f"2^{int(math.log2(n))} x {m}", t, polyconv.plan(x, y).engine,
                              _goal(n)))
        print(long_rows[-1], flush=True)
    return equal_rows, long_rows


def _ratio(a: float, b: float | None) -> str:
    return "-" if b is None or not math.isfinite(b) else f"{a / b:.2f}"


def _goal(n: int) -> float:
    """Issue #12's float goal against the lean recipe: 0.6 up to n = 2^16, 0.9 above."""
    return 0.6 if n <= 2**16 else 0.9


def _row(label: str, t: dict, engine: str, goal: float) -> str:
    auto = t["auto"]
    lean = _ratio(auto, t.get("lean"))
    lean += f" ({'meets' if auto / t['lean'] <= goal else 'misses'} <= {goal})"
    own = {k: v for k, v in t.items() if k.startswith("pc:")}
    best_name = min(own, key=own.get)
    return (f"| {label} | {auto * 1e3:.4g} | {engine} | {lean} | "
            f"{_ratio(auto, t.get('fftconvolve'))} | "
            f"{_ratio(auto, t.get('oaconvolve'))} | {_ratio(auto, t.get('numpy'))} | "
            f"{_ratio(auto, own[best_name])} ({best_name[3:]}) |")


HEADER = ("| sizes | auto ms | engine chosen | auto / lean scipy.fft | auto / fftconvolve | "
          "auto / oaconvolve | auto / numpy | auto / best own engine |\n"
          "|---|---|---|---|---|---|---|---|")


def _clock_name() -> str:
    return "CPU time of this process" if CLOCK is time.process_time else "wall clock"


def _goal_count(rows: list[str]) -> str:
    met = sum("(meets" in r for r in rows)
    return f"met in {met} of {len(rows)} rows"


def _cpu() -> str:
    """The processor's model name and core count (Linux /proc/cpuinfo; else platform's)."""
    try:
        lines = Path("/proc/cpuinfo").read_text().splitlines()
        model = next(v.split(":", 1)[1].strip() for v in lines if v.startswith("model name"))
    except (OSError, StopIteration):
        model = platform.processor() or "?"
    return f"{model}, {os.cpu_count()} cores"


def _load() -> str:
    try:
        return " / ".join(f"{v:.1f}" for v in os.getloadavg())
    except OSError:
        return "?"


def write_results(command: str, equal_rows: list[str], long_rows: list[str],
                  name: str = "float") -> None:
    text = RESULTS.read_text() if RESULTS.exists() else "# polyconv benchmark results\n"
    start, end = f"<!-- {name}:start -->", f"<!-- {name}:end -->"
    threads = configured_threads()
    section = "\n".join([
        start,
        f"## Float convolution, polyconv on {threads} thread{'s' if threads > 1 else ''}",
        "",
        f"Command: `{command}`  ",
        f"Machine: {platform.machine()}, polyconv threads: {threads}, "
        f"Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}; "
        f"{time.strftime('%Y-%m-%d')}.  ",
        f"Best of interleaved rounds ({_clock_name()}); "
        "ratio < 1 means polyconv is faster.  With more than one "
        "thread polyconv overlaps the two forward transforms above the calibrated size "
        "(scipy's calls are single-threaded as called here); `POLYCONV_THREADS=1` gives the "
        "single-thread table.  \"lean scipy.fft\": `irfft(rfft(a, L) * rfft(b, L), L)` with "
        "`L = scipy.fft.next_fast_len(n1 + n2 - 1, real=True)`, one worker; issue #12's goal "
        "on one thread is auto / lean <= 0.6 at n <= 2^16 and <= 0.9 above (n: the longer "
        f"operand): {_goal_count(equal_rows + long_rows)}.  Machine {_cpu()}, load average "
        f"at the end {_load()}.",
        "",
        "Equal lengths:",
        "",
        HEADER,
        *equal_rows,
        "",
        "Long x short:",
        "",
        HEADER,
        *long_rows,
        end,
    ])
    if start in text and end in text:
        text = text[: text.index(start)] + section + text[text.index(end) + len(end):]
    else:
        text = text.rstrip() + "\n\n" + section + "\n"
    RESULTS.write_text(text)


# ----------------------------------------------------------------------------- exact suite

PRIME62 = 2**62 - 57


def bench_exact(quick: bool) -> list[str]:
    """polyconv.convolve (auto) vs python-flint, end to end from numpy arrays and multiply alone."""
    import random

    from exact_engines import flint_int_sides, flint_mod_sides, operands

    rng = random.Random(5)
    rows = []
    cases = [("16-bit", 15, None), ("63-bit", 62, None), ("1000-bit", 1000, None),
             ("mod 998244353", 62, 998244353), ("mod 2^62-57", 62, PRIME62)]
    top = 14 if quick else 20
    for label, bits, modulus in cases:
        last = min(top, 16 if bits > 62 else top)
        for e in range(10, last + 1, 2 if quick else 1):
            n = 2**e
            a, b = operands(bits, n, rng)
            if modulus is None:
                flint_e2e, flint_mul = flint_int_sides(a, b)
            else:
                flint_e2e, flint_mul = flint_mod_sides(a % modulus, b % modulus, modulus)
            c = {"auto": lambda a=a, b=b, m=modulus: polyconv.convolve(a, b, modulus=m),
                 "flint e2e": flint_e2e, "flint mul": flint_mul}
            t = interleaved_best(c, 3 if e <= 16 else 1, 0.05 if quick else 0.2)
            engine = polyconv.plan(a, b, modulus=modulus)
            rows.append(f"| {label} | 2^{e} | {t['auto'] * 1e3:.4g} | {engine.engine} "
                        f"({engine.certificate}) | {t['auto'] / t['flint e2e']:.2f} | "
                        f"{t['auto'] / t['flint mul']:.2f} |")
            print(rows[-1], flush=True)
    return rows


EXACT_HEADER = ("| coefficients | n | auto ms | engine (certificate) | auto / flint end-to-end | "
                "auto / flint multiply alone |\n|---|---|---|---|---|---|")


def write_section(name: str, title: str, command: str, body: list[str]) -> None:
    """Replace (or append) the section ``name`` of bench/RESULTS.md."""
    text = RESULTS.read_text() if RESULTS.exists() else "# polyconv benchmark results\n"
    start, end = f"<!-- {name}:start -->", f"<!-- {name}:end -->"
    section = "\n".join([start, f"## {title}", "", f"Command: `{command}`  ",
                         f"Machine: {platform.machine()}, Python {platform.python_version()}, "
                         f"numpy {np.__version__}, scipy {scipy.__version__}; "
                         f"{time.strftime('%Y-%m-%d')}.", "", *body, end])
    if start in text and end in text:
        text = text[: text.index(start)] + section + text[text.index(end) + len(end):]
    else:
        text = text.rstrip() + "\n\n" + section + "\n"
    RESULTS.write_text(text)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("suite", choices=["float", "exact"], help="which benchmark to run")
    parser.add_argument("--quick", action="store_true", help="fewer sizes; does not write")
    parser.add_argument("--clock", choices=["wall", "cpu"], default="wall",
                        help="time by the wall clock (default) or by this process's CPU time "
                        "(for a loaded shared machine)")
    parser.add_argument("--section", default=None,
                        help="name of the bench/RESULTS.md section to (re)write (default: the "
                        "suite's name, with -1thread when POLYCONV_THREADS=1)")
    args = parser.parse_args()
    global CLOCK
    CLOCK = time.process_time if args.clock == "cpu" else time.perf_counter
    if args.suite == "exact":
        # steady state: compile/load the numba kernels first, so the planner sees them ready
        # (their one-off cost is reported here apart from every ratio)
        from polyconv.engines import jit_state
        try:
            how, seconds = jit_state.ensure_compiled()
            jit_line = f"numba kernels {how} in {seconds:.2f} s before timing (not in any ratio)"
        except jit_state.JitUnavailableError as exc:
            jit_line = f"numba kernels unavailable ({exc}): numpy engines only"
        print(jit_line)
        print(EXACT_HEADER)
        rows = bench_exact(args.quick)
        if not args.quick:
            import flint
            write_section("exact", "Exact integer and modular products vs python-flint",
                          "python bench/run.py exact" + (" --clock cpu" if args.clock == "cpu"
                                                         else ""),
                          [f"python-flint {flint.__version__}; end to end = numpy arrays in, "
                           "conversion, multiply, numpy array out. Ratio < 1: polyconv faster. "
                           f"Best of interleaved rounds ({_clock_name()}); {jit_line}. "
                           f"Machine {_cpu()} (shared: other jobs running), load average at "
                           f"the end {_load()}.", "", EXACT_HEADER, *rows])
        return 0
    print(HEADER)
    equal_rows, long_rows = bench_float(args.quick)
    if not args.quick:
        single = configured_threads() == 1
        name = args.section or ("float-1thread" if single else "float")
        command = (("POLYCONV_THREADS=1 " if single else "") + "python bench/run.py float"
                   + (" --clock cpu" if args.clock == "cpu" else ""))
        write_results(command, equal_rows, long_rows, name)
        print(f"wrote {RESULTS}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
