"""CLI families: spec mutations for ``aggregate``/``delays``; ``demo``/``calibrate``/``bench``
with odd outputs and cost files, failures injected while reports are written."""

from __future__ import annotations

import contextlib
import errno
import json
import os
import random
import re
import stat
from pathlib import Path

from .cli_common import judge_cli, run_cli
from .common import hidden_leftovers, internal_module, snapshot


def mutate_spec(rng: random.Random, text: str) -> tuple[str, list[str]]:
    """A hostile edit of a TOML spec; returns the text and the names a message may cite."""
    lines = text.splitlines()
    assigns = [i for i, line in enumerate(lines) if re.match(r"^\s*[A-Za-z_][\w.-]*\s*=", line)]
    values = ["1e300", "5e-324", "-1", "0", "nan", "inf", "-inf", "1e308", str(2**70),
              "\"text\"", "[]", "[1, 2]", "{}", "true", "1.0", "2", "0.5", "99999999999",
              "[1e300, 1e300]", "[1e308, 1e308]", "-0.0", "\"gamma\"", "\"nope\"",
              "{ a = -1 }", "{ a = 1e300 }", "{ s = 5e-324, scale = 1e300 }", "[\"x\"]"]
    names: list[str] = []
    pick = rng.randrange(10)
    if pick < 6 and assigns:
        for _ in range(rng.randint(1, 2)):
            i = rng.choice(assigns)
            key = lines[i].split("=", 1)[0].strip()
            names.append(key)
            lines[i] = f"{key} = {rng.choice(values)}"
    elif pick == 6 and assigns:
        i = rng.choice(assigns)
        names.append(lines[i].split("=", 1)[0].strip())
        del lines[i]
    elif pick == 7:
        lines.append("\n[grid]\nstep = 1.0" if rng.random() < 0.5 else "unknown_key = 1")
        names += ["grid", "unknown_key", "step"]
    elif pick == 8:
        depth = rng.choice([100, 1000, 5000])
        lines.append("deep = " + "[" * depth + "]" * depth)
        names += ["deep", "nested"]
    else:
        lines.insert(rng.randrange(len(lines) + 1), rng.choice(["[[", "= 3", "x = ", "\x00"]))
    return "\n".join(lines) + "\n", names


def deep_delay_chain(depth: int) -> str:
    parts = ['title = "chain"', 'unit = "ms"', "[grid]", "step = 1.0", "[network]",
             'in_sequence = ["s0"]']
    for i in range(depth):
        parts += [f"[stage.s{i}]", f'in_sequence = ["s{i + 1}"]']
    parts += [f"[stage.s{depth}]", "values = [1.0]", "probabilities = [1.0]"]
    return "\n".join(parts) + "\n"


def case_cli_spec(rng: random.Random, work: Path):
    from polyconv.cli import demo_cmd

    command = rng.choice(["aggregate", "delays"])
    name = demo_cmd.SCENARIOS[0 if command == "aggregate" else 1]
    if command == "delays" and rng.random() < 0.1:
        text, names = deep_delay_chain(rng.choice([50, 1000, 3000])), ["stage", "nested",
                                                                      "network", "chain"]
    else:
        text = demo_cmd.scenario_text(name)
        if command == "aggregate" and rng.random() < 0.5:
            text = small_claims_spec(text)
        text, names = mutate_spec(rng, text)
    spec = work / "spec.toml"
    spec.write_text(text, encoding="utf-8")
    target = rng.choice(["report", "report", "spec.toml", "missing/report"])
    argv = [command, "spec.toml", "-o", target, "--quiet"]
    if rng.random() < 0.2:
        argv.append("--json")
    before = snapshot(work)
    code, out, err = run_cli(argv, work)
    names += ["spec.toml", "report", target, "grid", "step", "output"]
    verdict = judge_cli(code, out, err, names, work, before, ["spec.toml"])
    if verdict[0] == "ok" and not (work / target).is_dir():
        return "file", f"{argv}: exit 0 but no report folder"
    if verdict[0] not in ("ok", "clear", "interrupted"):
        return verdict[0], f"{command} with edit {names[:2]}: {verdict[1]}"
    return verdict


def small_claims_spec(text: str) -> str:
    """The bundled claims spec made quick to run (fewer claims, a lower limit, a coarse grid of
    a stated size), so a re-run case costs seconds, not tens of seconds."""
    for old, new in (("mean = 38.0", "mean = 3.0"), ("variance = 95.0", "variance = 6.0"),
                     ("limit = 100000.0", "limit = 20000.0"), ("step = 100.0", "step = 500.0"),
                     ('rule = "nearest"', 'points = 2048\nrule = "nearest"')):
        text = text.replace(old, new, 1)
    return re.sub(r"retentions = \[.*\]", "retentions = [50000.0]", text)


def case_cli_misc(rng: random.Random, work: Path):

    costs = internal_module("costs")

    pick = rng.randrange(5)
    if pick <= 1:  # calibrate --show / multiply with a hostile cost file
        default = costs.default_costs()
        table = json.loads(json.dumps(default))
        edit = rng.randrange(6)
        if edit == 0:
            table.pop(rng.choice(list(table)))
        elif edit == 1:
            table["exact"].pop(rng.choice(list(table["exact"])))
        elif edit == 2:
            table["fft"]["overhead"] = rng.choice(["fast", None, [], -1, True])
        elif edit == 3:
            table["exact"]["ntt"] = 5
        text = json.dumps(table)
        if edit == 4:
            text = "[" * 100000
        elif edit == 5:
            text = text.replace("0.0", "NaN", 1).replace(": 1", ": Infinity", 1)
        (work / "costs.json").write_text(text)
        os.environ["POLYCONV_COSTS"] = str(work / "costs.json")
        try:
            with contextlib.suppress(ValueError):  # a refused table: the CLI must say so too
                costs.load_costs(refresh=True)
            (work / "a.txt").write_text("1 2 3")
            argv = rng.choice([["calibrate", "--show"], ["multiply", "a.txt", "a.txt"]])
            before = snapshot(work)
            code, out, err = run_cli(argv, work)
            verdict = judge_cli(code, out, err, ["costs.json", "cost"], work, before,
                                ["costs.json", "a.txt"])
            if verdict[0] == "ok" and argv[0] == "multiply" and out.split() != \
                    ["1", "4", "10", "12", "9"]:
                return "wrong", f"multiply with cost file edit {edit}: {out!r}"
            return verdict[0], f"cost edit {edit}, {argv}: {verdict[1]}"
        finally:
            del os.environ["POLYCONV_COSTS"]
            costs.load_costs(refresh=True)
    if pick == 2:  # demo into hostile places; keeps edited specs
        target = rng.choice(["demo", "demo", "a.txt", "missing/demo", "ro/demo"])
        (work / "a.txt").write_text("1")
        (work / "ro").mkdir(exist_ok=True)
        (work / "ro").chmod(0o500)
        edited = None
        if target == "demo" and rng.random() < 0.5:
            (work / "demo").mkdir(exist_ok=True)
            edited = work / "demo" / "quillmere_claims.toml"
            edited.write_text("# my edits\n")
            (work / "demo" / "notes.txt").write_text("mine")
        before = snapshot(work)
        code, out, err = run_cli(["demo", "-o", target, "--quiet"], work)
        (work / "ro").chmod(0o700)
        protected = ["a.txt"] + (["demo/quillmere_claims.toml", "demo/notes.txt"]
                                 if edited else [])
        verdict = judge_cli(code, out, err, [target, "output", "demo"], work, before, protected)
        if verdict[0] == "ok" and edited and "kept" not in out:
            return "unclear", "demo kept an edited spec without saying so"
        return verdict[0], f"demo -o {target}: {verdict[1]}"
    if pick == 3:  # cheap bench / calibrate argument errors and calibrate's writer
        argv = rng.choice([["bench", "--bogus"], ["calibrate", "--output"],
                           ["calibrate", "--quick", "--output", "missing/x.json"],
                           ["calibrate", "--quick", "--output", "."],
                           ["calibrate", "--quick", "--output", "keep.json"]])
        (work / "keep.json").write_text("{}")
        (work / "keep.json").chmod(0o640)
        calibrate = internal_module("calibrate")

        real = calibrate.measure
        calibrate.measure = lambda quick=False, progress=None: costs.default_costs()
        try:
            before = snapshot(work)
            code, out, err = run_cli(argv, work)
        finally:
            calibrate.measure = real
            costs.load_costs(refresh=True)
        verdict = judge_cli(code, out, err, ["--bogus", "--output", "missing", "x.json", ".",
                                              "keep.json", "folder", "directory"], work, before,
                            [])
        if code == 0 and "keep.json" in argv:
            mode = stat.S_IMODE((work / "keep.json").stat().st_mode)
            if mode != 0o640:
                return "file", f"calibrate replaced keep.json: mode {oct(mode)} (was 0o640)"
        return verdict[0], f"{argv}: {verdict[1]}"
    # re-run into an existing report folder with a failure injected at the k-th write
    from polyconv.cli import aggregate_cmd, demo_cmd

    spec = work / "claims.toml"
    spec.write_text(small_claims_spec(demo_cmd.scenario_text(demo_cmd.SCENARIOS[0])))
    code, _, err = run_cli(["aggregate", "claims.toml", "-o", "rep", "--quiet"], work)
    if code != 0:
        return "crash", f"aggregate of the bundled spec failed: {err[-300:]}"
    for p in (work / "rep").iterdir():
        p.write_text(f"OLD {p.name}")
    (work / "rep" / "mine.txt").write_text("user file")
    before = snapshot(work)
    failure = rng.choice([KeyboardInterrupt, OSError, "rename", None])
    k = rng.randint(1, 4)
    calls = [0]
    real_wt, real_wb, real_rename = Path.write_text, Path.write_bytes, os.rename

    def hit():
        calls[0] += 1
        if calls[0] == k:
            if failure is OSError:
                raise OSError(errno.ENOSPC, "No space left on device")
            raise KeyboardInterrupt

    def wt(self, *a, **kw):
        hit()
        return real_wt(self, *a, **kw)

    def wb(self, *a, **kw):
        hit()
        return real_wb(self, *a, **kw)

    def rename(src, dst, *a, **kw):
        if failure == "rename" and ".old" not in str(dst) and not calls[0]:
            calls[0] += 1  # the first publishing rename fails once; the rollback may run
            raise OSError(errno.EIO, "injected rename failure")
        return real_rename(src, dst, *a, **kw)

    atomic_module = internal_module("_atomic")

    if failure in (KeyboardInterrupt, OSError):
        Path.write_text, Path.write_bytes = wt, wb
    elif failure == "rename":
        atomic_module._exchange = lambda a, b: False
        os.rename = rename
    try:
        code, out, err = run_cli(["aggregate", "claims.toml", "-o", "rep", "--quiet"], work)
    finally:
        Path.write_text, Path.write_bytes, os.rename = real_wt, real_wb, real_rename
        import importlib

        importlib.reload(atomic_module)
        del aggregate_cmd
    after = snapshot(work)
    leftovers = hidden_leftovers(work)
    if leftovers:
        return "file", f"injected {failure} at write {k}: leftovers {leftovers}"
    rep = {p: v for p, v in after.items() if p.startswith("rep/")}
    old = {p: v for p, v in before.items() if p.startswith("rep/")}
    if code not in (0, 2, 130) or "Traceback" in err:
        return "crash", f"injected {failure} at write {k}: exit {code}: {err[-600:]}"
    if code != 0:
        if rep != old:
            return "file", f"injected {failure} at write {k}: exit {code} but rep/ changed"
        return ("interrupted" if code == 130 else "clear"), f"injected {failure}"
    stale = [p for p in rep if (work / p).read_text(errors="replace").startswith("OLD")]
    if stale or "rep/mine.txt" not in rep:
        return "file", f"re-run mixed old files {stale} into rep/ (or lost mine.txt)"
    return "ok", ""


