"""Import cost of polyconv against ``import numpy``, in fresh processes (issue 15).

Each statement runs in a new interpreter, the statements interleaved round by round, and the
wall time of the whole process is taken (start-up included, as a user sees it).  Printed: the
median and the best of the rounds, and the ratio of the median to that of ``import numpy``
(below 1: cheaper than numpy).  ``-X importtime`` gives the per-module detail when needed.

    nice -n 10 python bench/import_bench.py --rounds 9
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

STATEMENTS = {
    "python (nothing)": "pass",
    "import numpy": "import numpy",
    "import polyconv": "import polyconv",
    "import polyconv.dist": "import polyconv.dist",
    "polyconv.dist + a Lattice sum": "import polyconv.dist as d; L = d.Lattice([0.5, 0.5]); L + L",
    "CLI parser (every command builds it)": "from polyconv.cli.main import build_parser; "
                                            "build_parser()",
    "import scipy.stats": "import scipy.stats",
}


def _seconds(code: str) -> float:
    start = time.perf_counter()
    subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=7, help="fresh processes per statement")
    args = parser.parse_args()
    times: dict[str, list[float]] = {name: [] for name in STATEMENTS}
    for _ in range(args.rounds):
        for name, code in STATEMENTS.items():
            times[name].append(_seconds(code))
    numpy_median = statistics.median(times["import numpy"])
    print(f"{'statement':38s} {'median s':>9s} {'best s':>8s} {'/ numpy':>8s}")
    for name, values in times.items():
        median = statistics.median(values)
        print(f"{name:38s} {median:9.3f} {min(values):8.3f} {median / numpy_median:8.2f}")


if __name__ == "__main__":
    main()
