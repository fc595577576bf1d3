"""Samples files read ahead on a worker thread (polyconv.cli.delays_prefetch): the same values
as reading them in turn, files the kernel does not take read by the main thread, no hang when
files are asked out of order or the read-ahead is full."""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.cli import delays_prefetch, sample_files
from polyconv.cli.delays_eval import compute
from polyconv.cli.delays_spec import parse
from polyconv.cli.spec import SpecError, load_spec

pytest.importorskip("numba")

SPEC = """unit = "ms"
[grid]
step = 0.5
[network]
in_sequence = ["a", "b", "c"]
[stage.a]
samples_file = "a.csv"
column = "ms"
[stage.b]
samples_file = "b.csv"
column = 1
[stage.c]
samples_file = "c.txt"
"""


def _files(tmp_path, rng):
    xs = {}
    for name, scale in (("a", 20.0), ("b", 5.0)):
        x = np.round(rng.gamma(2.0, scale, 4000), 3)
        (tmp_path / f"{name}.csv").write_text(
            "id,ms\n" + "".join(f"{i},{v}\n" for i, v in enumerate(x)))
        xs[name] = x
    texts = [f"{v:.3f}" for v in rng.exponential(3.0, 3000)]
    texts[7] = "1.0000000000000000001"  # 20 digits: the kernel hands it back (numpy reads it)
    (tmp_path / "c.txt").write_text("\n".join(texts) + "\n")
    xs["c"] = np.array([float(t) for t in texts])
    (tmp_path / "s.toml").write_text(SPEC)
    return xs


def test_read_ahead_gives_the_binned_numpy_histogram(tmp_path, monkeypatch):
    monkeypatch.setattr(sample_files, "KERNEL_BYTES", 0)
    xs = _files(tmp_path, np.random.default_rng(5))
    taken = []
    take = delays_prefetch.Prefetch.take

    def spy(self, path, column):
        x = take(self, path, column)
        taken.append((path.name, x is not None))
        return x

    monkeypatch.setattr(delays_prefetch.Prefetch, "take", spy)
    warmed = []
    res = compute(parse(load_spec(tmp_path / "s.toml")), warm=lambda: warmed.append(1))
    assert warmed == [1]
    assert taken == [("a.csv", True), ("b.csv", True), ("c.txt", False)]
    for name, x in xs.items():  # reference: numpy's bincount of the nearest lattice points
        ref = np.bincount(np.floor(x / 0.5 + 0.5).astype(int)) / x.size
        assert np.array_equal(np.asarray(res.stages[name].pmf)[: ref.size], ref)


def test_a_bad_file_is_reported_by_the_main_thread(tmp_path, monkeypatch):
    monkeypatch.setattr(sample_files, "KERNEL_BYTES", 0)
    _files(tmp_path, np.random.default_rng(6))
    (tmp_path / "b.csv").write_text("id,ms\n1,2.5\n2,fast\n")
    with pytest.raises(SpecError, match="b.csv"):  # numpy.loadtxt's message, named file
        compute(parse(load_spec(tmp_path / "s.toml")))


def test_out_of_order_and_full_read_ahead_never_waits_forever(tmp_path, monkeypatch):
    monkeypatch.setattr(sample_files, "KERNEL_BYTES", 0)
    xs = _files(tmp_path, np.random.default_rng(7))
    keys = [(tmp_path / "a.csv", "ms"), (tmp_path / "b.csv", 1)]
    ahead = delays_prefetch.start(keys)
    ahead._ahead = 0  # full after one file: the later file is read by the caller
    try:
        for (path, column), name in reversed(list(zip(keys, "ab", strict=True))):
            x = ahead.take(path, column)
            x = sample_files.read_samples(path, column=column) if x is None else x
            assert np.array_equal(x, xs[name])
        assert ahead.take(*keys[0]) is None  # taken already: read it yourself
        assert ahead.take(tmp_path / "other.csv", None) is None
    finally:
        ahead.close()
