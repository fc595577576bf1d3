"""The command line: multiply round trips, help texts, bad input, Ctrl-C, bench, subprocess.

Every call goes through ``polyconv.cli.main.main([...])`` (and once through a real subprocess);
every bad input must give exit status 2 and a one-line message, never a traceback.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from polyconv.cli import bench_cmd, demo_cmd, plots
from polyconv.cli.fileio import unlimited_int_digits
from polyconv.cli.main import main


def schoolbook(a: list[int], b: list[int]) -> list[int]:
    """Reference product by the definition c_k = sum_i a_i b_{k-i} (Python ints, exact)."""
    c = [0] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            c[i + j] += x * y
    return c


def run_cli(args: list[str], capsys) -> tuple[int, str, str]:
    code = main(args)
    out, err = capsys.readouterr()
    return code, out, err


# ------------------------------------------------------------------------------- multiply


def test_multiply_big_integers_text_to_stdout_is_exact(tmp_path, capsys):
    a = [3**400, -(2**300) + 1, 17, 0, 5]
    b = [-(7**250), 1, 2**500]
    (tmp_path / "a.txt").write_text("\n".join(map(str, a)) + "\n", encoding="utf-8")
    (tmp_path / "b.csv").write_text(", ".join(map(str, b)) + "  # a comment\n", encoding="utf-8")
    code, out, err = run_cli(["multiply", str(tmp_path / "a.txt"), str(tmp_path / "b.csv")],
                             capsys)
    assert code == 0, err
    assert [int(v) for v in out.split()] == schoolbook(a, b)


def test_multiply_integers_beyond_the_default_digit_limit(tmp_path, capsys):
    # Python refuses int <-> str beyond 4300 digits by default; the CLI must not
    a = [10**6000 + 1, 2]
    b = [3, 10**5000]
    with unlimited_int_digits():
        (tmp_path / "a.json").write_text("[" + ", ".join(map(str, a)) + "]")
        (tmp_path / "b.txt").write_text(" ".join(map(str, b)))
    out_file = tmp_path / "c.json"
    code, _, err = run_cli(["multiply", str(tmp_path / "a.json"), str(tmp_path / "b.txt"),
                            "-o", str(out_file)], capsys)
    assert code == 0, err
    with unlimited_int_digits():
        assert json.loads(out_file.read_text()) == schoolbook(a, b)


@pytest.mark.parametrize("suffix", [".npy", ".txt", ".csv", ".json"])
def test_multiply_writes_each_format_readably(tmp_path, capsys, suffix):
    rng = np.random.default_rng(3)
    a = rng.integers(-1000, 1000, 50)
    b = rng.integers(-1000, 1000, 30)
    np.save(tmp_path / "a.npy", a)
    np.save(tmp_path / "b.npy", b)
    out_file = tmp_path / f"c{suffix}"
    code, out, err = run_cli(["multiply", str(tmp_path / "a.npy"), str(tmp_path / "b.npy"),
                              "-o", str(out_file)], capsys)
    assert code == 0, err
    expected = schoolbook(a.tolist(), b.tolist())
    if suffix == ".npy":
        got = np.load(out_file).tolist()
    elif suffix == ".json":
        got = json.loads(out_file.read_text())
    else:
        got = [int(v) for v in out_file.read_text().split()]
    assert got == expected
    assert not list(tmp_path.glob(".*part"))  # no temporary file left


def test_multiply_modulus_length_and_explain(tmp_path, capsys):
    a = [2**70 + 5, 3, 4, 9]
    b = [1, 2**65, 7]
    m = 998244353
    (tmp_path / "a.txt").write_text(",".join(map(str, a)))
    (tmp_path / "b.txt").write_text(",".join(map(str, b)))
    code, out, err = run_cli(["multiply", str(tmp_path / "a.txt"), str(tmp_path / "b.txt"),
                              "--modulus", str(m), "--length", "4", "--explain"], capsys)
    assert code == 0, err
    assert [int(v) for v in out.split()] == [c % m for c in schoolbook(a, b)[:4]]
    # the plan goes to stderr when the product goes to stdout
    assert "polyconv plan:" in err and "exact:" in err and "error bound:" in err


def test_multiply_floats_and_json_summary(tmp_path, capsys):
    (tmp_path / "a.txt").write_text("0.5\n1.25\n-2\n")
    (tmp_path / "b.json").write_text("[4, 0.5]")
    code, out, err = run_cli(["multiply", str(tmp_path / "a.txt"), str(tmp_path / "b.json"),
                              "--json"], capsys)
    assert code == 0, err
    payload = json.loads(out)
    assert payload["coefficients"] == pytest.approx([2.0, 5.25, -7.375, -1.0], abs=1e-12)
    assert set(payload["plan"]) >= {"engine", "exact", "certificate", "error_bound",
                                    "predicted_seconds", "reason"}


BAD_MULTIPLY = [
    (["a.txt", "missing.txt"], "no such file"),
    (["a.txt", "b.xls"], "unknown file type"),
    (["a.txt", "letters.txt"], "'x' is not a number"),
    (["a.txt", "empty.txt"], "holds no numbers"),
    (["a.txt", "bad.json"], "not valid JSON"),
    (["a.txt", "dict.json"], "expected a JSON list"),
    (["a.txt", "strings.json"], "not a number"),
    (["a.txt", "pickled.npy"], "pickles"),
    (["a.txt", "matrix.npy"], "1-D"),
    (["a.txt", "a.txt", "--modulus", "1"], "at least 2"),
    (["a.txt", "a.txt", "--modulus", "7.5"], "whole number"),
    (["a.txt", "floats.txt", "--modulus", "7"], "integer inputs"),
    (["a.txt", "a.txt", "--length", "-3"], "at least 1"),
    (["a.txt", "a.txt", "--length", "ten"], "whole number"),
    (["a.txt", "a.txt", "-o", "out.docx"], "unknown file type"),
    (["a.txt", "a.txt", "-o", "no/such/dir/c.txt"], "does not exist"),
    (["a.txt", "folder.txt"], "is a folder"),
    (["huge.txt", "huge.txt", "-o", "c.npy"], "beyond 64 bits"),
    (["a.txt"], "required"),
]


@pytest.mark.parametrize(("args", "message"), BAD_MULTIPLY)
def test_multiply_bad_input_exits_2_with_a_message(tmp_path, capsys, monkeypatch, args,
                                                   message):
    monkeypatch.chdir(tmp_path)
    Path("a.txt").write_text("1 2 3")
    Path("letters.txt").write_text("1\nx\n")
    Path("empty.txt").write_text("# nothing\n")
    Path("bad.json").write_text("[1, 2,")
    Path("dict.json").write_text('{"a": 1}')
    Path("strings.json").write_text('[1, "2"]')
    Path("floats.txt").write_text("1.5 2")
    Path("huge.txt").write_text(str(2**80))
    Path("folder.txt").mkdir()
    np.save("pickled.npy", np.array([1, "x"], dtype=object), allow_pickle=True)
    np.save("matrix.npy", np.ones((2, 2)))
    code, out, err = run_cli(["multiply", *args], capsys)
    assert code == 2
    assert message in err
    assert "Traceback" not in err + out
    assert not Path("c.npy").exists()


# -------------------------------------------------------------------------- help, usage


@pytest.mark.parametrize("command", ["multiply", "aggregate", "delays", "demo", "bench",
                                     "calibrate"])
def test_every_command_has_help_with_an_example(capsys, command):
    code, out, _ = run_cli([command, "--help"], capsys)
    assert code == 0
    assert "example" in out and f"polyconv {command}" in out


def test_no_command_prints_help_and_exits_2(capsys):
    code, out, _ = run_cli([], capsys)
    assert code == 2
    for command in ("multiply", "aggregate", "delays", "demo", "bench", "calibrate"):
        assert command in out


def test_unknown_command_and_option_exit_2(capsys):
    assert run_cli(["frobnicate"], capsys)[0] == 2
    assert run_cli(["demo", "--colour"], capsys)[0] == 2


# ----------------------------------------------------------------------------- Ctrl-C


def test_interrupt_leaves_no_half_written_report(tmp_path, capsys, monkeypatch):
    target = tmp_path / "report"

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    # interrupt while the report folder is being filled (after the CSVs of part 1)
    monkeypatch.setattr(demo_cmd.delays_cmd, "write_report", interrupted)
    code, out, err = run_cli(["demo", "-o", str(target), "--quiet"], capsys)
    assert code == 130
    assert "interrupted" in err and "Traceback" not in err
    assert not target.exists()
    assert os.listdir(tmp_path) == []  # the staging folder is gone too


def test_interrupt_keeps_an_existing_folder_as_it_was(tmp_path, capsys, monkeypatch):
    target = tmp_path / "report"
    target.mkdir()
    (target / "report.md").write_text("old report")
    monkeypatch.setattr(demo_cmd, "counting", lambda: (_ for _ in ()).throw(KeyboardInterrupt))
    code, _, _ = run_cli(["demo", "-o", str(target), "--quiet"], capsys)
    assert code == 130
    assert os.listdir(target) == ["report.md"]
    assert (target / "report.md").read_text() == "old report"
    assert sorted(os.listdir(tmp_path)) == ["report"]


def test_real_sigint_in_a_subprocess_exits_130_cleanly(tmp_path):
    target = tmp_path / "demo"
    script = (
        "import os, signal, sys, threading\n"
        "from polyconv.cli.main import main\n"
        "threading.Timer(0.25, lambda: os.kill(os.getpid(), signal.SIGINT)).start()\n"
        f"sys.exit(main(['demo', '-o', {str(target)!r}, '--quiet']))\n"
    )
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 130, proc.stderr
    assert "Traceback" not in proc.stderr
    assert not target.exists()
    assert os.listdir(tmp_path) == []


# ------------------------------------------------------------------------ subprocess, bench


def test_module_entry_point_in_a_subprocess(tmp_path):
    (tmp_path / "a.txt").write_text("1 1")
    proc = subprocess.run([sys.executable, "-m", "polyconv.cli.main", "multiply",
                           str(tmp_path / "a.txt"), str(tmp_path / "a.txt")],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.split() == ["1", "2", "1"]  # (1 + x)^2
    proc = subprocess.run([sys.executable, "-m", "polyconv.cli.main", "aggregate",
                           str(tmp_path / "none.toml")], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 2 and "no such file" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_bench_json_on_tiny_cases(capsys, monkeypatch):
    def tiny(rng):
        return [bench_cmd.Case("float", rng.standard_normal(64), rng.standard_normal(64), False),
                bench_cmd.Case("int", rng.integers(0, 100, 64), rng.integers(0, 100, 64), True)]

    monkeypatch.setattr(bench_cmd, "cases", tiny)
    monkeypatch.setattr(bench_cmd, "MIN_TIME", 0.001)
    code, out, err = run_cli(["bench", "--json"], capsys)
    assert code == 0, err
    rows = json.loads(out)["results"]
    assert [r["case"] for r in rows] == ["float", "int"]
    for r in rows:
        assert r["polyconv_seconds"] > 0
        assert r["references"]["numpy.convolve"]["agrees"] is True
    code, out, _ = run_cli(["bench", "--quiet"], capsys)
    assert code == 0 and "numpy.convolve" in out


def test_figures_are_skipped_with_a_note_without_matplotlib(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(plots, "available", lambda: False)
    code, out, err = run_cli(["demo", "-o", str(tmp_path / "d"), "--quiet"], capsys)
    assert code == 0, err
    assert not list((tmp_path / "d").glob("*.png"))
    assert plots.MISSING_NOTE in out
