"""Latency toolkit benchmark (issue 13), run from ``python bench/dist_bench.py --latency``.

Goals:
* a 20-stage network with 10^6 measured samples per stage, read from CSV files, through the
  CLI (``polyconv delays``), end to end (new process: imports, reading, binning, the network,
  the report folder) < 3 s;
* ``kth_of`` of 1000 stages on 10^5 points < 1 s;
* retry and hedging about as cheap as one series step on the same lattice;
* every percentile reported from samples says how many samples back it.
The stage latencies are invented (lognormal and gamma samples from numpy's generator).
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import stats

from polyconv.dist import Lattice, all_of, hedge, kth_of, retry, series
from polyconv.dist.network import Block, Network

ROWS = 10**6
STAGES = 20
DATA = Path(tempfile.gettempdir()) / "polyconv-latency-bench"


def _best(fn, repeat: int = 3):
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def make_files() -> Path:
    """20 CSV files of 10^6 invented latencies each (kept between runs)."""
    DATA.mkdir(exist_ok=True)
    rng = np.random.default_rng(20261203)
    for i in range(STAGES):
        p = DATA / f"stage{i:02d}.csv"
        if p.exists():
            continue
        if i % 2:
            x = rng.lognormal(np.log(5.0 + i), 0.5, ROWS)
        else:
            x = rng.gamma(2.0 + i % 5, 2.0, ROWS)
        text = "request,latency_ms\n" + "\n".join(
            f"{k},{v:.3f}" for k, v in enumerate(x.tolist())) + "\n"
        p.write_text(text)
    return DATA


SPEC = """title = "Invented 20-stage service (benchmark)"
unit = "ms"
[grid]
step = 0.1
[report]
percentiles = [50, 90, 99, 99.9, 99.99]
deadlines = [150.0, 300.0]
[network]
in_sequence = ["s00", "s01", "s02", "s03", "fan", "race", "quorum", "s12", "s13", "s14",
               "s15", "s16", "s17", "s18", "s19"]
[stage.fan]
all_of = ["s04", "s05", "s06"]
[stage.race]
first_of = ["s07", "s08"]
[stage.quorum]
k_of = ["s09", "s10", "s11"]
k = 2
"""


def write_spec(folder: Path) -> Path:
    text = SPEC + "".join(f'[stage.s{i:02d}]\nsamples_file = "stage{i:02d}.csv"\n'
                          f'column = "latency_ms"\n' for i in range(STAGES))
    p = folder / "bench20.toml"
    p.write_text(text)
    return p


def _child_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def cli_run(spec: Path, out: Path) -> tuple[float, float, dict]:
    """Wall and CPU seconds (user + system of the child process) of one CLI run."""
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    cpu = _child_cpu()
    t = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "polyconv.cli.main", "delays", str(spec),
                           "-o", str(out), "--json", "--quiet"], capture_output=True, text=True,
                          env=env, check=False)
    seconds = time.perf_counter() - t
    if proc.returncode != 0:
        raise RuntimeError(proc.stderr)
    return seconds, _child_cpu() - cpu, json.loads(proc.stdout)


def breakdown(spec: Path, folder: Path) -> dict[str, float]:
    """Where the end-to-end time goes: a new process importing the CLI, then in this process
    reading the 20 files, evaluating the network, writing the report (figure included)."""
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    out = {}
    for what, code in (("python + numpy", "import numpy"),
                       ("python + CLI parser (every command)",
                        "import polyconv.cli.main as m; m.build_parser()"),
                       ("python + CLI parser + matplotlib figure/Agg",
                        "import polyconv.cli.main as m; m.build_parser(); "
                        "import matplotlib.figure, matplotlib.backends.backend_agg"),
                       ("python + numba parser kernel loaded (as the CLI loads it)",
                        "from polyconv.cli import sample_files; sample_files._kernel()")):
        cpu = _child_cpu()
        subprocess.run([sys.executable, "-c", code], env=env, check=True)
        out[what + " (CPU)"] = _child_cpu() - cpu
    from polyconv.cli import delays_cmd
    from polyconv.cli.fileio import ReportFolder
    from polyconv.cli.sample_files import read_samples
    from polyconv.cli.spec import load_spec
    t = time.process_time()
    for i in range(STAGES):
        read_samples(folder / f"stage{i:02d}.csv", column="latency_ms")
    out["reading 20 CSV files (CPU)"] = time.process_time() - t
    t = time.process_time()
    res = delays_cmd.compute(delays_cmd.parse(load_spec(spec)))
    out["reading + binning + network (CPU)"] = time.process_time() - t
    t = time.process_time()
    with ReportFolder(folder / "report-inproc") as dest:
        delays_cmd.write_report(res, dest)
    out["report folder, figure included (CPU)"] = time.process_time() - t
    return out


def main() -> None:
    print("## latency toolkit (issue 13)")
    folder = make_files()
    spec = write_spec(folder)
    out = folder / "report"
    first, _, _ = cli_run(spec, out)  # may compile the file parser into numba's cache
    times, cpus = [], []
    summary = {}
    for _ in range(3):
        sec, cpu, summary = cli_run(spec, out)
        times.append(sec)
        cpus.append(cpu)
    print(f"  load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    parts = breakdown(spec, folder)
    print("  where it goes: " + ", ".join(f"{k} {v:.2f} s" for k, v in parts.items()))
    backed = all(isinstance(r.get("samples_beyond"), int) for r in summary["sample_support"])
    print(f"20 stages x 10^6 CSV samples through the CLI: best {min(times):.2f} s wall, "
          f"{min(cpus):.2f} s CPU (wall runs {', '.join(f'{t:.2f}' for t in times)}; first run "
          f"{first:.2f} s), goal < 3 s, ratio (CPU) {min(cpus) / 3.0:.2f}")
    print(f"every percentile says how many samples back it: {backed}; "
          f"p99.99 supported: {summary['sample_support'][-1]['supported']}")
    x = Lattice.from_law(stats.lognorm(0.5, scale=100.0), step=0.01, size=10**5)
    t_k, _ = _best(lambda: kth_of(990, x, copies=1000))
    print(f"kth_of(990 of 1000 identical) on 10^5 points: {t_k:.3f} s, goal < 1 s, "
          f"ratio {t_k:.2f}")
    groups = [Lattice.from_law(stats.lognorm(0.5, scale=80.0 + 5 * i), step=0.01, size=10**5)
              for i in range(4)]
    t_g, _ = _best(lambda: kth_of(3, *groups, copies=250), repeat=1)
    print(f"kth_of(3 of 1000: 4 groups of 250) on 10^5 points: {t_g:.3f} s")
    t_s, _ = _best(lambda: series(x, x))
    t_r, _ = _best(lambda: retry(x, timeout=300.0, retries=2, backoff=10.0))
    t_h, _ = _best(lambda: hedge(x, after=150.0))
    print(f"one series step {t_s:.3f} s; retry {t_r:.3f} s (ratio {t_r / t_s:.2f}); "
          f"hedge {t_h:.3f} s (ratio {t_h / t_s:.2f})")
    a = Lattice.from_law(stats.gamma(3.0, scale=100.0), step=1.0, size=3000)
    b = Lattice.from_law(stats.lognorm(0.5, scale=300.0), step=1.0, size=6000)
    net = Network({"a": a, "b": b, "m": Block("all_of", ("a", "b"))},
                  Block("in_sequence", ("a", "m")))
    t_n, _ = _best(net.evaluate, repeat=1)
    t_one, _ = _best(lambda: all_of(a, b))
    print(f"a + max(a, b), a shared (3000 values) on 6000 points: {t_n:.3f} s (one all_of "
          f"{t_one:.4f} s; one evaluation per value would be about {3000 * t_one:.1f} s)")
    samples = np.random.default_rng(1).lognormal(3.0, 0.5, 10**6)
    t_b, _ = _best(lambda: Lattice.from_samples(samples, step=0.1))
    print(f"Lattice.from_samples of 10^6 samples: {t_b:.3f} s")


if __name__ == "__main__":
    main()
