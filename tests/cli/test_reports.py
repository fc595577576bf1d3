"""``aggregate``, ``delays`` and ``demo`` reports checked against numbers computed here.

The reference numbers are computed inside each test from scipy.stats and plain numpy, by the
published formulas named beside each check, not from polyconv's output.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, stats

from polyconv.cli import demo_cmd
from polyconv.cli.main import main
from polyconv.cli.spec import parse_spec

DEMO_CLAIMS = demo_cmd.scenario_text("quillmere_claims.toml")
DEMO_PIPELINE = demo_cmd.scenario_text("larkspur_pipeline.toml")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """Run ``polyconv demo --json`` once; the JSON summary and the report folder."""
    folder = tmp_path_factory.mktemp("demo") / "out"
    import contextlib
    import io

    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["demo", "-o", str(folder), "--json", "--quiet"]) == 0
    return json.loads(buf.getvalue()), folder


# ---------------------------------------------------------------- independent references


def nearest_pmf(law, step: float, points: int) -> np.ndarray:
    """Nearest-point discretisation (Klugman, Panjer & Willmot, Loss Models, ch. 9):
    f_0 = F(h/2), f_j = F((j + 1/2) h) - F((j - 1/2) h), differenced from the sf in the tail."""
    edges = (np.arange(points + 1) - 0.5) * step
    edges[0] = 0.0
    sf = law.sf(edges)
    sf[0] = 1.0
    return sf[:-1] - sf[1:]


def panjer(a: float, b: float, g0: float, f: np.ndarray, size: int) -> np.ndarray:
    """Panjer's recursion (Panjer, ASTIN Bulletin 12 (1981)):
    g_x = sum_{y=1..x} (a + b y / x) f_y g_{x-y} / (1 - a f_0)."""
    g = np.zeros(size)
    g[0] = g0
    y = np.arange(1, f.size)
    for x in range(1, size):
        m = min(x, f.size - 1)
        g[x] = np.dot((a + b * y[:m] / x) * f[1 : m + 1], g[x - 1 :: -1][:m]) / (1 - a * f[0])
    return g


def lower_quantile(pmf: np.ndarray, values: np.ndarray, p: float) -> float:
    """VaR_p = min{x : F(x) >= p} (Acerbi & Tasche 2002, lower quantile)."""
    return float(values[np.searchsorted(np.cumsum(pmf), p)])


def stop_loss(pmf: np.ndarray, values: np.ndarray, d: float) -> float:
    """E[(S - d)+] as a sum over the lattice (definition)."""
    return float(np.sum(np.maximum(values - d, 0.0) * pmf))


def row(rows: list[dict], name: str, value: float) -> dict:
    """The report row asked at ``name == value`` (a level, retention, deadline, percentile)."""
    (found,) = [r for r in rows if r[name] == value]
    return found


def within(r: dict, reference: float, rel: float = 1e-9) -> bool:
    """``reference`` lies in the row's certified range, widened by ``rel`` for the rounding of
    the independent reference computation itself (``high`` null: no finite upper end)."""
    slack = rel * abs(reference)
    high = math.inf if r["high"] is None else r["high"]
    return r["low"] - slack <= reference <= high + slack


def agrees(r: dict, reference: float, rel: float) -> bool:
    """The row's range holds the reference, and its value is the reference unless refused (a
    refused row has no value and says why)."""
    if r["refused"]:
        return r["value"] is None and bool(r["reason"]) and within(r, reference, rel)
    return r["value"] == pytest.approx(reference, rel=rel) and within(r, reference, rel)


def limited_mean(law, u: float) -> float:
    """Limited expected value E[X ^ u] = int_0^u S(x) dx (Klugman, Panjer & Willmot, ch. 3)."""
    return integrate.quad(law.sf, 0, u, limit=200)[0]


# ----------------------------------------------------------------------------- aggregate


def test_demo_claims_match_panjer_recursion_and_loss_models_formulas(demo):
    summary, _ = demo
    s = summary["claims"]
    spec = parse_spec(DEMO_CLAIMS).data
    h = spec["grid"]["step"]
    d, lim = spec["cover"]["deductible"], spec["cover"]["limit"]
    sev = stats.lognorm(**spec["severity"]["params"])
    mean_n, var_n = spec["claims"]["mean"], spec["claims"]["variance"]
    # per-claim layer min(max(X - d, 0), lim) on the same grid, from scipy's cdf
    kd, kl = round(d / h), round(lim / h)
    ground = nearest_pmf(sev, h, kd + kl + 1)
    layer = np.zeros(kl + 1)
    layer[0] = ground[: kd + 1].sum()
    layer[1:kl] = ground[kd + 1 : kd + kl]
    layer[kl] = sev.sf(d + lim - h / 2)  # everything rounded to d + lim or beyond
    ys = h * np.arange(kl + 1)
    ey = float(np.dot(layer, ys))
    vy = float(np.dot(layer, ys**2)) - ey**2
    # negative binomial in scipy's (r, p): a = 1 - p, b = (r - 1)(1 - p), P(z) = (p/(1-qz))^r
    r, p = mean_n**2 / (var_n - mean_n), mean_n / var_n
    g0 = (p / (1 - (1 - p) * layer[0])) ** r
    g = panjer(1 - p, (r - 1) * (1 - p), g0, layer, s["grid_points"])
    xs = h * np.arange(g.size)
    # E[S] = E[N] E[Y] (Wald's identity; Klugman, Panjer & Willmot, Loss Models, ch. 9)
    assert agrees(s["mean"], mean_n * ey, rel=1e-9) and not s["mean"]["refused"]
    # E[Y] against the continuous law: E[X ^ (d + lim)] - E[X ^ d] (Loss Models, ch. 8);
    # nearest-point discretisation is not mean-preserving, hence the looser tolerance
    ey_cont = limited_mean(sev, d + lim) - limited_mean(sev, d)
    assert s["mean_per_claim"]["value"] == pytest.approx(ey_cont, rel=2e-3)
    # Var S = E[N] Var Y + Var N E[Y]^2 (Loss Models, ch. 9)
    sd = math.sqrt(mean_n * vy + var_n * ey**2)
    assert agrees(s["sd"], sd, rel=1e-8)
    for level in (0.90, 0.95, 0.99, 0.995, 0.999):
        var = lower_quantile(g, xs, level)
        r = row(s["var"], "level", level)
        assert r["label"] == f"VaR {level * 100:.10g}%"
        assert r["value"] == var and within(r, var) and not r["refused"]
        # TVaR_p = VaR_p + E[(S - VaR_p)+] / (1 - p) (Acerbi & Tasche 2002)
        tvar = var + stop_loss(g, xs, var) / (1 - level)
        r = row(s["tvar"], "level", level)
        assert r["value"] == pytest.approx(tvar, rel=1e-9) and within(r, tvar)
    for retention in spec["report"]["retentions"]:
        ref = stop_loss(g, xs, retention)
        r = row(s["stop_loss"], "retention", retention)
        assert r["value"] == pytest.approx(ref, rel=1e-8) and within(r, ref, rel=1e-8)
    assert 0 <= s["truncated_mass"] < 1e-10
    assert s["errors"]["point"] < 1e-9


def _write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


POISSON_TABLE = """
title = "test: Poisson counts, empirical severity"
currency = "EUR"
[claims]
law = "poisson"
mean = 3.5
[severity]
values = [100, 250, 1000]
probabilities = [0.5, 0.3, 0.2]
[grid]
step = 50.0
[report]
levels = [0.5, 0.99]
retentions = [2000.0]
"""


def test_aggregate_poisson_empirical_round_trip(tmp_path, capsys):
    spec = _write(tmp_path, "claims.toml", POISSON_TABLE)
    out = tmp_path / "rep"
    assert main(["aggregate", str(spec), "-o", str(out), "--json", "--quiet"]) == 0
    s = json.loads(capsys.readouterr().out)
    # compound Poisson: E[S] = lam E[X], Var S = lam E[X^2] (Loss Models, ch. 9)
    ex = 0.5 * 100 + 0.3 * 250 + 0.2 * 1000
    ex2 = 0.5 * 100**2 + 0.3 * 250**2 + 0.2 * 1000**2
    assert agrees(s["mean"], 3.5 * ex, rel=1e-10)
    assert agrees(s["sd"], math.sqrt(3.5 * ex2), rel=1e-9)
    # P(S = 0) = e^-lam, and the first row of the CSV says so
    rows = (out / "aggregate.csv").read_text().splitlines()
    assert rows[0] == "amount,probability,cdf,exceedance"
    assert float(rows[1].split(",")[1]) == pytest.approx(math.exp(-3.5), rel=1e-12)
    assert sorted(p.name for p in out.iterdir()) == ["aggregate.csv", "aggregate.png",
                                                     "measures.csv", "summary.json",
                                                     "summary.md"]
    md = (out / "summary.md").read_text()
    assert "model output, not advice" in md and "licensed actuarial" in md
    # terminal report carries the caution too
    assert main(["aggregate", str(spec), "-o", str(out), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "model output, not advice" in text and "independen" in text


def test_aggregate_binomial_counts_against_direct_sum(tmp_path, capsys):
    # binomial counts, Bernoulli severity at 1: S is binomial (DESIGN.md oracle: Bernoulli sums)
    text = """
    [claims]
    law = "binomial"
    trials = 40
    probability = 0.1
    [severity]
    values = [0, 1]
    probabilities = [0.7, 0.3]
    [grid]
    step = 1.0
    points = 41
    method = "fft"
    """
    spec = _write(tmp_path, "b.toml", text)
    assert main(["aggregate", str(spec), "-o", str(tmp_path / "r"), "--json", "--quiet"]) == 0
    s = json.loads(capsys.readouterr().out)
    ref = stats.binom(40, 0.1 * 0.3)  # thinning a binomial count keeps it binomial
    assert s["mean"]["value"] == pytest.approx(ref.mean(), rel=1e-12)
    assert row(s["var"], "level", 0.99)["value"] == ref.ppf(0.99)


# ------------------------------------------------------------------------------- delays


def test_demo_pipeline_matches_an_independent_numpy_evaluation(demo):
    summary, _ = demo
    s = summary["pipeline"]
    spec = parse_spec(DEMO_PIPELINE).data
    st = spec["stage"]
    # one grid of 1 ms steps for every stage, cut at 3 s: each operation below (sum, max, min,
    # mixture) gives exact values at t < n from the inputs at t < n, and every percentile and
    # deadline checked lies below 3 s
    n = 3_000
    t = np.arange(n, dtype=float)

    def leaf(name):
        sec = st[name]
        if "law" in sec:
            return nearest_pmf(getattr(stats, sec["law"])(**sec["params"]), 1.0, n)
        values = sec.get("samples", sec.get("values"))
        probs = sec.get("probabilities", [1 / len(values)] * len(values))
        pmf = np.zeros(n)
        np.add.at(pmf, np.rint(values).astype(int), probs)
        return pmf

    def cdf(pmf):
        return np.cumsum(pmf)

    def from_cdf(c):
        return np.diff(np.concatenate(([0.0], c)))

    # one_of: mixture with weights (law of total probability)
    w = st["fraud_screen"]["one_of"]
    fraud = w["auto_clear"] * leaf("auto_clear") + w["manual_hold"] * leaf("manual_hold")
    # all_of: P(max <= t) = prod P(X_i <= t); first_of: P(min > t) = prod P(X_i > t) for
    # independent X_i (order statistics; e.g. David & Nagaraja, Order Statistics, ch. 2)
    prepare = from_cdf(np.prod([cdf(leaf(k)) for k in st["prepare"]["all_of"]], axis=0))
    hand = from_cdf(1 - np.prod([1 - cdf(leaf(k)) for k in st["hand_over"]["first_of"]],
                                axis=0))
    # in_sequence: the pmf of a sum of independent delays is the convolution of their pmfs
    total = leaf("accept")
    for part in (fraud, prepare, hand):
        total = np.convolve(total, part)[:n]
    for q in spec["report"]["percentiles"]:
        r = row(s["percentiles"], "percentile", q)
        assert r["label"] == f"p{q:g}" and r["value"] < n
        ref = lower_quantile(total, t, q / 100)
        assert r["value"] == ref and within(r, ref), q
    for deadline in spec["report"]["deadlines"]:
        ref = 1 - cdf(total)[int(deadline)]
        r = row(s["miss_probability"], "deadline", deadline)
        assert r["value"] == pytest.approx(ref, rel=1e-8, abs=1e-13)
        assert r["low"] - 1e-13 <= ref <= r["high"] + 1e-13
    # the mean of a sum is the sum of means (linearity), whatever the dependence
    # (on the certified ranges: the sum of the stage ranges meets the total's range)
    stage_means = [s["stages"][k]["mean"] for k in ("accept", "fraud_screen", "prepare",
                                                     "hand_over")]
    high = [math.inf if m["high"] is None else m["high"] for m in stage_means + [s["mean"]]]
    assert s["mean"]["low"] <= sum(high[:-1]) * (1 + 1e-12)
    assert sum(m["low"] for m in stage_means) <= high[-1] * (1 + 1e-12)
    if not any(m["refused"] for m in stage_means + [s["mean"]]):
        assert s["mean"]["value"] == pytest.approx(sum(m["value"] for m in stage_means),
                                                   rel=1e-9)


SIMPLE_DELAYS = """
unit = "s"
[grid]
step = 0.5
[report]
percentiles = [50, 99]
deadlines = [10.0]
[network]
in_sequence = ["a", "b", "a"]
[stage.a]
law = "expon"
params = { scale = 2.0 }
[stage.b]
values = [1.0, 3.0]
counts = [3, 1]
"""


def test_delays_round_trip_with_a_repeated_stage(tmp_path, capsys):
    spec = _write(tmp_path, "net.toml", SIMPLE_DELAYS)
    out = tmp_path / "net"
    assert main(["delays", str(spec), "-o", str(out), "--json", "--quiet"]) == 0
    s = json.loads(capsys.readouterr().out)
    # the same stage twice = two independent draws: mean 2 + 1.5 + 2 (linearity)
    expon_grid_mean = float(np.dot(nearest_pmf(stats.expon(scale=2.0), 0.5, 400),
                                   0.5 * np.arange(400)))
    assert agrees(s["mean"], 2 * expon_grid_mean + 1.5, rel=1e-9)
    assert sorted(p.name for p in out.iterdir()) == ["delays.csv", "delays.png", "measures.csv",
                                                     "summary.json", "summary.md"]
    md = (out / "summary.md").read_text()
    assert "model output, not advice" in md and "licensed engineering" in md
    assert "independen" in md and "truncation" in md


# ------------------------------------------------------------------------------ malformed


AGGREGATE_BAD = [
    ("[claims]\nlaw = \"poisson\"\nmean = 1.0\n", "severity", None),
    (DEMO_CLAIMS.replace("deductible = 500.0", "deductable = 500.0"), "cover.deductable", 18),
    (DEMO_CLAIMS.replace("s = 1.25", "s = -1.25"), "severity.params", 15),
    (DEMO_CLAIMS.replace("s = 1.25", "q = 1.25"), "severity.params", 15),
    (DEMO_CLAIMS.replace('"lognorm"', '"lognormal"'), "severity.law", 14),
    (DEMO_CLAIMS.replace('"lognorm"', '"poisson"'), "severity.law", 14),
    (DEMO_CLAIMS.replace("variance = 95.0", "variance = 10.0"), "claims.variance", 11),
    (DEMO_CLAIMS.replace('"negative-binomial"', '"geometric"'), "claims.law", 9),
    (DEMO_CLAIMS.replace("step = 100.0", 'step = "fine"'), "grid.step", 22),
    (DEMO_CLAIMS.replace("step = 100.0", "step = -100.0"), "grid.step", 22),
    (DEMO_CLAIMS.replace("limit = 100000.0", "limit = 100050.0"), "cover.limit", 19),
    (DEMO_CLAIMS.replace("0.995, 0.999", "0.995, 99.9"), "report.levels[4]", 27),
    (DEMO_CLAIMS.replace('method = "auto"', 'method = "magic"'), "grid.method", 24),
    (POISSON_TABLE.replace("[0.5, 0.3, 0.2]", "[0.5, 0.3, 0.3]"), "severity.probabilities",
     9),
    (POISSON_TABLE.replace("[0.5, 0.3, 0.2]", "[0.5, 0.5]"), "severity.probabilities", 9),
]


@pytest.mark.parametrize(("text", "key", "line"), AGGREGATE_BAD)
def test_malformed_aggregate_spec_names_the_key_and_line(tmp_path, capsys, text, key, line):
    spec = _write(tmp_path, "bad.toml", text)
    code = main(["aggregate", str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert f"key '{key}'" in err
    if line is not None:
        assert f"line {line}" in err
    assert "Traceback" not in err
    assert not (tmp_path / "r").exists()


DELAYS_BAD = [
    (DEMO_PIPELINE.replace('"print_label"]', '"print_lable"]'), "stage.prepare.all_of[2]", 35),
    (DEMO_PIPELINE.replace("manual_hold = 0.04", "manual_hold = 0.05"),
     "stage.fraud_screen.one_of", 24),
    (DEMO_PIPELINE.replace('first_of = ["courier_north", "courier_south"]',
                           'first_of = ["courier_north", "hand_over"]'),
     "stage.hand_over.first_of[1]", 50),
    (DEMO_PIPELINE.replace("values = [27, 28", 'values = [27, "late"'),
     "stage.reserve_stock.values[1]", 38),
    (DEMO_PIPELINE.replace("values = [27, 28", "values = [27, -28"),
     "stage.reserve_stock.values[1]", 38),
    (DEMO_PIPELINE.replace("[stage.accept]", "[stage.accept]\nall_of = [\"prepare\"]"),
     "stage.accept", None),
    (DEMO_PIPELINE.replace("percentiles = [50, 90, 99, 99.9]", "percentiles = [50, 100]"),
     "report.percentiles", 13),
    (DEMO_PIPELINE.replace("[network]", "[netwerk]"), "netwerk", 16),
]


@pytest.mark.parametrize(("text", "key", "line"), DELAYS_BAD)
def test_malformed_delays_spec_names_the_key_and_line(tmp_path, capsys, text, key, line):
    spec = _write(tmp_path, "bad.toml", text)
    code = main(["delays", str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert f"key '{key}" in err
    if line is not None:
        assert f"line {line}" in err
    assert "Traceback" not in err


def test_toml_syntax_error_reports_line_and_column(tmp_path, capsys):
    spec = _write(tmp_path, "bad.toml", "[claims]\nlaw = \"poisson\"\nmean = 3 apples\n")
    assert main(["aggregate", str(spec)]) == 2
    err = capsys.readouterr().err
    assert "not valid TOML" in err and "line 3" in err


@pytest.mark.parametrize("command", ["aggregate", "delays"])
def test_missing_or_wrong_spec_file(tmp_path, capsys, command):
    assert main([command, str(tmp_path / "nope.toml")]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main([command, str(tmp_path)]) == 2
    assert "folder" in capsys.readouterr().err
    (tmp_path / "bin.toml").write_bytes(b"\xff\xfe\x00")
    assert main([command, str(tmp_path / "bin.toml")]) == 2
    assert "UTF-8" in capsys.readouterr().err


# --------------------------------------------------------------------------------- demo


def test_demo_counts_match_de_moivre_and_coin_change_references(demo):
    summary, folder = demo
    c = summary["counting"]
    # ways to roll total s with n dice: sum_k (-1)^k C(n,k) C(s - 6k - 1, n - 1)
    # (inclusion-exclusion; de Moivre's dice formula)
    def ways(n, total):
        return sum((-1) ** k * math.comb(n, k) * math.comb(total - 6 * k - 1, n - 1)
                   for k in range(n + 1) if total - 6 * k - 1 >= n - 1)

    for total in range(3, 19):
        assert c["three_dice"][str(total)] == ways(3, total)
    assert c["fifty_dice"]["most_likely_total"] == 175  # the mean 3.5 * 50 (symmetry)
    assert c["fifty_dice"]["ways"] == ways(50, 175)
    # 292 ways to change a dollar with 50, 25, 10, 5 and 1 cent coins (Abelson & Sussman,
    # Structure and Interpretation of Computer Programs, section 1.2.2)
    assert c["coin_change"]["ways_100"] == 292
    # the classic dynamic programme (unbounded coin change) for 100.00
    table = [1] + [0] * 10_000
    for coin in (1, 5, 10, 25, 50):
        for amount in range(coin, 10_001):
            table[amount] += table[amount - coin]
    assert c["coin_change"]["ways_10000"] == table[10_000]
    rows = (folder / "dice.csv").read_text().splitlines()
    assert rows[0] == "total,ways" and rows[8] == f"10,{ways(3, 10)}"


def test_demo_folder_holds_the_report_and_the_cautions(demo):
    summary, folder = demo
    names = {p.name for p in folder.iterdir()}
    assert {"report.md", "claims_aggregate.csv", "claims_aggregate.png", "pipeline_delays.csv",
            "pipeline_delays.png", "dice.png", "quillmere_claims.toml",
            "larkspur_pipeline.toml"} <= names
    report = (folder / "report.md").read_text()
    assert report.count("model output, not advice") >= 2
    assert "licensed actuarial" in report and "licensed engineering" in report
    for part in ("claims", "pipeline"):
        assert any("not advice" in line for line in summary[part]["caution"])
    # the copied specs run as they are
    assert main(["aggregate", str(folder / "quillmere_claims.toml"), "-o",
                 str(folder.parent / "again"), "--quiet", "--json"]) == 0
