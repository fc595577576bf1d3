"""The campaign's machinery: family table, worker process, tally, signal thread, report."""

from __future__ import annotations

import contextlib
import json
import multiprocessing as mp
import os
import random
import resource
import shutil
import signal
import sys
import tempfile
import time
import traceback
from collections import Counter, defaultdict
from pathlib import Path

from .cli_cases import case_cli_misc, case_cli_spec
from .cli_common import EXIT_CODES, case_cli_multiply
from .cli_signals import case_disk_full, case_signal
from .common import BUDGET, DEFECTS, RSS_SLACK, CaseTimeout
from .dist_cases import case_dist, case_dist_answers
from .lib_cases import case_api_algebra, case_api_convolve, case_api_dask, case_api_stream

#: family -> (case function, share of the campaign's time).  Shares, not draw weights: a cheap
#: library case takes milliseconds, a report re-run seconds, so drawing by weight would spend
#: the whole budget on a few slow families.  The scheduler runs next the family furthest below
#: its share of the time spent so far.
FAMILIES = {
    "api.convolve/plan/error_bound": (case_api_convolve, 0.12),
    "api.algebra": (case_api_algebra, 0.10),
    "api.streaming": (case_api_stream, 0.08),
    "api.dask": (case_api_dask, 0.05),
    "dist": (case_dist, 0.10),
    "dist.answers/goals": (case_dist_answers, 0.05),
    "cli.multiply": (case_cli_multiply, 0.15),
    "cli.aggregate/delays spec": (case_cli_spec, 0.15),
    "cli.demo/calibrate/bench/re-run": (case_cli_misc, 0.12),
    "cli.disk-full": (case_disk_full, 0.08),
}
#: Real signals to a real CLI subprocess: run beside the worker in a thread of the parent.
SIGNAL_FAMILY = "cli.signals"
SIGNAL_DUTY = 0.3  # the signal thread keeps a CLI subprocess busy at most this part of the time


# ----------------------------------------------------------------------------------- worker


def _vm_bytes() -> int:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")


def warm_up() -> None:
    """Import and run once what the cases use, so the address-space limit starts from there."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot  # noqa: F401
    import scipy.stats  # noqa: F401

    import polyconv
    import polyconv.cli.main  # noqa: F401
    from polyconv import dist

    polyconv.convolve([1, 2], [3, 4])
    polyconv.convolve([1.0, 2.0], [3.0])
    with contextlib.suppress(Exception):  # the compiled kernels may be unavailable here
        polyconv.convolve([1, 2], [3], method="ntt-compiled")
    dist.Lattice([0.5, 0.5]).nfold(2)
    import dask.array  # noqa: F401


def worker(conn, case_timeout: float, address_space: int) -> None:
    """Run cases sent by the parent; answer (class, detail, CLI exit codes seen).

    Memory: the worker's address space is limited (``RLIMIT_AS``) to what it holds after
    :func:`warm_up` plus the polyconv budget plus ``address_space`` bytes of slack, so an
    allocation the library should have refused fails with MemoryError (class ``memory``)
    instead of swapping the shared machine; the peak resident size is checked too.
    """
    import warnings

    warnings.simplefilter("ignore")
    sys.set_int_max_str_digits(0)  # the harness writes 5000-digit integers
    os.environ["POLYCONV_MEMORY_BUDGET"] = str(BUDGET)
    os.environ["POLYCONV_THREADS"] = "1"
    warm_up()
    limit = _vm_bytes() + BUDGET + address_space
    resource.setrlimit(resource.RLIMIT_AS, (limit, resource.getrlimit(resource.RLIMIT_AS)[1]))
    conn.send(("ready", limit))

    def alarm(signum, frame):
        raise CaseTimeout(f"over {case_timeout:g} s")

    home = Path.cwd()
    while True:
        try:
            family, seed = conn.recv()
        except EOFError:
            return
        signal.signal(signal.SIGALRM, alarm)
        EXIT_CODES.clear()
        work = Path(tempfile.mkdtemp(prefix="polyconv-robust-"))
        rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
        signal.alarm(max(1, int(case_timeout)))
        try:
            verdict, detail = FAMILIES[family][0](random.Random(seed), work)
        except CaseTimeout as exc:
            verdict, detail = "hang", str(exc)
        except MemoryError as exc:
            verdict, detail = "memory", f"MemoryError {exc}"
        except BaseException as exc:  # noqa: BLE001
            verdict, detail = "crash", f"harness: {type(exc).__name__}: {exc} " \
                                       f"{traceback.format_exc()[-800:]}"
        finally:
            signal.alarm(0)
        os.chdir(home)
        rss_after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
        if rss_after > rss_before and rss_after - rss_before > BUDGET + RSS_SLACK:
            verdict, detail = "memory", f"peak RSS grew {(rss_after - rss_before) / 2**20:.0f} " \
                                        f"MiB; {detail}"
        for root, dirs, _ in os.walk(work):
            for d in dirs:
                with contextlib.suppress(OSError):
                    os.chmod(Path(root, d), 0o700)
        shutil.rmtree(work, ignore_errors=True)
        conn.send((verdict, detail[:1500], list(EXIT_CODES)))


class Worker:
    """One persistent worker process (spawned, so no parent thread is forked); restarted when it
    dies or stops answering."""

    def __init__(self, case_timeout: float, address_space: int):
        self.case_timeout = case_timeout
        self.address_space = address_space
        self.restarts = 0
        self.start()

    def start(self) -> None:
        ctx = mp.get_context("spawn")
        self.conn, child = ctx.Pipe()
        self.proc = ctx.Process(target=worker, args=(child, self.case_timeout,
                                                     self.address_space), daemon=True)
        self.proc.start()
        child.close()
        # wait for the imports and warm-up, so the first case's time is its own
        if self.conn.poll(600):
            with contextlib.suppress(EOFError):
                self.conn.recv()

    def restart(self) -> None:
        if self.proc.is_alive():
            self.proc.kill()
        self.proc.join(5)
        self.conn.close()
        self.restarts += 1
        self.start()

    def run(self, family: str, seed: int) -> tuple[str, str, list]:
        self.conn.send((family, seed))
        grace = 15
        if self.conn.poll(self.case_timeout + grace):
            try:
                return self.conn.recv()
            except EOFError:
                pass
            code = self.proc.exitcode
            self.restart()
            return "crash", f"worker died (exit {code})", []
        self.restart()
        return "hang", f"no answer within {self.case_timeout + grace:g} s (worker killed)", []

    def stop(self) -> None:
        self.conn.close()
        self.proc.join(5)
        if self.proc.is_alive():
            self.proc.kill()


class Tally:
    """Counts per family and class, time spent, CLI exit codes and reproducers (thread-safe)."""

    def __init__(self, examples: int):
        import threading

        self.lock = threading.Lock()
        self.counts: dict[str, Counter] = defaultdict(Counter)
        self.spent: Counter = Counter()
        self.exit_codes: Counter = Counter()
        self.examples: dict[str, list[str]] = defaultdict(list)
        self.limit = examples

    def add(self, family: str, seed: int, verdict: str, detail: str, seconds: float,
            codes) -> None:
        with self.lock:
            self.counts[family][verdict] += 1
            self.spent[family] += seconds
            self.exit_codes.update(codes)
            if verdict in DEFECTS:
                found = self.examples[verdict]
                if len(found) < self.limit or verdict in ("wrong", "file", "crash") and \
                        len(found) < 3 * self.limit:
                    found.append(f"[{family} seed={seed}] {detail}")

    @property
    def total(self) -> int:
        return sum(sum(c.values()) for c in self.counts.values())


def next_family(shares: dict[str, float], spent: Counter, rng: random.Random) -> str:
    """The family furthest below its share of the time spent (ties broken at random)."""
    lowest = min(spent[f] / s for f, s in shares.items())
    behind = [f for f, s in shares.items() if spent[f] / s <= lowest + 1e-9]
    return rng.choice(behind)


def signal_loop(tally: Tally, rng: random.Random, deadline: float, lock) -> None:
    """Real signals to CLI subprocesses until the deadline, one at a time, at most
    ``SIGNAL_DUTY`` of the wall time."""
    while time.monotonic() < deadline:
        with lock:
            seed = rng.randrange(2**63)
        work = Path(tempfile.mkdtemp(prefix="polyconv-signal-"))
        t0 = time.monotonic()
        codes: list = []
        try:
            verdict, detail = case_signal(random.Random(seed), work, codes)
        except BaseException as exc:  # noqa: BLE001
            verdict, detail = "crash", f"harness: {type(exc).__name__}: {exc}"
        finally:
            shutil.rmtree(work, ignore_errors=True)
        seconds = time.monotonic() - t0
        tally.add(SIGNAL_FAMILY, seed, verdict, detail, seconds, codes)
        pause = seconds * (1 / SIGNAL_DUTY - 1)
        time.sleep(max(0.0, min(pause, deadline - time.monotonic())))


def report(tally: Tally, names: list[str], seconds: float, args) -> None:
    classes = ["ok", "clear", "interrupted", *DEFECTS]
    print(f"robustness campaign: {tally.total} hostile inputs in {seconds:.0f} s "
          f"(seed {args.seed}, {args.workers} worker(s), case timeout {args.case_timeout:g} s)")
    width = max([len(n) for n in names] + [6])
    print(f"{'family':<{width}}  " + " ".join(f"{c:>11}" for c in classes) + "   seconds")
    sums = Counter()
    for family in names:
        counts = tally.counts[family]
        sums.update(counts)
        print(f"{family:<{width}}  " + " ".join(f"{counts[c]:>11}" for c in classes)
              + f" {tally.spent[family]:9.1f}")
    print(f"{'total':<{width}}  " + " ".join(f"{sums[c]:>11}" for c in classes))
    codes = ", ".join(f"{k}: {v}" for k, v in sorted(tally.exit_codes.items(), key=str))
    print(f"CLI exit statuses seen: {codes or 'none'}")
    for key, items in tally.examples.items():
        print(f"\n{key}:")
        for item in items:
            print("  " + item.replace("\n", " | ")[:700])
    if args.json:
        Path(args.json).write_text(json.dumps(
            {"total": tally.total, "seed": args.seed, "seconds": seconds,
             "counts": {k: dict(v) for k, v in tally.counts.items()},
             "exit_codes": {str(k): v for k, v in tally.exit_codes.items()},
             "examples": tally.examples}, indent=2))


