"""The console script and the cost table: round trips through a temporary user file."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import polyconv
from polyconv import costs
from polyconv.cli.main import main


def test_demo_prints_dice_counts_matching_the_closed_form(capsys):
    assert main(["demo", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    # ways to roll total s with three dice: sum_k (-1)^k C(3,k) C(s - 6k - 1, 2)
    # (inclusion-exclusion; common practice, no source)
    for total in range(3, 19):
        ways = sum((-1) ** k * math.comb(3, k) * math.comb(total - 6 * k - 1, 2)
                   for k in range(4) if total - 6 * k - 1 >= 2)
        assert report["dice"][str(total)] == ways
    pipe = report["pipeline"]
    assert pipe["p50_ms"] <= pipe["p99_ms"]
    assert 0.0 <= pipe["miss_probability_60ms"] <= 1.0
    assert report["smoothing"]["output_length"] == report["smoothing"]["samples"]


def test_no_command_prints_help_and_exits_2(capsys):
    assert main([]) == 2
    assert "demo" in capsys.readouterr().out


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
