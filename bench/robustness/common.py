"""Shared pieces of the robustness campaign: limits, hostile values, oracles, how an
exception is classified."""

from __future__ import annotations

import contextlib
import hashlib
import math
import os
import random
import re
import stat
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]  # the repository
BUDGET = 2**30
RSS_SLACK = 512 * 2**20
DEFECTS = ("unclear", "wrong", "crash", "hang", "memory", "file")

class CaseTimeout(BaseException):
    """Raised by the per-case alarm; a BaseException so no handler under test swallows it."""


def internal_module(name: str):
    """An internal polyconv module wherever the current layout keeps it (modules move between
    sub-packages; the campaign patches a few of them: cost tables, calibration, the writer)."""
    import importlib

    for package in ("polyconv", "polyconv.tuning", "polyconv.numerics", "polyconv.pipeline",
                    "polyconv.scale", "polyconv.io"):
        try:
            return importlib.import_module(f"{package}.{name}")
        except ModuleNotFoundError:
            continue
    raise ModuleNotFoundError(f"no polyconv module named {name!r} in any known package")


# ------------------------------------------------------------------------- hostile values

HOSTILE_SCALARS = [None, True, False, 0, -1, 1, 2, 7, 2**31 + 11, 2**63 - 1, 2**63, 2**64 - 1,
                   2**64, 2**2000, -(2**63) - 1, 0.5, 2.0, -2.5, float("nan"), float("inf"),
                   -float("inf"), 1e300, 5e-324, 1e400, "7", "", "auto", b"x", 3 + 4j, [], {},
                   set(), (1, 2), object()]


def hostile_sequence(rng: random.Random):
    """A list / array that is malformed, extreme or merely unusual (valid ones included)."""
    import numpy as np

    n = rng.choice([0, 1, 2, 3, 5, 17, 100])
    pick = rng.randrange(26)
    if pick == 0:
        return [rng.randint(-9, 9) for _ in range(n)]
    if pick == 1:
        return [rng.choice([2**63 - 1, 2**63, 2**64 - 1, -(2**63)]) for _ in range(max(n, 1))]
    if pick == 2:
        return [rng.randint(-(2**300), 2**300) for _ in range(max(n, 1))]
    if pick == 3:
        return [rng.uniform(-1, 1) for _ in range(n)]
    if pick == 4:
        return [rng.choice([1e-173, 1e300, -1e300, 1e-320, 0.0]) for _ in range(max(n, 1))]
    if pick == 5:
        return [float("nan")] + [1.0] * n
    if pick == 6:
        return [float("inf"), 1.0]
    if pick == 7:
        return [1, "a"]
    if pick == 8:
        return [[1, 2], [3]]
    if pick == 9:
        return np.zeros((2, 3))
    if pick == 10:
        return np.array(["1", "2"])
    if pick == 11:
        return np.array([1, 2], dtype="datetime64[D]")
    if pick == 12:
        return np.arange(n, dtype=np.float16)
    if pick == 13:
        return np.array([2**64 - 1, 1], dtype=np.uint64)
    if pick == 14:
        return np.array([True, False])
    if pick == 15:
        return (i for i in range(3))
    if pick == 16:
        return {1: 2}
    if pick == 17:
        return {1, 2}
    if pick == 18:
        return "123"
    if pick == 19:
        return None
    if pick == 20:
        return np.array([1 + 2j, 3])
    if pick == 21:
        arr = np.empty(3, dtype=object)
        arr[:] = [1, 2**70, None]
        return arr
    if pick == 22:
        return [0] * max(n, 1)
    if pick == 23:
        return np.arange(n, dtype=">i4")
    if pick == 24:
        return [1, 2.5, 2**80]
    return rng.choice(HOSTILE_SCALARS)


def is_plain_ints(x) -> bool:
    return isinstance(x, list) and len(x) > 0 and all(type(v) is int for v in x)


def is_plain_floats(x) -> bool:
    return (isinstance(x, list) and len(x) > 0 and all(type(v) is float for v in x)
            and all(math.isfinite(v) and abs(v) < 1e150 and (v == 0 or abs(v) > 1e-150)
                    for v in x))


def flint_product(a: list[int], b: list[int], modulus: int | None) -> list[int]:
    import flint

    c = [int(v) for v in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    c += [0] * (len(a) + len(b) - 1 - len(c))
    return c if modulus is None else [v % modulus for v in c]


def names_argument(message: str, names) -> bool:
    """Whether the message names one of ``names`` (as a word)."""
    return any(re.search(rf"(?<![A-Za-z0-9_]){re.escape(n)}(?![A-Za-z0-9_])", message)
               for n in names)


OPERAND_NAMES = ("a", "b", "operand", "operands", "input", "sequence", "coefficients", "first",
                 "second", "seqs", "kernel", "chunks", "chunk", "source", "x", "pmf", "delays",
                 "weights", "counts", "severity", "dist", "p", "d", "deductible", "limit",
                 "step", "origin", "trust_floor", "n", "k", "delay", "size", "method", "mode",
                 "length", "modulus", "axis", "block", "destination", "progress", "the_plan",
                 "plan")


def classify_exception(exc: BaseException, names) -> tuple[str, str]:
    if isinstance(exc, CaseTimeout):  # the per-case alarm: the worker reports a hang
        raise exc
    text = f"{type(exc).__name__}: {exc}"
    if isinstance(exc, MemoryError):
        return "memory", text
    if isinstance(exc, (TypeError, ValueError, FileNotFoundError, IsADirectoryError,
                        NotADirectoryError, PermissionError)) and names_argument(str(exc), names):
        return "clear", text
    return "unclear", text


def snapshot(folder: Path) -> dict[str, tuple[str, int]]:
    """Every file below ``folder``: content hash and mode."""
    out = {}
    for root, _, files in os.walk(folder):
        for name in files:
            p = Path(root) / name
            with contextlib.suppress(OSError):
                out[str(p.relative_to(folder))] = (hashlib.sha256(p.read_bytes()).hexdigest(),
                                                   stat.S_IMODE(p.stat().st_mode))
    return out


def hidden_leftovers(folder: Path) -> list[str]:
    found = []
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            if name.startswith(".") and re.search(r"\.(tmp|part|old)$", name):
                found.append(str(Path(root, name).relative_to(folder)))
    return found
