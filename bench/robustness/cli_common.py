"""Running the CLI in the worker, judging its outcome from the file system; the
``multiply`` family on hostile files."""

from __future__ import annotations

import contextlib
import io
import json
import os
import random
import traceback
from pathlib import Path

from .common import CaseTimeout, flint_product, hidden_leftovers, names_argument, snapshot

# ----------------------------------------------------------------------------- CLI helpers


EXIT_CODES: list = []  # exit statuses of the CLI runs of the current case (sent to the parent)


def run_cli(argv: list[str], cwd: Path) -> tuple[int | None, str, str]:
    """``polyconv.cli.main.main(argv)`` in ``cwd`` with captured output, in this (warm) worker
    interpreter; (None, ..) if an exception escaped (a crash)."""
    from polyconv.cli.main import main

    out, err = io.StringIO(), io.StringIO()
    old = Path.cwd()
    os.chdir(cwd)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else -1
            except CaseTimeout:
                raise
            except BaseException:  # noqa: BLE001
                err.write(traceback.format_exc())
                code = None
    finally:
        os.chdir(old)
    EXIT_CODES.append(code)
    return code, out.getvalue(), err.getvalue()


def judge_cli(code, out: str, err: str, names, work: Path, before: dict,
              protected: list[str]) -> tuple[str, str]:
    """Classify a CLI outcome from its exit status, its messages and the file system."""
    text = err + out
    leftovers = hidden_leftovers(work)
    after = snapshot(work)
    changed = [p for p in protected if before.get(p) != after.get(p)]
    if leftovers:
        return "file", f"hidden temporaries left: {leftovers}; stderr: {err[-300:]}"
    if changed:
        return "file", f"inputs changed: {changed}; stderr: {err[-300:]}"
    if code is None or "Traceback" in text or code not in (0, 2, 130):
        return "crash", f"exit {code}: {text[-600:]}"
    if code == 2:
        if "internal error" in err:
            return "crash", err.strip()[-400:]
        if names_argument(err, names):
            return "clear", err.strip()[-200:]
        return "unclear", err.strip()[-300:]
    if code == 130:
        return "interrupted", err.strip()[-200:]
    return "ok", ""


# ------------------------------------------------------------------------------ CLI families


def write_hostile_file(rng: random.Random, path: Path) -> str:
    """A coefficient file that is valid, corrupt or hostile; returns what was done."""
    import numpy as np

    kind = rng.randrange(20)
    suffix = path.suffix
    if suffix == ".npy":
        if kind < 6:
            np.save(path, np.array([rng.randint(-50, 50) for _ in range(rng.randint(1, 40))]))
            return "valid npy"
        if kind == 6:
            path.write_bytes(os.urandom(rng.randint(0, 400)))
            return "random bytes"
        if kind == 7:
            np.savez(str(path) + ".npz", a=np.arange(3))
            os.replace(str(path) + ".npz", path)
            return "npz renamed"
        if kind == 8:
            np.save(path, np.arange(10))
            raw = bytearray(path.read_bytes())
            for _ in range(rng.randint(1, 4)):
                raw[rng.randrange(8, 80)] = rng.randrange(256)
            path.write_bytes(bytes(raw))
            return "corrupt header"
        if kind == 9:
            np.save(path, np.arange(100))
            path.write_bytes(path.read_bytes()[:rng.randint(0, 500)])
            return "truncated"
        if kind == 10:
            np.save(path, np.array([1, "x"], dtype=object), allow_pickle=True)
            return "pickle"
        if kind == 11:
            np.save(path, np.array([1.0, np.nan, np.inf]))
            return "nan/inf"
        if kind == 12:
            np.save(path, np.ones((2, 2)))
            return "2-D"
        if kind == 13:
            np.save(path, np.array([], dtype=np.int64))
            return "empty"
        if kind == 14:
            np.save(path, np.array(["a", "b"]))
            return "strings"
        np.save(path, np.array([rng.uniform(-1, 1) for _ in range(rng.randint(1, 30))]))
        return "valid float npy"
    choices = [
        lambda: " ".join(str(rng.randint(-9, 9)) for _ in range(rng.randint(1, 30))),
        lambda: " ".join(str(rng.randint(-(2**200), 2**200)) for _ in range(rng.randint(1, 9))),
        lambda: "1 2 x",
        lambda: "1e400 1",
        lambda: "nan 1",
        lambda: "١٢ ٣",
        lambda: "",
        lambda: "# only a comment",
        lambda: "1,,2;;3",
        lambda: "1_000 2",
        lambda: "0x10 1",
        lambda: "1.5 2 " + str(2**80),
        lambda: str(10**5000),
    ]
    json_choices = [
        lambda: json.dumps([rng.randint(-9, 9) for _ in range(rng.randint(1, 20))]),
        lambda: "[1, NaN]", lambda: "[Infinity]", lambda: "[1e400]", lambda: "[" * 100000,
        lambda: "[" * 100000 + "]" * 100000, lambda: '{"a": 1}', lambda: "[true, 1]",
        lambda: '[1, "2"]', lambda: "[1, 2,", lambda: "[[1], [2]]", lambda: "[]",
        lambda: json.dumps([2**300, -(2**300)]),
    ]
    if suffix == ".json":
        text = rng.choice(json_choices)()
    else:
        text = rng.choice(choices)()
    if rng.random() < 0.05:
        path.write_bytes(b"\xff\xfe" + os.urandom(20))
        return "not utf-8"
    path.write_text(text, encoding="utf-8")
    return f"text {text[:30]!r}"


def case_cli_multiply(rng: random.Random, work: Path):
    import numpy as np

    from polyconv.cli.fileio import read_sequence, unlimited_int_digits

    sa, sb = rng.choice([".npy", ".txt", ".json", ".csv"]), rng.choice([".npy", ".txt", ".json"])
    pa, pb = work / f"a{sa}", work / f"b{sb}"
    what = write_hostile_file(rng, pa), write_hostile_file(rng, pb)
    argv = ["multiply", pa.name, pb.name]
    out_name = rng.choice([None, "c.npy", "c.txt", "c.json", "c.csv", "c.docx", "a" + sa,
                           "b" + sb, "sub/c.txt", "folder"])
    (work / "folder").mkdir(exist_ok=True)
    if out_name == "c.npy" and rng.random() < 0.3:
        (work / "c.npy").write_bytes(b"previous")
        (work / "c.npy").chmod(0o644)
    if out_name == "link.txt":
        pass
    if out_name:
        argv += ["-o", out_name]
    flags = []
    for flag, pool in (("--modulus", ["7", "998244353", "1", "0", "-3", "2.5", "٧", "1e3",
                                      "2_147_483_659", "x", str(2**64 + 13)]),
                       ("--length", ["1", "3", "0", "-1", "1e9", "٣", "1000000000", "abc"]),
                       ("--memory-budget", ["nan", "inf", "-1", "0", "1e-30", "0.001", "64",
                                            "x"])):
        if rng.random() < 0.25:
            flags += [flag, rng.choice(pool)]
    for flag in ("--explain", "--json", "--quiet", "--bogus"):
        if rng.random() < 0.1:
            flags.append(flag)
    argv += flags
    protected = [pa.name, pb.name] + ([] if out_name != "c.npy" else [])
    before = snapshot(work)
    old_c = before.get(out_name) if out_name else None
    code, out, err = run_cli(argv, work)
    names = [pa.name, pb.name, "input a", "input b", "a holds", "b holds", "--modulus",
             "--length", "--memory-budget",
             "--bogus", "output", str(out_name), "-o", "arguments", "argument", "required"]
    verdict = judge_cli(code, out, err, names, work, before, protected)
    if verdict[0] != "ok":
        if verdict[0] in ("clear", "unclear") and out_name and old_c is not None and \
                snapshot(work).get(out_name) != old_c:
            return "file", f"failed run changed {out_name}: {argv}"
        return verdict[0], f"{argv} [{what}] {verdict[1]}"
    # exit 0: compare with an oracle computed from the files read independently
    try:
        with unlimited_int_digits():
            a, b = read_sequence(pa), read_sequence(pb)
            mod = int(flags[flags.index("--modulus") + 1].replace("_", "")) \
                if "--modulus" in flags else None
            length = int(flags[flags.index("--length") + 1]) if "--length" in flags else None
            if a.dtype.kind in "iuO" and b.dtype.kind in "iuO":
                ref = flint_product([int(v) for v in a], [int(v) for v in b], mod)
                if length is not None:
                    ref = (ref + [0] * length)[:length]
                if out_name and out_name.endswith(".npy"):
                    got = [int(v) for v in np.load(work / out_name, allow_pickle=False)]
                elif out_name:
                    got = [int(v) for v in read_sequence(work / out_name)]
                elif "--json" in argv:
                    got = [int(v) for v in json.loads(out)["coefficients"]]
                else:
                    got = [int(v) for v in out.split()]
                if got != ref:
                    return "wrong", f"{argv} [{what}]: {got[:6]} != flint {ref[:6]}"
    except Exception as exc:  # noqa: BLE001
        return "wrong", f"{argv} [{what}]: output unreadable after exit 0: {exc}"
    return "ok", ""


