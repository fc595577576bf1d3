"""The cost table: round trips through a temporary user file (and `polyconv calibrate`).

The other command-line tests live in tests/cli/test_commands.py and tests/cli/test_reports.py.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

import polyconv
from polyconv.cli.main import main
from polyconv.tuning import costs


def test_user_cost_file_is_preferred_and_written_atomically(tmp_path, monkeypatch):
    target = tmp_path / "costs.json"
    monkeypatch.setenv("POLYCONV_COSTS", str(target))
    try:
        assert costs.user_cost_path() == target
        table = costs.default_costs()
        # make direct summation absurdly expensive: auto must then avoid it
        table["direct"]["per_mac"] = 1.0
        table["direct_batch"]["per_step"] = 1.0
        costs.save_user_costs(table)
        assert json.loads(target.read_text())["direct"]["per_mac"] == 1.0
        assert costs.cost_source() == str(target)
        assert polyconv.plan(np.ones(8), np.ones(8)).engine != "direct"
        assert not list(tmp_path.glob(".costs-*"))  # no temporary file left behind
    finally:
        monkeypatch.delenv("POLYCONV_COSTS")
        costs.load_costs(refresh=True)
    assert polyconv.plan(np.ones(8), np.ones(8)).engine == "direct"


def test_unreadable_user_file_falls_back_to_defaults(tmp_path, monkeypatch):
    bad = tmp_path / "costs.json"
    bad.write_text("{ not json")
    monkeypatch.setenv("POLYCONV_COSTS", str(bad))
    try:
        with pytest.warns(RuntimeWarning, match="costs.json"):  # names the file
            assert costs.load_costs(refresh=True) == costs.default_costs()
    finally:
        monkeypatch.delenv("POLYCONV_COSTS")
        costs.load_costs(refresh=True)


def test_save_refuses_an_incomplete_table(tmp_path):
    with pytest.raises(ValueError, match="cost table needs"):
        costs.save_user_costs({"direct": {}}, tmp_path / "x.json")
    assert not (tmp_path / "x.json").exists()


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
def test_calibrate_quick_writes_a_usable_table(tmp_path, monkeypatch, capsys):
    out = tmp_path / "measured.json"
    monkeypatch.setenv("POLYCONV_COSTS", str(out))
    try:
        assert main(["calibrate", "--quick", "--quiet"]) == 0
        table = json.loads(out.read_text())
        for key in costs.REQUIRED_KEYS:
            assert key in table
        assert all(v > 0 for v in table["fft"]["rate_by_log2n"].values())
        assert table["direct"]["per_mac"] > 0
        p = polyconv.plan(np.ones(100_000), np.ones(100_000))
        assert p.engine == "fft"  # direct would be 10^10 multiply-adds
    finally:
        monkeypatch.delenv("POLYCONV_COSTS")
        costs.load_costs(refresh=True)
