"""Library families: ``convolve``/``plan``/``error_bound``, algebra, streaming, dask."""

from __future__ import annotations

import os
import random
from fractions import Fraction
from pathlib import Path

from .common import (
    CaseTimeout,
    classify_exception,
    flint_product,
    hidden_leftovers,
    hostile_sequence,
    is_plain_floats,
    is_plain_ints,
    snapshot,
)

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


