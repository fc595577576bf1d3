"""``polyconv multiply`` streams .npy inputs above the memory budget.

Reference: numpy.convolve on the same data in memory (exact for the small integers used here).
"""

from __future__ import annotations

import numpy as np

from polyconv.cli.main import main


def test_multiply_streams_large_npy_and_matches_numpy(tmp_path, capsys):
    rng = np.random.default_rng(3)
    signal = rng.integers(-1000, 1000, 300_000)
    taps = rng.integers(-9, 10, 41)
    np.save(tmp_path / "signal.npy", signal)
    np.save(tmp_path / "taps.npy", taps)
    out = tmp_path / "out.npy"
    code = main(["multiply", str(tmp_path / "taps.npy"), str(tmp_path / "signal.npy"), "-o",
                 str(out), "--memory-budget", "0.5", "--quiet"])
    assert code == 0
    assert "streamed 300040 coefficients" in capsys.readouterr().out
    got = np.load(out)
    assert got.dtype == np.int64
    np.testing.assert_array_equal(got, np.convolve(signal, taps))  # reference: numpy.convolve


def test_multiply_below_budget_stays_in_memory(tmp_path, capsys):
    a, b = np.arange(1.0, 6.0), np.array([1.0, -1.0])
    np.save(tmp_path / "a.npy", a)
    np.save(tmp_path / "b.npy", b)
    assert main(["multiply", str(tmp_path / "a.npy"), str(tmp_path / "b.npy"), "-o",
                 str(tmp_path / "c.npy")]) == 0
    assert "wrote 6 coefficients" in capsys.readouterr().out
    np.testing.assert_allclose(np.load(tmp_path / "c.npy"), np.convolve(a, b))


def test_bad_memory_budget_exits_2(tmp_path, capsys):
    np.save(tmp_path / "a.npy", np.ones(3))
    assert main(["multiply", str(tmp_path / "a.npy"), str(tmp_path / "a.npy"), "-o",
                 str(tmp_path / "c.npy"), "--memory-budget", "-1"]) == 2
    assert "--memory-budget" in capsys.readouterr().err
