"""Per-block overhead of the block products of polyconv.scale (issue 15, branch house-blocks).

Many small blocks (default 10^4 blocks of 256 samples, a 16-tap kernel) through
``convolve_chunks``, ``convolve_file`` and ``convolve_dask`` (fewer blocks: dask's own per-task
cost dominates), against ``numpy.convolve`` of the concatenated signal measured in the same run.
Every result is compared with ``numpy.convolve`` (exact integers: equal; floats: to rounding).
"Per block" = (streaming seconds - numpy seconds) / blocks.

Usage::

    PYTHONPATH=. nice -n 10 python bench/block_overhead.py            # 10^4 blocks of 256
    PYTHONPATH=. nice -n 10 python bench/block_overhead.py --taps 64 --dask-blocks 300

(``PYTHONPATH`` picks the checkout measured; without it the script's own checkout is used.)
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np

try:
    import polyconv  # noqa: F401
except ImportError:
    sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _best(fn, repeats: int) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


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

    from polyconv.scale import convolve_chunks, convolve_file

    rng = np.random.default_rng(15)
    n, size = args.blocks * args.block, args.block
    rows = []
    for label, x, k in (
            ("int64, |x| < 2^15", rng.integers(-2**15, 2**15, n), rng.integers(-2**15, 2**15,
                                                                             args.taps)),
            ("float64", rng.standard_normal(n), rng.standard_normal(args.taps))):
        exact = x.dtype == np.int64
        t_np, ref = _best(lambda x=x, k=k: np.convolve(x, k), args.repeats)
        chunks = [x[s: s + size] for s in range(0, n, size)]
        t_chunks, got = _best(lambda chunks=chunks, k=k: np.concatenate(
            list(convolve_chunks(chunks, k))), args.repeats)
        _check(got, ref, exact)
        rows.append((label, "convolve_chunks", args.blocks, t_chunks, t_np))
        with tempfile.TemporaryDirectory() as folder:
            src, dst = os.path.join(folder, "x.npy"), os.path.join(folder, "y.npy")
            np.save(src, x)
            t_file, _ = _best(lambda src=src, dst=dst, k=k: convolve_file(src, k, dst,
                                                                          block=size),
                              args.repeats)
            _check(np.load(dst), ref, exact)
        rows.append((label, "convolve_file", args.blocks, t_file, t_np))
        try:
            import dask.array as da
        except ImportError:  # pragma: no cover - optional
            continue
        from polyconv.scale import convolve_dask

        nd = args.dask_blocks * size
        xd = da.from_array(x[:nd], chunks=size)
        t_npd, refd = _best(lambda x=x, k=k: np.convolve(x[:nd], k), args.repeats)
        t_dask, got = _best(lambda xd=xd, k=k: convolve_dask(xd, k).compute(scheduler="sync"),
                            args.repeats)
        _check(got, refd, exact)
        rows.append((label, "convolve_dask (sync)", args.dask_blocks, t_dask, t_npd))

    print(f"{args.block}-sample blocks, {args.taps}-tap kernel, best of {args.repeats}")
    print()
    print("| data | path | blocks | seconds | numpy.convolve s | ratio | per block us |")
    print("|---|---|---|---|---|---|---|")
    for label, path, blocks, t, t_np in rows:
        print(f"| {label} | {path} | {blocks} | {t:.3f} | {t_np:.4f} | {t / t_np:.0f}x | "
              f"{(t - t_np) / blocks * 1e6:.1f} |")


if __name__ == "__main__":
    main()
