"""Robustness campaign: hostile input at every public function and every CLI command.

    python bench/robustness_campaign.py [--seconds 300] [--seed 1] [--case-timeout 20]

Each draw picks a family (library calls, ``polyconv.dist``, CLI ``multiply`` on corrupt files and
odd flags, spec mutations of the bundled demo specs for ``aggregate`` and ``delays``, ``demo`` /
``calibrate`` / ``bench`` with odd outputs and cost files, failures injected while report folders
and files are written, disk-full via a file-size limit, real signals to a CLI subprocess), builds
a hostile input from a seed and runs it in a worker process under a per-case alarm; the parent
restarts the worker when it dies or stops answering.  Every outcome is classified:

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
import contextlib
import errno
import hashlib
import io
import json
import math
import multiprocessing as mp
import os
import random
import re
import resource
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
import time
import traceback
from collections import Counter, defaultdict
from fractions import Fraction
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

ROOT = Path(__file__).resolve().parent.parent
BUDGET = 2**30
RSS_SLACK = 512 * 2**20
DEFECTS = ("unclear", "wrong", "crash", "hang", "memory", "file")

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


# ------------------------------------------------------------------------- library families


def case_api_convolve(rng: random.Random, work: Path):
    import numpy as np

    import polyconv

    a, b = hostile_sequence(rng), hostile_sequence(rng)
    kwargs = {}
    names = ["a", "b", "operand", "input", "first", "second"]
    for key, pool in (("modulus", [None, None, None, 2, 7, 998244353, 2**31 + 11, 2**63 + 29,
                                   2**64 - 1, 0, 1, -5, 2.5, "7", True, 10**40 + 121]),
                      ("length", [None, None, 1, 3, 0, -1, 2**40, 2.0, "3", True]),
                      ("mode", ["full", "full", "same", "valid", "bogus", 3]),
                      ("method", ["auto", "auto", "direct-exact", "fft-exact", "limbs",
                                  "kronecker", "ntt", "fft", "direct", "nope"])):
        if rng.random() < 0.4:
            kwargs[key] = rng.choice(pool)
            names.append(key)
    fn = rng.choice(["convolve", "convolve", "plan", "error_bound"])
    try:
        if fn == "plan":
            polyconv.plan(a, b, **kwargs)
            return "ok", ""
        if fn == "error_bound":
            bound = polyconv.error_bound(a, b)
            if isinstance(a, list) and isinstance(b, list) and a and b and \
                    all(type(v) is float and abs(v) < 1e150 for v in a + b) and \
                    len(a) * len(b) <= 4000:
                got = polyconv.convolve(a, b)
                exact = [sum((Fraction(a[i]) * Fraction(b[k - i]) for i in range(len(a))
                              if 0 <= k - i < len(b)), Fraction(0))
                         for k in range(len(a) + len(b) - 1)]
                err = max(abs(Fraction(float(g)) - e) for g, e in zip(got, exact, strict=True))
                if float(err) > bound:
                    return "wrong", f"error_bound({a!r}, {b!r}) = {bound!r} < actual {float(err)!r}"
            return "ok", ""
        out = polyconv.convolve(a, b, **kwargs)
    except BaseException as exc:  # noqa: BLE001
        return classify_exception(exc, names)
    mod, length, mode = kwargs.get("modulus"), kwargs.get("length"), kwargs.get("mode", "full")
    if is_plain_ints(a) and is_plain_ints(b) and mode == "full" and \
            (mod is None or (type(mod) is int and mod >= 2)) and \
            (length is None or type(length) is int):
        ref = flint_product(a, b, mod)
        if length is not None:
            ref = (ref + [0] * length)[:length]
        got = [int(v) for v in np.asarray(out, dtype=object).ravel()]
        if got != ref or np.asarray(out).dtype.kind == "f":
            return "wrong", f"convolve({a!r}, {b!r}, **{kwargs!r}) = {got[:8]} != {ref[:8]}"
    elif is_plain_floats(a) and is_plain_floats(b) and mode == "full" and length is None \
            and mod is None:
        ref = np.convolve(np.array(a), np.array(b))
        got = np.asarray(out, dtype=float)
        scale = np.sum(np.abs(a)) * np.sum(np.abs(b))
        if got.shape != ref.shape or not np.all(np.abs(got - ref) <= 1e-9 * scale + 1e-300):
            return "wrong", f"convolve({a!r}, {b!r}) = {got[:4]} vs numpy {ref[:4]}"
    return "ok", ""


def case_api_algebra(rng: random.Random, work: Path):
    import numpy as np

    import polyconv

    fn = rng.choice(["power", "product", "inverse_series", "poly_divmod"])
    a = hostile_sequence(rng)
    mod = rng.choice([None, None, None, 7, 998244353, 2**61 - 1, 0, 1, -3, 2.0, "5", 2**64])
    names = ["a", "b", "k", "n", "length", "modulus", "seqs", "exponent", "factor", "factors",
             "divisor", "series", "constant", "leading", "input", "operand"]
    try:
        if fn == "power":
            k = rng.choice([0, 1, 2, 3, 5, -1, 2.0, 2**40, True, "2", None])
            out = polyconv.power(a, k, modulus=mod)
            if is_plain_ints(a) and type(k) is int and 0 <= k <= 5 and len(a) < 50 and \
                    (mod is None or (type(mod) is int and mod >= 2)):
                ref = [1]
                for _ in range(k):
                    ref = flint_product(ref, a, None)
                ref = ref if mod is None else [v % mod for v in ref]
                got = [int(v) for v in np.asarray(out, dtype=object)]
                if got[:len(ref)] != ref or any(got[len(ref):]):
                    return "wrong", f"power({a!r}, {k}, modulus={mod}) = {got[:6]} != {ref[:6]}"
        elif fn == "product":
            seqs = [hostile_sequence(rng) for _ in range(rng.randint(0, 4))]
            out = polyconv.product(seqs, modulus=mod)
            if seqs and all(is_plain_ints(s) for s in seqs) and \
                    (mod is None or (type(mod) is int and mod >= 2)):
                ref = [1]
                for s in seqs:
                    ref = flint_product(ref, s, None)
                ref = ref if mod is None else [v % mod for v in ref]
                got = [int(v) for v in np.asarray(out, dtype=object)]
                if got != ref:
                    return "wrong", f"product({seqs!r}, modulus={mod}) = {got[:6]} != {ref[:6]}"
        elif fn == "inverse_series":
            n = rng.choice([1, 2, 5, 0, -1, 2**40, 3.0, None, "4"])
            out = polyconv.inverse_series(a, n, modulus=mod)
            if is_plain_ints(a) and a[0] in (1, -1) and type(n) is int and 1 <= n <= 50 and \
                    mod is None:
                prod = flint_product([int(v) for v in np.asarray(out, dtype=object)], a, None)
                if prod[:n] != [1] + [0] * (n - 1):
                    return "wrong", f"inverse_series({a!r}, {n}) * a != 1 mod x^{n}"
        else:
            b = hostile_sequence(rng)
            q, r = polyconv.poly_divmod(a, b, modulus=mod)
            if is_plain_ints(a) and is_plain_ints(b) and b[-1] in (1, -1) and mod is None:
                qb = flint_product([int(v) for v in np.asarray(q, dtype=object)], b, None)
                rr = [int(v) for v in np.asarray(r, dtype=object)]
                total = [(qb[i] if i < len(qb) else 0) + (rr[i] if i < len(rr) else 0)
                         for i in range(max(len(qb), len(rr), len(a)))]
                want = a + [0] * (len(total) - len(a))
                if total != want:
                    return "wrong", f"poly_divmod({a!r}, {b!r}): q b + r != a"
    except BaseException as exc:  # noqa: BLE001
        if type(exc).__name__ == "ZeroDivisorError":
            return "clear", f"{type(exc).__name__}: {exc}"
        return classify_exception(exc, names)
    return "ok", ""


def case_api_stream(rng: random.Random, work: Path):
    import numpy as np

    import polyconv

    names = ["source", "kernel", "destination", "modulus", "block", "progress", "chunks",
             "chunk", "npy", ".npy"]
    if rng.random() < 0.5:
        chunks = [hostile_sequence(rng) for _ in range(rng.randint(0, 3))]
        kernel = hostile_sequence(rng)
        block = rng.choice([None, None, 1, 4, 0, -1, 2.5, "8"])
        try:
            out = list(polyconv.convolve_chunks(chunks, kernel, block=block)) \
                if "block" in polyconv.convolve_chunks.__code__.co_varnames else \
                list(polyconv.convolve_chunks(chunks, kernel))
        except BaseException as exc:  # noqa: BLE001
            return classify_exception(exc, names)
        if all(is_plain_ints(c) for c in chunks) and chunks and is_plain_ints(kernel):
            got = [int(v) for c in out for v in np.asarray(c, dtype=object)]
            ref = flint_product([v for c in chunks for v in c], kernel, None)
            if got != ref:
                return "wrong", f"convolve_chunks({chunks!r}, {kernel!r}) = {got[:6]} != {ref[:6]}"
        return "ok", ""
    src = work / "src.npy"
    data = np.array([rng.randint(-1000, 1000) for _ in range(rng.randint(1, 300))])
    np.save(src, data)
    corrupt = rng.randrange(6)
    if corrupt == 1:
        src.write_bytes(os.urandom(rng.randint(0, 300)))
    elif corrupt == 2:
        raw = bytearray(src.read_bytes())
        raw[rng.randrange(10, min(len(raw), 100))] = rng.randrange(256)
        src.write_bytes(bytes(raw))
    elif corrupt == 3:
        src.write_bytes(src.read_bytes()[:rng.randint(0, 140)])
    kernel = hostile_sequence(rng) if rng.random() < 0.5 else [1, 2, 3]
    dest = rng.choice([work / "out.npy", work / "src.npy", work, work / "no" / "x.npy"])
    before = snapshot(work)
    modulus = rng.choice([None, None, 97, 0, 2**63])
    try:
        polyconv.convolve_file(src, kernel, dest, modulus=modulus)
    except BaseException as exc:  # noqa: BLE001
        leftovers = hidden_leftovers(work)
        if leftovers:
            return "file", f"convolve_file left {leftovers}"
        if snapshot(work) != before:
            return "file", "convolve_file failed but changed files"
        return classify_exception(exc, names)
    if corrupt == 0 and is_plain_ints(kernel):
        got = [int(v) for v in np.load(dest, allow_pickle=False)]
        if got != flint_product([int(v) for v in data], kernel, modulus):
            return "wrong", f"convolve_file with kernel {kernel!r}, modulus={modulus}"
    return "ok", ""


def case_api_dask(rng: random.Random, work: Path):
    """``convolve_dask`` and ``exact_product_dask`` with hostile operands and options."""
    import dask.array as da
    import numpy as np

    import polyconv

    names = ["a", "b", "kernel", "client", "pieces", "modulus", "mode", "chunks", "operand"]
    a, b = hostile_sequence(rng), hostile_sequence(rng)
    mod = rng.choice([None, None, 7, 998244353, 0, 1, -3, 2.5, "7", 2**70 + 25])
    try:
        if rng.random() < 0.5:
            pieces = rng.choice([None, None, 1, 2, 3, 0, -1, 2.5, True, "2", 2**40])
            client = rng.choice([None] * 6 + [5, "tcp://nowhere", object()])
            out = polyconv.exact_product_dask(a, b, modulus=mod, client=client, pieces=pieces)
            if is_plain_ints(a) and is_plain_ints(b) and \
                    (mod is None or (type(mod) is int and mod >= 2)):
                ref = flint_product(a, b, mod)
                got = [int(v) for v in np.asarray(out, dtype=object)]
                if got != ref:
                    return "wrong", f"exact_product_dask({a!r}, {b!r}, modulus={mod}, " \
                                    f"pieces={pieces}) = {got[:6]} != {ref[:6]}"
        else:
            chunk = rng.choice([1, 2, 3, 7, 100])
            lazy = da.from_array(np.asarray(a), chunks=chunk) if rng.random() < 0.8 and \
                isinstance(a, list) and a and all(type(v) in (int, float) for v in a) and \
                all(abs(v) < 2**62 for v in a) else a
            mode = rng.choice(["full", "full", "same", "valid", "bogus"])
            out = polyconv.convolve_dask(lazy, b, mode=mode, modulus=mod).compute()
            if is_plain_ints(a) and is_plain_ints(b) and mode == "full" and \
                    (mod is None or (type(mod) is int and mod >= 2)):
                ref = flint_product(a, b, mod)
                got = [int(v) for v in np.asarray(out, dtype=object)]
                if got != ref:
                    return "wrong", f"convolve_dask({a!r} in chunks of {chunk}, {b!r}, " \
                                    f"modulus={mod}) = {got[:6]} != {ref[:6]}"
    except BaseException as exc:  # noqa: BLE001
        if isinstance(exc, CaseTimeout):
            raise
        return classify_exception(exc, names)
    return "ok", ""


def case_dist_answers(rng: random.Random, work: Path):
    """``Lattice.bounded`` / ``quantile_bracket`` and ``Goal`` with hostile measures and
    tolerances; a range must contain the direct sum it brackets."""
    import numpy as np

    from polyconv import dist

    names = ["measure", "arg", "rtol", "atol", "tol", "p", "level", "measures", "max_points",
             "goal", "point", "retention", "bounded", "quantile_bracket"]
    try:
        if rng.random() < 0.3:
            measures = rng.choice([[("var", 0.995)], [("tvar", 1.5)], [], [("bogus", 1)],
                                   [("cdf", float("nan"))], "var", [("mean", None)], None,
                                   [("sf", 1e300)], [("quantile", True)]])
            dist.Goal(measures, rtol=rng.choice([1e-4, 0, -1, float("nan"), "1", 1e300]),
                      atol=rng.choice([0.0, 0.0, 1.0, -1.0]),
                      max_points=rng.choice([2**16, 1, 2.5, 2**40, True]))
            return "ok", ""
        pmf = rng.choice([[0.2, 0.3, 0.5], [1.0], [0.25] * 4, [0.1] * 10])
        lat = dist.Lattice(pmf, rng.choice([1.0, 0.5, 1e-300, 1e300]))
        if rng.random() < 0.3:
            p = rng.choice([0.5, 0.9, 0.0, 1.0, -0.1, float("nan"), "0.5", True, 1 - 1e-17])
            lo, hi = lat.quantile_bracket(p, tol=rng.choice([None, 1e-9, 0.0, -1.0, "x"]))
            if isinstance(p, float) and 0 <= p <= 1 and not lo <= float(lat.quantile(p)) <= hi:
                return "wrong", f"quantile_bracket({p!r}) = ({lo}, {hi}) misses quantile " \
                                f"{lat.quantile(p)}"
            return "ok", ""
        measure = rng.choice(["cdf", "sf", "quantile", "var", "tvar", "stop_loss", "mean", "std",
                              "bogus", None, 3])
        arg = rng.choice([None, 0.5, 1.0, 0.99, 2.0, -1.0, float("inf"), float("nan"), 1e300,
                          "1", True])
        answer = lat.bounded(measure, arg, rtol=rng.choice([None, None, 1e-3, 0.0, -1.0,
                                                            float("nan"), "x"]))
        if measure in ("cdf", "sf") and isinstance(arg, float) and math.isfinite(arg) and \
                not answer.refused:
            v, q = lat.values, np.asarray(lat.pmf)
            at = arg + 1e-9 * lat.step  # documented: within 1e-9 steps of a point counts as it
            ref = float(q[v <= at].sum()) if measure == "cdf" else float(q[v > at].sum())
            if not answer.low - 1e-12 <= ref <= answer.high + 1e-12:
                return "wrong", f"bounded({measure!r}, {arg!r}) = [{answer.low}, " \
                                f"{answer.high}] misses the direct sum {ref}"
    except BaseException as exc:  # noqa: BLE001
        if isinstance(exc, CaseTimeout):
            raise
        return classify_exception(exc, names)
    return "ok", ""


def case_dist(rng: random.Random, work: Path):
    import numpy as np
    from scipy import stats

    from polyconv import dist

    names = ["pmf", "step", "origin", "trust_floor", "x", "p", "d", "deductible", "limit",
             "law", "rule",
             "n", "counts", "severity", "method", "size", "dist", "delays", "delay", "weights",
             "k",
             "level", "probability", "quantile", "Lattice", "lattice"]
    pick = rng.randrange(4)
    try:
        if pick == 0:
            pmf = rng.choice([[0.5, 0.5], [0.2, 0.3, 0.5], [1.0], [0.25] * 4,
                              hostile_sequence(rng), [1.0, 1.0], [-0.1, 1.1], [0.5, float("nan")]])
            step = rng.choice([1.0, 1.0, 0.5, 0, -1, float("nan"), 1e-300, 1e300, "1", None])
            origin = rng.choice([0.0, 0.0, 2.0, -1.0, float("inf"), 1e300])
            floor = rng.choice([0.0, 0.0, 1e-12, 1.0, -1.0, float("nan")])
            lat = dist.Lattice(pmf, step, origin, trust_floor=floor)
            p = np.asarray(lat.pmf)
            if p.sum() > 1 + 1e-9 or np.any(p < 0):
                return "wrong", f"Lattice({pmf!r}, trust_floor={floor}) has total {p.sum()}"
            x = rng.choice([0.0, 0.5, 1.0, 2.0, 1e19, -1e19, float("inf"), float("-inf"),
                            float("nan"), "0.5", True, None, [0.5, 1.5], 2**70])
            query = rng.choice(["cdf", "sf", "stop_loss"])
            got = getattr(lat, query)(x)
            if isinstance(x, float) and not math.isnan(x) and np.ndim(got) == 0:
                v = lat.values
                if query == "cdf":
                    # documented: x within 1e-9 steps of a point counts as it
                    ref = float(p[v <= x + 1e-9 * lat.step].sum())
                elif query == "sf":
                    ref = float(p[v > x + 1e-9 * lat.step].sum()) + lat.truncated_mass
                else:
                    ref = float(np.sum(p * np.maximum(v - x, 0))) if math.isfinite(x) else \
                        (0.0 if x > 0 else math.inf)
                if not (abs(float(got) - ref) <= 1e-9 * max(1.0, abs(ref)) + lat.trust_floor
                        * p.size) and not (query == "stop_loss" and lat.truncated_mass > 0):
                    return "wrong", f"Lattice({pmf!r}, {step}, {origin}).{query}({x!r}) = " \
                                    f"{got!r}, direct sum {ref!r}"
            elif isinstance(x, float) and math.isnan(x) and np.ndim(got) == 0 and \
                    not math.isnan(float(got)):
                return "wrong", f"Lattice.{query}(nan) = {got!r}"
        elif pick == 1:
            lat = dist.Lattice([0.2, 0.3, 0.5])
            p = rng.choice([0.5, 0.9, 0.0, 1.0, -0.1, 1.1, float("nan"), "0.5", True, None,
                            [0.5, 0.9], 1 - 1e-17])
            fn = rng.choice(["quantile", "value_at_risk", "tail_value_at_risk", "nfold",
                             "layer", "moment"])
            if fn == "nfold":
                lat.nfold(rng.choice([0, 1, 3, -1, 2.5, 2**40, True, "2"]))
            elif fn == "layer":
                lat.layer(rng.choice([0.0, 1.0, -1.0, 1e300, float("nan"), "1"]),
                          rng.choice([math.inf, 1.0, 0.0, -1.0, float("nan")]))
            elif fn == "moment":
                lat.moment(rng.choice([0, 1, 2, -1, 2.5, 10**6, "1"]))
            else:
                got = getattr(lat, fn)(p)
                if fn == "quantile" and isinstance(p, float) and 0 <= p <= 1 and \
                        not isinstance(p, bool):
                    cdf = np.cumsum([0.2, 0.3, 0.5])
                    ref = float(np.argmax(cdf >= p - 1e-12)) if p > 0 else 0.0
                    if not math.isnan(float(got)) and abs(float(got) - ref) > 1e-9:
                        return "wrong", f"quantile({p!r}) = {got!r}, cdf gives {ref}"
        elif pick == 2:
            law = rng.choice([stats.gamma(2.0), stats.lognorm(1.0, scale=5.0), stats.expon(),
                              stats.norm(), stats.gamma, stats.poisson(3), "gamma", None])
            step = rng.choice([1.0, 0.1, 0, -1.0, float("nan"), 1e-300, 1e300])
            size = rng.choice([None, 10, 2, 1, 0, -5, 2**40, 3.5])
            rule = rng.choice(["nearest", "down", "up", "moments", "bogus", None, 3])
            if rng.random() < 0.2:
                dist.check_step(law, step=step, rule=rule, size=size, warn=False)
                return "ok", ""
            lat = dist.Lattice.from_law(law, step=step, size=size, rule=rule)
            p = np.asarray(lat.pmf)
            if np.any(p < 0) or p.sum() > 1 + 1e-9:
                return "wrong", f"from_law({law!r}, step={step}, rule={rule}): mass {p.sum()}"
            frozen = getattr(law, "dist", None) is not None and hasattr(law, "cdf")
            if frozen and rule in ("nearest", "down", "up") and lat.step > 0:
                # oracle: the law's own cdf (scipy); a lattice cdf at a point moves the mass of
                # at most the neighbouring cells (common practice, no source)
                h, x = lat.step, lat.values[: min(p.size, 50)]
                got = np.cumsum(p)[: x.size]
                lo, hi = law.cdf(x - h) - 1e-9, law.cdf(x + h) + 1e-9
                if np.any(got < lo) or np.any(got > hi):
                    j = int(np.argmax((got < lo) | (got > hi)))
                    return "wrong", (f"from_law({law.dist.name}, step={step}, rule={rule}): "
                                     f"cdf at {x[j]} is {got[j]}, law gives {law.cdf(x[j])}")
        else:
            sev = dist.Lattice([0.0, 0.5, 0.5])
            fn = rng.choice(["compound", "series", "all_of", "first_of", "mixture"])
            if fn == "compound":
                counts = rng.choice([stats.poisson(2.0), stats.nbinom(3, 0.4), stats.binom(5, 0.3),
                                     stats.poisson(1e9), stats.poisson, 3, None])
                dist.compound(counts, sev, size=rng.choice([None, 64, 0, -1, 2**40]),
                              method=rng.choice(["auto", "fft", "recursion", "x"]))
            elif fn == "mixture":
                w = rng.choice([[0.5, 0.5], [0.5, 0.5 + 1e-13], [1.0, 0.1], [-1, 2], "ab",
                                [float("nan"), 1]])
                dist.mixture(w, [sev, sev])
            else:
                args = rng.choice([[sev, sev], [], [sev, dist.Lattice([1.0], 0.5)], [sev, 3],
                                   [sev, None]])
                getattr(dist, fn)(*args)
    except BaseException as exc:  # noqa: BLE001
        return classify_exception(exc, names)
    return "ok", ""


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
    delay = rng.uniform(0.05, 6.0)
    before = snapshot(work)
    proc = subprocess.Popen([sys.executable, "-m", "polyconv.cli.main", *argv], cwd=work,
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
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
    what = f"{argv} {sig.name} at {delay:.2f}s"
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
    return ("interrupted" if code == 130 else "ok"), what


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


class CaseTimeout(BaseException):
    """Raised by the per-case alarm; a BaseException so no handler under test swallows it."""


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
