"""Regression tests for issue 16 on convolve_file: a source changed while it is read is refused,
damaged files get clear errors naming the source, nothing is left behind.

Reference for the values that are written: numpy.convolve on the data as first saved.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from polyconv.scale import SourceChangedError, convolve_file


def _save(folder, name: str, x: np.ndarray) -> str:
    path = os.path.join(folder, name)
    np.save(path, x)
    return path


def _only(folder, *names) -> None:
    assert sorted(os.listdir(folder)) == sorted(names)


def _after_first_block(action):
    calls = []

    def progress(done, total):
        calls.append(done)
        if len(calls) == 2:  # one block written
            action()
    return progress


def test_source_replaced_mid_run_is_refused(tmp_path):
    # common practice, no source: float data renamed over an int64 source must not be mixed in
    src = _save(tmp_path, "x.npy", np.arange(40, dtype=np.int64))
    other = _save(tmp_path, "new.npy", np.linspace(0.5, 9.5, 80))
    dst = tmp_path / "y.npy"
    with pytest.raises(SourceChangedError, match="x.npy.*replaced"):
        convolve_file(src, [1, 2], dst, block=8,
                      progress=_after_first_block(lambda: os.replace(other, src)))
    _only(tmp_path, "x.npy")


def test_source_rewritten_in_place_or_shrunk_is_refused(tmp_path):
    src = _save(tmp_path, "x.npy", np.arange(40, dtype=np.int64))
    dst = tmp_path / "y.npy"

    def shrink():
        with open(src, "r+b") as f:
            f.truncate(os.path.getsize(src) - 80)
    with pytest.raises(SourceChangedError, match="x.npy"):
        convolve_file(src, [1, 2], dst, block=8, progress=_after_first_block(shrink))

    def rewrite():  # same size, same inode, other bytes (mtime moved on explicitly)
        data = np.load(src)
        with open(src, "r+b") as f:
            f.seek(-data.nbytes, os.SEEK_END)
            f.write((data[::-1] * 3).tobytes())
        st = os.stat(src)
        os.utime(src, ns=(st.st_atime_ns, st.st_mtime_ns + 10**9))
    np.save(src, np.arange(40, dtype=np.int64))
    with pytest.raises(SourceChangedError, match="rewritten"):
        convolve_file(src, [1, 2], dst, block=8, progress=_after_first_block(rewrite))
    _only(tmp_path, "x.npy")


def test_unchanged_source_still_matches_numpy(tmp_path):
    # reference: numpy.convolve
    x = np.arange(-50, 53, dtype=np.int64)
    src = _save(tmp_path, "x.npy", x.astype(">i8"))  # big-endian on disk, read natively
    convolve_file(src, [3, -1, 2], tmp_path / "y.npy", block=8)
    assert np.array_equal(np.load(tmp_path / "y.npy"), np.convolve(x, [3, -1, 2]))


def test_damaged_npy_files_are_named_and_described(tmp_path):
    # common practice, no source: each refusal names the source and says what is wrong
    dst = tmp_path / "y.npy"
    (tmp_path / "r.npy").write_bytes(os.urandom(256).replace(b"\x93", b"\x00"))
    with pytest.raises(ValueError, match=r"r\.npy.*not a \.npy file") as info:
        convolve_file(tmp_path / "r.npy", [1.0], dst)
    assert "pickle" not in str(info.value)
    good = open(_save(tmp_path, "g.npy", np.arange(10.0)), "rb").read()
    (tmp_path / "h.npy").write_bytes(good[:10] + b"{'descr': <f8, garbage" + good[32:])
    with pytest.raises(ValueError, match=r"h\.npy.*damaged \.npy header"):
        convolve_file(tmp_path / "h.npy", [1.0], dst)
    (tmp_path / "t.npy").write_bytes(good[:-16])
    with pytest.raises(ValueError, match=r"t\.npy.*truncated.*10 samples"):
        convolve_file(tmp_path / "t.npy", [1.0], dst)
    np.savez(tmp_path / "z.npy", a=np.ones(3))  # an archive renamed .npy
    os.replace(tmp_path / "z.npy.npz", tmp_path / "z.npy")
    with pytest.raises(ValueError, match=r"z\.npy.*\.npz archive"):
        convolve_file(tmp_path / "z.npy", [1.0], dst)
    assert not dst.exists()
    assert not [f for f in os.listdir(tmp_path) if f.endswith(".tmp")]


def test_exact_product_dask_refuses_a_non_client():
    # common practice, no source: a TypeError naming client=, not an AttributeError
    pytest.importorskip("distributed")
    from polyconv.scale.dask import exact_product_dask
    with pytest.raises(TypeError, match="client must be a distributed.Client"):
        exact_product_dask([1, 2], [3], client=5)


@pytest.mark.parametrize("damage, key", [
    (lambda t: t["exact"].pop("kronecker"), "exact.kronecker"),
    (lambda t: t["fft"].__setitem__("overhead", "fast"), "fft.overhead"),
    (lambda t: t["direct"].__setitem__("per_mac", True), "direct.per_mac"),
    (lambda t: t.__setitem__("threads", [1, 2]), "threads"),
    (lambda t: t["fft"].__setitem__("rate_by_log2n", {}), "fft.rate_by_log2n"),
])
def test_a_damaged_cost_file_is_named_with_its_key(tmp_path, monkeypatch, damage, key):
    # common practice, no source: the error names the file and the key at fault
    import json

    from polyconv.tuning import costs
    table = costs.default_costs()
    damage(table)
    path = tmp_path / "costs.json"
    path.write_text(json.dumps(table))
    monkeypatch.setenv("POLYCONV_COSTS", str(path))
    try:
        with pytest.raises(ValueError, match=f"costs.json.*{key}"):
            costs.load_costs(refresh=True)
    finally:
        monkeypatch.delenv("POLYCONV_COSTS")
        costs.load_costs(refresh=True)
