"""Scale benchmark: streaming convolution of a large .npy file, and Dask exact products.

(a) A generated float32 ``.npy`` signal convolved with a 4097-tap float32 kernel:
    ``polyconv.scale.streaming.convolve_file`` (file to file, constant memory) against the in-memory
    path (``numpy.load`` + ``polyconv.convolve`` + ``numpy.save``), each in a fresh subprocess
    so that peak RSS (``resource.getrusage``) is the run's own.  Throughput = input samples/s.
(b) The exact product of two sequences of 16-bit integers by
    ``polyconv.scale.dask.exact_product_dask`` on a ``LocalCluster`` with 1 and with 2
    worker processes (one thread each), against in-memory ``polyconv.convolve``.

Usage::

    python bench/scale_bench.py                      # 2^26 samples, 2^24 terms
    python bench/scale_bench.py --samples 1073741824 --no-memory   # 4 GiB of float32
    python bench/scale_bench.py --skip-dask --samples 16777216

Goals (issue 7): streaming peak RSS < 1 GiB for any length; streaming throughput >= 0.7x the
in-memory path on data that fits; 2 workers >= 1.5x faster than 1 on a 2^24-term product.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

KERNEL_TAPS = 4097
GENERATE_BLOCK = 1 << 22


# ----------------------------------------------------------------------------- children

def _peak_rss_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # KiB on Linux


def _child_stream(src: str, kernel: str, dst: str) -> dict:
    import polyconv.scale.streaming as st

    k = np.load(kernel)
    t0 = time.perf_counter()
    st.convolve_file(src, k, dst)
    return {"seconds": time.perf_counter() - t0, "rss_mib": _peak_rss_mib()}


def _child_memory(src: str, kernel: str, dst: str) -> dict:
    from polyconv.api import convolve

    k = np.load(kernel)
    t0 = time.perf_counter()
    x = np.load(src)
    t1 = time.perf_counter()
    y = convolve(x, k)
    t2 = time.perf_counter()
    np.save(dst, y)
    t3 = time.perf_counter()
    return {"seconds": t3 - t0, "compute_seconds": t2 - t1, "rss_mib": _peak_rss_mib()}


def _child_idle(src: str, kernel: str, dst: str) -> dict:
    import polyconv.api  # noqa: F401 - the import cost is what is measured
    import polyconv.scale.streaming  # noqa: F401

    return {"seconds": 0.0, "rss_mib": _peak_rss_mib()}


CHILDREN = {"stream": _child_stream, "memory": _child_memory, "idle": _child_idle}


def _run_child(kind: str, src: str, kernel: str, dst: str) -> dict:
    os.sync()  # no write-back of earlier runs' files competing with this one
    cmd = [sys.executable, os.path.abspath(__file__), "--child", kind, src, kernel, dst]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


# ----------------------------------------------------------------------------- (a) streaming

def _generate_signal(path: str, samples: int, seed: int = 1) -> None:
    from polyconv.scale.npyio import NpyWriter

    rng = np.random.default_rng(seed)
    with NpyWriter(path, np.float32, samples, sync=False) as writer:
        for start in range(0, samples, GENERATE_BLOCK):
            count = min(GENERATE_BLOCK, samples - start)
            writer.write(rng.standard_normal(count, dtype=np.float32))
        writer.commit()


def _check_same(path_a: str, path_b: str, samples: int) -> float:
    """Max |a - b| / max|b| over the two result files, read block by block."""
    a = np.load(path_a, mmap_mode="r")
    b = np.load(path_b, mmap_mode="r")
    worst, scale = 0.0, 0.0
    for s in range(0, a.shape[0], GENERATE_BLOCK):
        xa = np.asarray(a[s: s + GENERATE_BLOCK], dtype=np.float64)
        xb = np.asarray(b[s: s + GENERATE_BLOCK], dtype=np.float64)
        worst = max(worst, float(np.abs(xa - xb).max()))
        scale = max(scale, float(np.abs(xb).max()))
    return worst / scale


def bench_streaming(samples: int, folder: str, in_memory: bool, repeats: int) -> list[dict]:
    """Rows for the streaming table."""
    src = os.path.join(folder, "signal.npy")
    kernel = os.path.join(folder, "kernel.npy")
    out_stream = os.path.join(folder, "out_stream.npy")
    out_memory = os.path.join(folder, "out_memory.npy")
    np.save(kernel, np.random.default_rng(2).standard_normal(KERNEL_TAPS).astype(np.float32))
    t0 = time.perf_counter()
    _generate_signal(src, samples)
    print(f"  generated {samples} float32 samples ({samples * 4 / 2**30:.2f} GiB) in "
          f"{time.perf_counter() - t0:.1f} s", flush=True)
    rows = [dict(_run_child("idle", src, kernel, out_stream), path="python + polyconv import")]
    stream = min((_run_child("stream", src, kernel, out_stream) for _ in range(repeats)),
                 key=lambda r: r["seconds"])
    rows.append(dict(stream, path="convolve_file (stream)"))
    if in_memory:
        memory = min((_run_child("memory", src, kernel, out_memory) for _ in range(repeats)),
                     key=lambda r: r["seconds"])
        rows.append(dict(memory, path="in memory: load + convolve + save"))
        rows.append({"path": "in memory: convolve only", "seconds": memory["compute_seconds"],
                     "rss_mib": memory["rss_mib"]})
        rel = _check_same(out_stream, out_memory, samples)
        print(f"  stream vs in-memory: max |diff| / max |y| = {rel:.2e}", flush=True)
        os.unlink(out_memory)
    os.unlink(out_stream)
    os.unlink(src)
    for row in rows:
        row["throughput"] = samples / row["seconds"] if row["seconds"] else float("nan")
    return rows


def _print_stream_table(rows: list[dict], samples: int) -> None:
    base = next((r for r in rows if r["path"] == "in memory: convolve only"), None)
    print(f"\n(a) float32 signal of {samples} samples x {KERNEL_TAPS}-tap kernel\n")
    print("| path | seconds | Msamples/s | vs in-memory convolve | peak RSS MiB |")
    print("|---|---|---|---|---|")
    for r in rows:
        if not r["seconds"]:
            print(f"| {r['path']} | - | - | - | {r['rss_mib']:.0f} |")
            continue
        ratio = f"{r['throughput'] / base['throughput']:.2f}x" if base else "-"
        print(f"| {r['path']} | {r['seconds']:.2f} | {r['throughput'] / 1e6:.1f} | {ratio} | "
              f"{r['rss_mib']:.0f} |")


# ----------------------------------------------------------------------------- (b) dask

def _load_kernels() -> str:
    """Load polyconv's compiled kernels in this (worker) process; returns their state."""
    from polyconv.engines import jit_state

    jit_state.kernels()
    return jit_state.state()


def bench_dask(terms: int, pieces: int, workers_list: list[int]) -> list[dict]:
    """Rows for the Dask table: in-memory, then one row per cluster size."""
    from distributed import Client, LocalCluster

    from polyconv.api import convolve, plan
    from polyconv.scale.dask import exact_product_dask

    rng = np.random.default_rng(3)
    a = rng.integers(-2**15, 2**15, terms).astype(np.int16)
    b = rng.integers(-2**15, 2**15, terms).astype(np.int16)
    engine = plan(a, b).engine
    t0 = time.perf_counter()
    ref = convolve(a, b)
    rows = [{"path": f"in memory ({engine})", "seconds": time.perf_counter() - t0}]
    print(f"  in memory: {rows[0]['seconds']:.2f} s", flush=True)
    block = -(-terms // pieces)
    block_engine = plan(a[:block], b[:block]).engine
    for workers in workers_list:
        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                          dashboard_address=None, silence_logs=40) as cluster, \
                Client(cluster) as client:
            # warm up: every worker loads the compiled kernels (a once-per-process cost,
            # reported apart in the JIT table) and runs a small product
            client.run(_load_kernels)
            exact_product_dask(a[:1000], b[:1000], client=client, pieces=2)
            t0 = time.perf_counter()
            got = exact_product_dask(a, b, client=client, pieces=pieces)
            seconds = time.perf_counter() - t0
        assert got.dtype == ref.dtype and np.array_equal(got, ref), "dask result differs"
        rows.append({"path": f"dask, {workers} worker{'s' if workers > 1 else ''}, "
                             f"{pieces}x{pieces} tasks ({block_engine})", "seconds": seconds})
        print(f"  {workers} worker(s): {seconds:.2f} s (equal to in-memory: yes)", flush=True)
    return rows


def _print_dask_table(rows: list[dict], terms: int) -> None:
    one = next((r for r in rows if ", 1 worker," in r["path"]), None)
    print(f"\n(b) exact product of two {terms}-term sequences of 16-bit integers\n")
    print("| path | seconds | vs in-memory | vs 1 worker |")
    print("|---|---|---|---|")
    for r in rows:
        vs_mem = rows[0]["seconds"] / r["seconds"]
        vs_one = f"{one['seconds'] / r['seconds']:.2f}x" if one and "dask" in r["path"] else "-"
        print(f"| {r['path']} | {r['seconds']:.2f} | {vs_mem:.2f}x | {vs_one} |")


# ----------------------------------------------------------------------------- main

def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--child", nargs=4, metavar=("KIND", "SRC", "KERNEL", "DST"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--samples", type=int, default=1 << 26,
                        help="float32 samples in the streamed file (default 2^26)")
    parser.add_argument("--terms", type=int, default=1 << 24,
                        help="terms of each operand of the Dask exact product (default 2^24)")
    parser.add_argument("--pieces", type=int, default=2,
                        help="blocks per operand for exact_product_dask (default 2: 4 tasks)")
    parser.add_argument("--repeats", type=int, default=1, help="best of this many runs")
    parser.add_argument("--folder", default=None, help="where to put the files (default /tmp)")
    parser.add_argument("--no-memory", action="store_true",
                        help="skip the in-memory comparison (for inputs that do not fit)")
    parser.add_argument("--skip-stream", action="store_true")
    parser.add_argument("--skip-dask", action="store_true")
    args = parser.parse_args(argv)
    if args.child:
        kind, src, kernel, dst = args.child
        print(json.dumps(CHILDREN[kind](src, kernel, dst)))
        return
    if not args.skip_stream:
        folder = tempfile.mkdtemp(prefix="polyconv-scale-", dir=args.folder)
        try:
            free = shutil.disk_usage(folder).free
            need = args.samples * 4 * (2 if args.no_memory else 3) * 1.1
            if free < need:
                sys.exit(f"not enough disk space in {folder}: {free / 2**30:.1f} GiB free, "
                         f"{need / 2**30:.1f} GiB needed")
            print("(a) streaming ...", flush=True)
            rows = bench_streaming(args.samples, folder, not args.no_memory, args.repeats)
            _print_stream_table(rows, args.samples)
        finally:
            shutil.rmtree(folder, ignore_errors=True)
    if not args.skip_dask:
        print("\n(b) dask ...", flush=True)
        rows = bench_dask(args.terms, args.pieces, [1, 2])
        _print_dask_table(rows, args.terms)


if __name__ == "__main__":
    main()
