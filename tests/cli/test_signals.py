"""SIGINT, SIGTERM and SIGHUP reaching the command line at any moment (issue 16, item 9).

Oracles: exit statuses (0, 2 and 130 are the only statuses the CLI documents, errors.py), the
file system state (directory listings, file contents), python-flint for a product that must
come out right, and the process's signal mask in Linux ``/proc/PID/status`` (``SigCgt``, the
caught signals: proc(5)) to know when the handler is in place.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import flint
import numpy as np
import pytest

from polyconv import _atomic
from polyconv.cli import demo_cmd
from polyconv.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
LINUX = pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs Linux /proc")
SIGNALS = [signal.SIGINT, signal.SIGTERM, signal.SIGHUP]


def _env() -> dict:
    return dict(os.environ, PYTHONPATH=str(ROOT))


def _cli(args, cwd, **kwargs):
    return subprocess.Popen([sys.executable, "-m", "polyconv.cli.main", *args], cwd=cwd,
                            env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, **kwargs)


def _python(code: str, args, cwd) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code, *args], cwd=cwd, env=_env(),
                          capture_output=True, text=True, timeout=300)


def _wait_for_handler(proc, signum: int, timeout: float = 60.0) -> None:
    """Poll /proc until the process catches ``signum`` (the CLI's handler is installed)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        try:
            status = Path(f"/proc/{proc.pid}/status").read_text()
        except OSError:
            return
        caught = int(next(line.split()[1] for line in status.splitlines()
                          if line.startswith("SigCgt:")), 16)
        if caught >> (signum - 1) & 1:
            return
        time.sleep(0.002)
    raise AssertionError("the CLI never installed its signal handler")


def _hidden(folder: Path) -> list[str]:
    return [str(p) for p in folder.rglob(".*") if p.suffix in (".tmp", ".part", ".old")]


@LINUX
@pytest.mark.parametrize("sig", SIGNALS)
def test_a_signal_while_numpy_and_scipy_load_exits_130_without_traceback(tmp_path, sig):
    (tmp_path / "a.txt").write_text("1 2")
    proc = _cli(["multiply", "a.txt", "a.txt", "-o", "c.txt"], tmp_path)
    _wait_for_handler(proc, signal.SIGTERM)  # installed before the sub-commands are imported
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "interrupted" in err
    assert sorted(os.listdir(tmp_path)) in (["a.txt"], ["a.txt", "c.txt"])  # never partial
    if (tmp_path / "c.txt").exists():  # the signal came after the output was complete
        assert (tmp_path / "c.txt").read_text().split() == ["1", "4", "4"]  # (1 + 2x)^2


_SIGNAL_AT_EXIT = """
import atexit, os, signal, sys, time
from polyconv.cli.main import main
sig = getattr(signal, os.environ["SIG"])
def late():
    os.kill(os.getpid(), sig)
    time.sleep(1)
if os.environ["WHEN"] == "last":  # registered before main's own hook: runs after it
    atexit.register(late)
status = main()
if os.environ["WHEN"] == "first":  # runs before main's hook: the handler is still in place
    atexit.register(late)
sys.exit(status)
"""


@pytest.mark.parametrize("sig", ["SIGINT", "SIGTERM", "SIGHUP"])
@pytest.mark.parametrize("when", ["first", "last"])
@pytest.mark.parametrize("files, status", [(["a.txt", "a.txt"], 0), (["no.txt", "a.txt"], 2)])
def test_a_signal_while_the_interpreter_shuts_down_keeps_the_status(tmp_path, monkeypatch, sig,
                                                                    when, files, status):
    # found by the robustness campaign: exit -15, -1 (killed by SIGTERM, SIGHUP) after the
    # command had finished: its handlers restored to the default action, or reset to it by the
    # interpreter's finalisation
    (tmp_path / "a.txt").write_text("3 1 4 1 5")
    monkeypatch.setenv("SIG", sig)
    monkeypatch.setenv("WHEN", when)
    proc = _python(_SIGNAL_AT_EXIT, ["multiply", *files], tmp_path)
    assert proc.returncode == status, proc.stderr
    assert "Traceback" not in proc.stderr and "Exception ignored" not in proc.stderr
    if status == 0:
        want = [int(v) for v in (flint.fmpz_poly([3, 1, 4, 1, 5]) ** 2).coeffs()]  # flint
        assert [int(v) for v in proc.stdout.split()] == want
    else:
        assert "no.txt" in proc.stderr


def test_the_last_exit_hook_ignores_the_signals(monkeypatch):
    # CPython's signal finalisation resets Python-level handlers to SIG_DFL but leaves SIG_IGN
    # (Modules/signalmodule.c, _PySignal_Fini): ignoring is what survives to the very end
    from polyconv.cli import main as cli

    saved = {s: signal.getsignal(s) for s in cli.HANDLED_SIGNALS}
    try:
        cli._ignore_signals()
        assert all(signal.getsignal(s) == signal.SIG_IGN for s in cli.HANDLED_SIGNALS)
    finally:
        for s, h in saved.items():
            signal.signal(s, h)


def _numpy_like_import(signum):
    """A loader that turns an interruption into an ImportError, as numpy's __init__ does."""
    def build_parser():
        try:
            os.kill(os.getpid(), signum)
            time.sleep(1)
        except KeyboardInterrupt as exc:
            raise ImportError("numpy: the extension modules failed to load") from exc
        raise AssertionError("the signal was not raised")

    return build_parser


@pytest.mark.parametrize("sig", SIGNALS)
def test_a_signal_turned_into_an_import_error_still_exits_130(monkeypatch, capsys, sig):
    # found by the robustness campaign: SIGINT while numpy loaded gave exit 1 and numpy's
    # "troubleshooting ImportError" text
    from polyconv.cli import main as cli

    monkeypatch.setattr(cli, "build_parser", _numpy_like_import(sig))
    assert main(["multiply", "a.txt", "b.txt"]) == 130
    err = capsys.readouterr().err
    assert f"interrupted ({signal.Signals(sig).name})" in err and "numpy" not in err


def test_a_broken_installation_exits_2_naming_the_failure(monkeypatch, capsys):
    from polyconv.cli import main as cli

    def broken():
        raise ImportError("numpy: the extension modules failed to load")

    monkeypatch.setattr(cli, "build_parser", broken)
    assert main(["multiply", "a.txt", "b.txt"]) == 2
    err = capsys.readouterr().err
    assert "cannot load the command line" in err and "extension modules" in err


def test_a_signal_turned_into_another_error_inside_a_command_exits_130(tmp_path, monkeypatch,
                                                                         capsys):
    def converts():
        try:
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(1)
        except KeyboardInterrupt as exc:
            raise RuntimeError("a library wrapped the interruption") from exc

    monkeypatch.setattr(demo_cmd, "counting", converts)
    assert main(["demo", "-o", str(tmp_path / "d"), "--quiet"]) == 130
    err = capsys.readouterr().err
    assert "interrupted (SIGTERM)" in err and "internal error" not in err
    assert os.listdir(tmp_path) == []


_SIGNAL_WHILE_LOADING = """
import os, signal, sys
import polyconv.cli.main as cli
cli._install_handlers()  # what `python -m polyconv.cli.main` does before it loads anything
os.kill(os.getpid(), getattr(signal, os.environ["SIG"]))  # arrives while the module loads
print("still loading", flush=True)
sys.exit(cli.main())
"""


@pytest.mark.parametrize("sig", ["SIGINT", "SIGTERM", "SIGHUP"])
def test_a_signal_before_the_command_starts_is_raised_when_it_starts(tmp_path, monkeypatch,
                                                                     sig):
    (tmp_path / "a.txt").write_text("1 2")
    monkeypatch.setenv("SIG", sig)
    proc = _python(_SIGNAL_WHILE_LOADING, ["multiply", "a.txt", "a.txt", "-o", "c.txt"],
                   tmp_path)
    assert proc.returncode == 130, proc.stderr
    assert proc.stdout == "still loading\n"  # recorded, not raised, while the module loaded
    assert f"interrupted ({sig})" in proc.stderr and "Traceback" not in proc.stderr
    assert os.listdir(tmp_path) == ["a.txt"]


@LINUX
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGHUP])
def test_sigterm_and_sighup_while_streaming_remove_the_temporary(tmp_path, sig):
    np.save(tmp_path / "a.npy", np.arange(4_000_000) % 1000)
    np.save(tmp_path / "k.npy", np.arange(200) % 7)
    (tmp_path / "out.npy").write_bytes(b"previous")
    proc = _cli(["multiply", "a.npy", "k.npy", "-o", "out.npy", "--memory-budget", "4",
                 "--quiet"], tmp_path)
    deadline = time.monotonic() + 120
    while not any(n.endswith(".tmp") for n in os.listdir(tmp_path)):  # the writer has started
        assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
        time.sleep(0.005)
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and signal.Signals(sig).name in err
    assert sorted(os.listdir(tmp_path)) == ["a.npy", "k.npy", "out.npy"]
    assert (tmp_path / "out.npy").read_bytes() == b"previous"


@LINUX
def test_sighup_while_demo_replaces_its_folder_keeps_the_old_one(tmp_path):
    first = _cli(["demo", "-o", "demo", "--quiet"], tmp_path)
    assert first.wait(timeout=300) == 0, first.communicate()
    before = {p.name: p.read_bytes() for p in (tmp_path / "demo").iterdir()}
    proc = _cli(["demo", "-o", "demo", "--quiet"], tmp_path)
    deadline = time.monotonic() + 300
    while not _hidden(tmp_path):  # the new folder is being built beside the old one
        assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
        time.sleep(0.002)
    proc.send_signal(signal.SIGHUP)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode in (0, 130), err  # 0: the signal came after the folder was swapped
    assert "Traceback" not in err and _hidden(tmp_path) == []
    assert os.listdir(tmp_path) == ["demo"]
    after = {p.name: p.read_bytes() for p in (tmp_path / "demo").iterdir()}
    assert sorted(after) == sorted(before)
    if proc.returncode == 130:
        assert "SIGHUP" in err and after == before


class _SignalsWhenCollected:
    """An object whose finaliser receives the signal (the handler then raises inside __del__,
    where Python can only report the exception as "Exception ignored")."""

    def __del__(self):
        os.kill(os.getpid(), signal.SIGHUP)
        time.sleep(0.5)


def test_a_signal_inside_a_finaliser_is_not_lost(tmp_path, monkeypatch, capsys):
    # found by the robustness campaign: SIGHUP during `aggregate` gave exit 0 with a traceback
    # ("Exception ignored in ...") and the report written as if nothing had happened
    def counting():
        _SignalsWhenCollected()  # collected at once (reference count 0)
        time.sleep(0.5)
        raise AssertionError("the signal was lost")

    monkeypatch.setattr(demo_cmd, "counting", counting)
    before = sys.unraisablehook
    assert main(["demo", "-o", str(tmp_path / "d"), "--quiet"]) == 130
    err = capsys.readouterr().err
    assert "interrupted (SIGHUP)" in err
    assert "Exception ignored" not in err and "Traceback" not in err
    assert os.listdir(tmp_path) == [] and sys.unraisablehook is before


def test_sigterm_in_process_maps_to_130_and_restores_the_handler(tmp_path, capsys, monkeypatch):
    before = signal.getsignal(signal.SIGTERM)
    monkeypatch.setattr(demo_cmd, "counting", lambda: os.kill(os.getpid(), signal.SIGTERM))
    code = main(["demo", "-o", str(tmp_path / "d"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 130 and "SIGTERM" in err
    assert os.listdir(tmp_path) == []
    assert signal.getsignal(signal.SIGTERM) == before


def test_critical_section_holds_a_signal_until_the_rename_is_done(tmp_path):
    target = tmp_path / "f.txt"
    target.write_text("old")
    seen = []
    previous = signal.signal(signal.SIGTERM, lambda s, f: seen.append(target.read_text()))
    try:
        with _atomic.critical_section():
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(0.05)
            assert seen == []  # held back
            target.write_text("new")
        assert seen == ["new"]  # delivered after the block, when the target was complete
    finally:
        signal.signal(signal.SIGTERM, previous)
