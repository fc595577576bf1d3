"""CLI families with the operating system against it: a full disk (file-size limit) and real
signals to a CLI subprocess."""

from __future__ import annotations

import os
import random
import re
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

from .cli_common import judge_cli, run_cli
from .common import BUDGET, ROOT, snapshot


def case_disk_full(rng: random.Random, work: Path):
    """Writes under a file-size limit (RLIMIT_FSIZE: EFBIG, as a full disk gives ENOSPC)."""
    import numpy as np

    np.save(work / "a.npy", np.arange(2000))
    (work / "c.npy").write_bytes(b"previous")
    argv = rng.choice([["multiply", "a.npy", "a.npy", "-o", "c.npy"],
                       ["multiply", "a.npy", "a.npy", "-o", "c.txt"],
                       ["demo", "-o", "demo", "--quiet"]])
    limit = rng.choice([0, 100, 4000, 20000])
    before = snapshot(work)
    soft, hard = resource.getrlimit(resource.RLIMIT_FSIZE)
    old_handler = signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, hard))
    try:
        code, out, err = run_cli(argv, work)
    finally:
        resource.setrlimit(resource.RLIMIT_FSIZE, (soft, hard))
        signal.signal(signal.SIGXFSZ, old_handler)
    verdict = judge_cli(code, out, err, [argv[-2] if argv[0] == "multiply" else "demo",
                                         argv[4] if argv[0] == "multiply" else "demo"],
                        work, before, ["a.npy", "c.npy"])
    if verdict[0] == "clear" and re.search(r"\.tmp|\.part", err):
        return "unclear", f"{argv} under fsize {limit}: names a temporary: {err.strip()}"
    return verdict[0], f"{argv} under fsize {limit}: {verdict[1]}"


def wait_for_handler(proc, timeout: float = 120.0) -> float:
    """Seconds until the CLI subprocess catches SIGTERM (Linux ``/proc/PID/status``, field
    ``SigCgt``: proc(5)).  Before that the interpreter itself is starting (``site``, before any
    line of polyconv runs) and a signal takes the system's default action, which no program
    can change; the campaign's signals arrive from then on, at a random moment."""
    t0 = time.monotonic()
    status = Path(f"/proc/{proc.pid}/status")
    while time.monotonic() - t0 < timeout and proc.poll() is None:
        try:
            caught = int(next(line.split()[1] for line in status.read_text().splitlines()
                              if line.startswith("SigCgt:")), 16)
        except (OSError, StopIteration, ValueError):
            time.sleep(0.5)  # no /proc here: give the interpreter half a second
            break
        if caught >> (signal.SIGTERM - 1) & 1:
            break
        time.sleep(0.001)
    return time.monotonic() - t0


def case_signal(rng: random.Random, work: Path, codes: list | None = None):
    """A real signal to a CLI subprocess at a random moment (its exit status joins ``codes``)."""
    import numpy as np

    np.save(work / "a.npy", np.arange(3_000_000) % 1000)
    np.save(work / "k.npy", np.arange(300) % 7)
    np.save(work / "out.npy", np.arange(5))
    argv = rng.choice([["multiply", "a.npy", "k.npy", "-o", "out.npy", "--memory-budget", "4",
                        "--quiet"],
                       ["demo", "-o", "demo", "--quiet"],
                       ["aggregate", str(ROOT / "polyconv/data/demo/quillmere_claims.toml"),
                        "-o", "rep", "--quiet"]])
    env = dict(os.environ, PYTHONPATH=str(ROOT), POLYCONV_MEMORY_BUDGET=str(BUDGET))
    if argv[0] == "demo" and rng.random() < 0.5:  # a second demo into an existing folder
        subprocess.run([sys.executable, "-m", "polyconv.cli.main", *argv], cwd=work, env=env,
                       capture_output=True, timeout=300, check=False)
    sig = rng.choice([signal.SIGINT, signal.SIGTERM, signal.SIGHUP])
    delay = rng.uniform(0.0, 6.0)
    before = snapshot(work)
    proc = subprocess.Popen([sys.executable, "-m", "polyconv.cli.main", *argv], cwd=work,
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    started = wait_for_handler(proc)
    time.sleep(delay)
    proc.send_signal(sig)
    try:
        out, err = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        return "hang", f"{argv} after {sig.name} at {delay:.2f}s"
    code = proc.returncode
    if codes is not None:
        codes.append(code)
    what = f"{argv} {sig.name} {delay:.2f}s after the handler was in place ({started:.2f}s)"
    verdict = judge_cli(code, out, err, [], work, before, ["a.npy", "k.npy"])
    if verdict[0] in ("file", "crash"):
        return verdict[0], f"{what}: {verdict[1]}"
    after = snapshot(work)
    if argv[0] == "multiply" and code != 0 and after.get("out.npy") != before.get("out.npy"):
        return "file", f"{what}: exit {code} but out.npy changed"
    if argv[0] == "multiply" and code == 0:
        got = np.load(work / "out.npy")
        if got.shape != (3_000_299,):
            return "file", f"{what}: out.npy incomplete {got.shape}"
    folder = {"demo": "demo", "aggregate": "rep"}.get(argv[0])
    if folder is not None:  # a report folder: the old one intact, or the new one complete
        def files(state):
            return {k: v for k, v in state.items() if k.startswith(folder + os.sep)}

        if code != 0 and files(after) != files(before):
            return "file", f"{what}: exit {code} but {folder}/ changed"
        if code == 0 and f"{folder}{os.sep}{'report.md' if folder == 'demo' else 'summary.md'}" \
                not in after:
            return "file", f"{what}: exit 0 but {folder}/ incomplete: {sorted(files(after))}"
    return ("interrupted" if code == 130 else "ok"), what


