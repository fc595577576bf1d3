"""Per-block overhead of the block products of polyconv.scale (issue 15, branch house-blocks).

Many small blocks (default 10^4 blocks of 256 samples, a 16-tap kernel) through
``convolve_chunks``, ``convolve_file`` and ``convolve_dask`` (fewer blocks: dask's own per-task
cost dominates), against ``numpy.convolve`` of the concatenated signal, and against calling the
whole pipeline (``polyconv.convolve``, arguments checked and product planned) on every block, as
the block products did before they shared one plan per block shape; all measured in the same
run, round-robin.  Every result is compared with ``numpy.convolve`` (exact integers: equal;
floats: to rounding).  "Per block" = (seconds - numpy.convolve seconds) / blocks.

Usage::

    PYTHONPATH=. nice -n 10 python bench/block_overhead.py            # 10^4 blocks of 256
    PYTHONPATH=. nice -n 10 python bench/block_overhead.py --taps 64 --dask-blocks 300

(``PYTHONPATH`` picks the checkout measured; without it the script's own checkout is used.)
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time

import numpy as np

try:
    import polyconv  # noqa: F401
except ImportError:
    sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _rounds(fns: dict, repeats: int) -> dict:
    """Best seconds of each function, run round-robin (machine noise hits all alike)."""
    best = dict.fromkeys(fns, float("inf"))
    for _ in range(repeats):
        for name, fn in fns.items():
            t0 = time.perf_counter()
            fn()
            best[name] = min(best[name], time.perf_counter() - t0)
    return best


def _former_overlap_add(k: np.ndarray, exact: bool):
    """Overlap-add whose block products call the whole pipeline, ``polyconv.convolve(block,
    k)``, per block (arguments checked and the product planned every time): the block path
    before branch house-blocks, run in this process for a same-run comparison."""
    import inspect

    import polyconv
    from polyconv.scale.overlap import OverlapAdd, Summation, exact_summation

    summation = exact_summation(0, None) if exact else Summation(exact=False)
    if "products" not in inspect.signature(OverlapAdd).parameters:  # an older checkout
        return lambda chunks: _push_all(OverlapAdd(k, summation, None), chunks)

    def per_block(block):
        return polyconv.convolve(block, k)

    return lambda chunks: _push_all(OverlapAdd(per_block, summation), chunks)


def _push_all(state, chunks: list) -> list:
    out = [state.push(c) for c in chunks]
    out.append(state.flush_carry())
    return out


def _check(got: np.ndarray, ref: np.ndarray, exact: bool) -> None:
    if exact:
        assert got.dtype == np.int64 and np.array_equal(got, ref), "exact result differs"
    else:
        scale = float(np.abs(ref).max()) or 1.0
        assert np.allclose(got, ref, rtol=0, atol=1e-10 * scale), "float result differs"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--blocks", type=int, default=10_000)
    parser.add_argument("--block", type=int, default=256)
    parser.add_argument("--taps", type=int, default=16)
    parser.add_argument("--dask-blocks", type=int, default=1000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()

    import polyconv
    from polyconv.scale import convolve_chunks, convolve_file

    try:
        import dask.array as da

        from polyconv.scale import convolve_dask
    except ImportError:  # pragma: no cover - optional
        da = None
    rng = np.random.default_rng(15)
    n, size, nd = args.blocks * args.block, args.block, args.dask_blocks * args.block
    rows = []
    folder = tempfile.mkdtemp()
    for label, x, k in (
            ("int64, |x| < 2^15", rng.integers(1 - 2**15, 2**15, n),
             rng.integers(1 - 2**15, 2**15, args.taps)),
            ("float64", rng.standard_normal(n), rng.standard_normal(args.taps))):
        exact = x.dtype == np.int64
        ref = np.convolve(x, k)
        chunks = [x[s: s + size] for s in range(0, n, size)]
        src, dst = os.path.join(folder, "x.npy"), os.path.join(folder, "y.npy")
        np.save(src, x)
        _check(np.concatenate(list(convolve_chunks(chunks, k))), ref, exact)
        convolve_file(src, k, dst, block=size)
        _check(np.load(dst), ref, exact)
        former = _former_overlap_add(k, exact)
        _check(np.concatenate(former(chunks)), ref, exact)
        fns = {
            "numpy.convolve (whole signal)": lambda x=x, k=k: np.convolve(x, k),
            "polyconv.convolve per block (no overlap-add)":
                lambda chunks=chunks, k=k: [polyconv.convolve(c, k) for c in chunks],
            "overlap-add, polyconv.convolve per block (former path)":
                lambda chunks=chunks, former=former: former(chunks),
            "convolve_chunks": lambda chunks=chunks, k=k: list(convolve_chunks(chunks, k)),
            "convolve_file": lambda src=src, dst=dst, k=k: convolve_file(src, k, dst,
                                                                         block=size),
        }
        best = _rounds(fns, args.repeats)
        for name, t in best.items():
            rows.append((label, name, args.blocks, t, best["numpy.convolve (whole signal)"]))
        if da is not None:
            xs = x[:nd]
            xd = da.from_array(xs, chunks=size)
            _check(convolve_dask(xd, k).compute(scheduler="sync"), np.convolve(xs, k), exact)
            best = _rounds({"numpy": lambda xs=xs, k=k: np.convolve(xs, k),
                            "convolve_dask (sync)": lambda xd=xd, k=k: convolve_dask(
                                xd, k).compute(scheduler="sync")}, args.repeats)
            rows.append((label, "convolve_dask (sync scheduler)", args.dask_blocks,
                         best["convolve_dask (sync)"], best["numpy"]))
    shutil.rmtree(folder)

    print(f"{args.block}-sample blocks, {args.taps}-tap kernel, best of {args.repeats} "
          "round-robin rounds")
    print()
    print("| data | path | blocks | seconds | / numpy.convolve | per block us |")
    print("|---|---|---|---|---|---|")
    for label, path, blocks, t, t_np in rows:
        per = "-" if path.startswith("numpy") else f"{(t - t_np) / blocks * 1e6:.1f}"
        print(f"| {label} | {path} | {blocks} | {t:.3f} | {t / t_np:.1f}x | {per} |")


if __name__ == "__main__":
    main()
