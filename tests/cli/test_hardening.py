"""Hardening of the command line's files and input errors (issue 16, items 6-8, 10-12; signals, item
9, are in test_signals.py).

Oracles: the file system state itself (contents, ``os.stat`` modes, directory listings), exit
statuses (0, 2, 130 are the CLI's documented statuses), numpy.convolve / python-flint for the
products that must still come out right.
"""

from __future__ import annotations

import errno
import json
import os
import resource
import signal
import stat
import subprocess
import sys
from pathlib import Path

import flint
import numpy as np
import pytest

from polyconv import _atomic
from polyconv.cli import demo_cmd, fileio
from polyconv.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
CLAIMS = ROOT / "polyconv" / "data" / "demo" / "quillmere_claims.toml"


def run_cli(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def listing(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def mode(path: Path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


@pytest.fixture
def umask():
    """Set a umask for one test and restore it (os.umask is process-wide)."""
    saved = os.umask(0o022)
    os.umask(saved)

    def set_mask(mask: int) -> None:
        os.umask(mask)

    yield set_mask
    os.umask(saved)


# ------------------------------------------------------------------ item 6: atomic folders


@pytest.fixture
def old_report(tmp_path, capsys):
    """An aggregate report folder whose files are then overwritten with OLD markers."""
    code, _, err = run_cli(["aggregate", str(CLAIMS), "-o", str(tmp_path / "rep"), "--quiet"],
                           capsys)
    assert code == 0, err
    rep = tmp_path / "rep"
    for p in rep.iterdir():
        p.write_text(f"OLD {p.name}")
    (rep / "mine.txt").write_text("a file of the user's")
    return rep


@pytest.mark.parametrize("fail_at", [1, 2, 3])
@pytest.mark.parametrize("failure", [KeyboardInterrupt, OSError])
def test_failed_rerun_leaves_the_old_folder_exactly(old_report, capsys, monkeypatch, fail_at,
                                                    failure):
    before = listing(old_report)
    calls = []
    real = Path.write_text

    def failing_write(self, *args, **kwargs):
        calls.append(self)
        if len(calls) == fail_at:
            raise failure(errno.ENOSPC, "No space left on device") if failure is OSError \
                else KeyboardInterrupt
        return real(self, *args, **kwargs)

    monkeypatch.setattr(Path, "write_text", failing_write)
    code, _, err = run_cli(["aggregate", str(CLAIMS), "-o", str(old_report), "--quiet"], capsys)
    assert code == (130 if failure is KeyboardInterrupt else 2)
    # oracle: the folder's bytes, and the parent holds nothing but the folder
    assert listing(old_report) == before
    assert os.listdir(old_report.parent) == ["rep"]


def test_failed_publishing_rename_rolls_back(old_report, capsys, monkeypatch):
    before = listing(old_report)
    monkeypatch.setattr(_atomic, "_exchange", lambda a, b: False)  # the two-rename path
    real = os.rename
    failed = []

    def rename(src, dst):
        if ".old" not in str(dst) and not failed:
            failed.append(dst)
            raise OSError(errno.EIO, "injected")
        return real(src, dst)

    monkeypatch.setattr(os, "rename", rename)
    code, _, _ = run_cli(["aggregate", str(CLAIMS), "-o", str(old_report), "--quiet"], capsys)
    assert code == 2 and failed
    assert listing(old_report) == before
    assert os.listdir(old_report.parent) == ["rep"]


@pytest.mark.parametrize("exchange", [True, False])
def test_successful_rerun_replaces_every_file_and_keeps_the_users(old_report, capsys,
                                                                  monkeypatch, exchange):
    if not exchange:
        monkeypatch.setattr(_atomic, "_exchange", lambda a, b: False)
    code, _, _ = run_cli(["aggregate", str(CLAIMS), "-o", str(old_report), "--quiet"], capsys)
    assert code == 0
    files = listing(old_report)
    assert [n for n, data in files.items() if data.startswith(b"OLD")] == []
    assert files["mine.txt"] == b"a file of the user's"
    assert os.listdir(old_report.parent) == ["rep"]


# --------------------------------------------------------------------------- item 8: modes


def test_new_files_and_folders_honour_the_umask(tmp_path, capsys, umask):
    umask(0o027)
    (tmp_path / "a.txt").write_text("1 2")
    assert run_cli(["multiply", str(tmp_path / "a.txt"), str(tmp_path / "a.txt"), "-o",
                    str(tmp_path / "c.npy")], capsys)[0] == 0
    assert mode(tmp_path / "c.npy") == 0o640  # 0o666 & ~0o027, what open() gives
    assert run_cli(["aggregate", str(CLAIMS), "-o", str(tmp_path / "rep"), "--quiet"],
                   capsys)[0] == 0
    assert mode(tmp_path / "rep") == 0o750  # 0o777 & ~0o027, what mkdir() gives
    assert {mode(p) for p in (tmp_path / "rep").iterdir()} == {0o640}


def test_replacing_keeps_the_existing_modes(tmp_path, capsys, umask):
    umask(0o077)
    (tmp_path / "a.txt").write_text("1 2")
    out = tmp_path / "c.txt"
    out.write_text("old")
    out.chmod(0o644)
    assert run_cli(["multiply", str(tmp_path / "a.txt"), str(tmp_path / "a.txt"), "-o",
                    str(out)], capsys)[0] == 0
    assert out.read_text().split() == ["1", "4", "4"]  # (1 + 2x)^2
    assert mode(out) == 0o644
    rep = tmp_path / "rep"
    assert run_cli(["aggregate", str(CLAIMS), "-o", str(rep), "--quiet"], capsys)[0] == 0
    rep.chmod(0o755)
    (rep / "summary.md").chmod(0o664)
    assert run_cli(["aggregate", str(CLAIMS), "-o", str(rep), "--quiet"], capsys)[0] == 0
    assert mode(rep) == 0o755
    assert mode(rep / "summary.md") == 0o664


def test_cost_file_and_streamed_npy_keep_their_modes(tmp_path, umask):
    from polyconv.scale import streaming
    from polyconv.tuning import costs

    umask(0o077)
    path = tmp_path / "costs.json"
    path.write_text("{}")
    path.chmod(0o644)
    try:
        costs.save_user_costs(costs.default_costs(), path)
    finally:
        costs.load_costs(refresh=True)
    assert mode(path) == 0o644
    assert json.loads(path.read_text()) == costs.default_costs()
    out = tmp_path / "out.npy"
    out.write_bytes(b"x")
    out.chmod(0o640)
    src = tmp_path / "src.npy"
    np.save(src, np.arange(10))
    streaming.convolve_file(src, [1, 1], out)
    assert mode(out) == 0o640
    assert np.array_equal(np.load(out), np.convolve(np.arange(10), [1, 1]))  # oracle: numpy


# ------------------------------------------------------------ item 7: inputs never outputs


def test_output_equal_to_an_input_is_refused(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    np.save("small.npy", np.arange(5))
    np.save("b.npy", np.arange(3))
    os.link("b.npy", "hard.npy")
    before = {p: Path(p).read_bytes() for p in ("small.npy", "b.npy")}
    for out in ("small.npy", "./small.npy", str(tmp_path / "small.npy"), "hard.npy"):
        code, _, err = run_cli(["multiply", "small.npy", "b.npy", "-o", out], capsys)
        assert code == 2, out
        assert out in err and "overwrite an input" in err
    assert {p: Path(p).read_bytes() for p in before} == before


def test_streamed_output_equal_to_the_kernel_is_refused(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    np.save("long.npy", np.arange(300_000) % 7)
    np.save("k.npy", np.arange(4))
    before = Path("k.npy").read_bytes()
    code, _, err = run_cli(["multiply", "long.npy", "k.npy", "-o", "k.npy", "--memory-budget",
                            "1", "--quiet"], capsys)
    assert code == 2 and "'k.npy'" in err and "input b" in err
    assert Path("k.npy").read_bytes() == before


def test_demo_keeps_an_edited_spec_copy_and_says_so(tmp_path, capsys):
    folder = tmp_path / "demo"
    assert run_cli(["demo", "-o", str(folder), "--quiet"], capsys)[0] == 0
    edited = folder / demo_cmd.SCENARIOS[0]
    edited.write_text("# my own edit\n")
    code, out, _ = run_cli(["demo", "-o", str(folder), "--quiet"], capsys)
    assert code == 0
    assert edited.read_text() == "# my own edit\n"
    assert f"kept your edited {edited}" in out
    # the unedited copy is (re)written with the bundled text
    other = folder / demo_cmd.SCENARIOS[1]
    assert other.read_text() == demo_cmd.scenario_text(demo_cmd.SCENARIOS[1])
    assert f"kept your edited {other}" not in out


# ------------------------------------------------------------------------ disk full (11)
# (item 9, signals: tests/cli/test_signals.py)


def _cli(args, cwd, **kwargs):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "polyconv.cli.main", *args], cwd=cwd,
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            **kwargs)



def _limit_file_size(limit: int):
    def apply() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # EFBIG instead of death, like ENOSPC
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return apply


@pytest.mark.parametrize("suffix", [".npy", ".txt"])
def test_a_full_disk_names_the_output_and_keeps_the_old_file(tmp_path, suffix):
    np.save(tmp_path / "a.npy", np.arange(3000))
    out = tmp_path / f"c{suffix}"
    out.write_bytes(b"previous")
    proc = _cli(["multiply", "a.npy", "a.npy", "-o", out.name], tmp_path,
                preexec_fn=_limit_file_size(4096))
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 2
    assert str(out) in err and ".tmp" not in err
    assert out.read_bytes() == b"previous"
    assert sorted(os.listdir(tmp_path)) == ["a.npy", out.name]


# --------------------------------------------------------------- items 11, 12: bad input


def _files(folder: Path) -> None:
    np.save(folder / "b.npy", np.arange(3))
    np.savez(folder / "z.npz", a=np.arange(3))
    os.replace(folder / "z.npz", folder / "z.npy")
    (folder / "rand.npy").write_bytes(bytes(range(7, 207)))
    np.save(folder / "head.npy", np.arange(5))
    raw = bytearray((folder / "head.npy").read_bytes())
    raw[20:30] = b"(((((((((("
    (folder / "head.npy").write_bytes(bytes(raw))
    (folder / "deep.json").write_text("[" * 100_000 + "]" * 100_000)
    (folder / "nan.json").write_text("[1, NaN]")
    (folder / "inf.json").write_text("[Infinity, 1]")
    (folder / "big.json").write_text("[1, 1e400]")
    (folder / "big.txt").write_text("1 1e400")
    (folder / "nan.txt").write_text("1 nan")
    np.save(folder / "nan.npy", np.array([1.0, np.nan]))


BAD_INPUT = [
    (["z.npy", "b.npy"], "'z.npy': is a .npz archive"),
    (["rand.npy", "b.npy"], "'rand.npy': not a .npy file"),
    (["head.npy", "b.npy"], "'head.npy': the .npy header is corrupt"),
    (["deep.json", "b.npy"], "'deep.json': nested too deeply"),
    (["nan.json", "b.npy"], "'nan.json': NaN is not a number"),
    (["inf.json", "b.npy"], "'inf.json': Infinity is not a number"),
    (["big.json", "b.npy"], "'1e400' is beyond the floating-point range"),
    (["big.txt", "b.npy"], "'big.txt', line 1: '1e400' is beyond"),
    (["nan.txt", "b.npy"], "'nan' is not a number"),
    (["nan.npy", "b.npy"], "'nan.npy': entry [1] is nan"),
    (["b.npy", "b.npy", "--modulus", "\u0667"], "--modulus must be a whole number"),
    (["b.npy", "b.npy", "--length", "\u0663"], "--length must be a whole number"),
    (["b.npy", "b.npy", "--memory-budget", "nan"], "--memory-budget must be"),
    (["b.npy", "b.npy", "--memory-budget", "inf"], "--memory-budget must be"),
    (["b.npy", "b.npy", "--length", "1000000000", "--memory-budget", "64"],
     "--length 1000000000"),
]


@pytest.mark.parametrize(("args", "message"), BAD_INPUT)
def test_bad_input_files_and_options_exit_2_naming_them(tmp_path, capsys, monkeypatch, args,
                                                        message):
    monkeypatch.chdir(tmp_path)
    _files(tmp_path)
    code, out, err = run_cli(["multiply", *args], capsys)
    assert code == 2, err
    assert message in err
    assert "Traceback" not in err and "internal error" not in err


def _claims(tmp_path: Path, old: str, new: str) -> Path:
    text = CLAIMS.read_text()
    assert old in text
    path = tmp_path / "spec.toml"
    path.write_text(text.replace(old, new))
    return path


SPEC_EDITS = [
    # a subnormal step is refused by its own key (below 2^-1022, the smallest normal double:
    # IEEE 754-2008 binary64), before the deductible it cannot resolve is looked at
    ("step = 100.0 ", "step = 5e-324 ", "grid.step"),
    ("limit = 100000.0", "limit = 1e300", "grid.max_points"),
    ('law = "lognorm"               # scipy.stats.lognorm: median = scale, shape s\n'
     "params = { s = 1.25, scale = 5200.0 }", "values = [1e300]\nprobabilities = [1.0]",
     "severity.values"),
    ("params = { s = 1.25, scale = 5200.0 }", "params = { s = -1.0 }", "severity.params"),
    ("[report]", "deep = " + "[" * 5000 + "]" * 5000 + "\n[report]", "nested too deeply"),
]


@pytest.mark.parametrize(("old", "new", "message"), SPEC_EDITS)
def test_hostile_spec_values_exit_2_naming_the_key(tmp_path, capsys, old, new, message):
    spec = _claims(tmp_path, old, new)
    code, _, err = run_cli(["aggregate", str(spec), "-o", str(tmp_path / "r"), "--quiet"],
                           capsys)
    assert code == 2, err
    assert message in err and "spec.toml" in err
    assert "internal error" not in err and "convert" not in err
    assert sorted(os.listdir(tmp_path)) == ["spec.toml"]


def test_a_delay_chain_nested_1000_deep_exits_2(tmp_path, capsys):
    parts = ['title = "chain"', 'unit = "ms"', "[grid]", "step = 1.0", "[network]",
             'in_sequence = ["s0"]']
    for i in range(1000):
        parts += [f"[stage.s{i}]", f'in_sequence = ["s{i + 1}"]']
    parts += ["[stage.s1000]", "values = [1.0]", "probabilities = [1.0]"]
    spec = tmp_path / "chain.toml"
    spec.write_text("\n".join(parts) + "\n")
    code, _, err = run_cli(["delays", str(spec), "-o", str(tmp_path / "r"), "--quiet"], capsys)
    assert code == 2
    assert "chain.toml" in err and "Traceback" not in err


@pytest.mark.parametrize("edit", ["missing", "wrong type", "not json"])
def test_a_broken_cost_file_is_named(tmp_path, edit):
    from polyconv.tuning import costs

    table = costs.default_costs()
    if edit == "missing":
        del table["exact"]["ntt"]
    elif edit == "wrong type":
        table["fft"]["overhead"] = "fast"
    path = tmp_path / "costs.json"
    path.write_text("[" * 100_000 if edit == "not json" else json.dumps(table))
    (tmp_path / "a.txt").write_text("3 1 4 1 5")
    env = dict(os.environ, PYTHONPATH=str(ROOT), POLYCONV_COSTS=str(path))
    proc = subprocess.run([sys.executable, "-m", "polyconv.cli.main", "multiply", "a.txt",
                           "a.txt"], cwd=tmp_path, env=env, capture_output=True, text=True,
                          timeout=120)
    assert f"cost file {str(path)!r}" in proc.stderr and "Traceback" not in proc.stderr
    if edit == "not json":  # skipped with a warning: the shipped defaults compute the product
        assert proc.returncode == 0, proc.stderr
        want = [int(v) for v in (flint.fmpz_poly([3, 1, 4, 1, 5]) ** 2).coeffs()]  # flint
        assert [int(v) for v in proc.stdout.split()] == want
    else:  # a JSON table with a key missing or of the wrong type is refused, naming the key
        assert proc.returncode == 2
        assert ("exact.ntt" if edit == "missing" else "fft.overhead") in proc.stderr


def test_read_sequence_reads_the_header_before_the_data(tmp_path):
    # a header announcing 2^40 int64 values is refused before numpy tries to load them
    path = tmp_path / "huge.npy"
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(fh, {"descr": "<i8", "fortran_order": False,
                                                  "shape": (2**40,)})
    with pytest.raises(ValueError, match="huge.npy"):
        fileio.read_sequence(path, "input a")
