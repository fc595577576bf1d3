"""Robustness campaign: hostile input at every public function and every CLI command.

    python bench/robustness_campaign.py [--seconds 300] [--seed 1] [--case-timeout 20]

Each draw picks a family (library calls, ``polyconv.dist``, CLI ``multiply`` on corrupt files and
odd flags, spec mutations of the bundled demo specs for ``aggregate`` and ``delays``, ``demo`` /
``calibrate`` / ``bench`` with odd outputs and cost files, failures injected while report folders
and files are written, disk-full via a file-size limit, real signals to a CLI subprocess at a
random moment within 6 s after it installed its handler), builds a hostile input from a seed
and runs it in a worker process under a per-case alarm; the parent restarts the worker when it
dies or stops answering.  Every outcome is classified:

``ok``            a result that equals the oracle (python-flint ``fmpz_poly``/``nmod_poly`` for
                  integer products, ``numpy.convolve`` for floats, direct sums for lattice queries)
                  or, for the CLI, exit 0 with its outputs complete;
``clear``         TypeError/ValueError (or CLI exit 2) whose message names the argument, key
                  or file;
``interrupted``   a CLI run stopped by a signal: exit 130, nothing left half-written;
``unclear``       another exception type, or a message that names nothing we changed;
``wrong``         a result that differs from the oracle;
``crash``         the worker died, a traceback or "internal error" reached the user, or an exit
                  status other than 0, 2 and 130;
``hang``          the case did not finish within ``--case-timeout`` seconds;
``memory``        MemoryError, or the worker's peak resident memory rose above the budget
                  (``POLYCONV_MEMORY_BUDGET``, 1 GiB here) plus 512 MiB: the size was not refused
                  before allocating;
``file``          a lost or mixed file: an input changed, an output left half-written, a report
                  folder mixing old and new files, or a hidden temporary left behind.

Prints the counts per family and class and up to ``--examples`` reproducers per defect class.
Long campaigns live here, not in the test suite (the regression tests are in ``tests/``).
"""

from __future__ import annotations

import argparse
import os
import random
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # polyconv
sys.path.insert(0, str(Path(__file__).resolve().parent))  # the campaign's modules
from robustness.cli_signals import case_signal
from robustness.common import BUDGET
from robustness.runner import (
    FAMILIES,
    SIGNAL_FAMILY,
    Tally,
    Worker,
    next_family,
    report,
    signal_loop,
)


def main() -> int:
    import threading

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=300.0, help="time budget")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--case-timeout", type=float, default=20.0)
    parser.add_argument("--workers", type=int, default=1, help="worker processes")
    parser.add_argument("--address-space", type=float, default=1.5,
                        help="GiB of address space a worker may add beyond the budget")
    parser.add_argument("--no-signals", action="store_true", help="skip the signal thread")
    parser.add_argument("--examples", type=int, default=4, help="reproducers per defect class")
    parser.add_argument("--only", default=None, help="run only families containing this text")
    parser.add_argument("--json", default=None, help="also write the counts to this JSON file")
    parser.add_argument("--repro", nargs=2, metavar=("FAMILY", "SEED"), default=None,
                        help="run one case in this process and print its verdict")
    args = parser.parse_args()
    if args.repro:
        os.environ["POLYCONV_MEMORY_BUDGET"] = str(BUDGET)
        sys.set_int_max_str_digits(0)
        family = next(k for k in [*FAMILIES, SIGNAL_FAMILY] if args.repro[0] in k)
        work = Path(tempfile.mkdtemp(prefix="polyconv-repro-"))
        fn = case_signal if family == SIGNAL_FAMILY else FAMILIES[family][0]
        print(fn(random.Random(int(args.repro[1])), work))
        print(f"files kept in {work}")
        return 0
    rng = random.Random(args.seed)
    shares = {k: v[1] for k, v in FAMILIES.items() if args.only is None or args.only in k}
    signals = not args.no_signals and (args.only is None or args.only in SIGNAL_FAMILY)
    names = list(shares) + ([SIGNAL_FAMILY] if signals else [])
    tally = Tally(args.examples)
    lock = threading.Lock()
    pool: list[Worker] = []
    if shares:  # started (imports, warm-up) before the clock runs
        pool = [Worker(args.case_timeout, int(args.address_space * 2**30))
                for _ in range(max(1, args.workers))]
    started = time.monotonic()
    deadline = started + args.seconds

    def drive(w: Worker) -> None:
        while time.monotonic() < deadline:
            with lock:
                family = next_family(shares, tally.spent, rng)
                seed = rng.randrange(2**63)
            t0 = time.monotonic()
            verdict, detail, codes = w.run(family, seed)
            tally.add(family, seed, verdict, detail, time.monotonic() - t0, codes)

    threads = [threading.Thread(target=drive, args=(w,), daemon=True) for w in pool]
    if signals:
        threads.append(threading.Thread(target=signal_loop, daemon=True,
                                        args=(tally, random.Random(rng.randrange(2**63)),
                                              deadline, lock)))
    for t in threads:
        t.start()
    try:
        for t in threads:
            while t.is_alive():
                t.join(1.0)
    except KeyboardInterrupt:
        print("interrupted; partial counts:", file=sys.stderr)
    finally:
        for w in pool:
            w.stop()
    report(tally, names, time.monotonic() - started, args)
    if pool:
        print(f"worker restarts (after a crash or hang): {sum(w.restarts for w in pool)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
