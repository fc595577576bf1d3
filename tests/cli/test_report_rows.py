"""Report rows of ``aggregate`` and ``delays``: every measure with its certified range, labels
that never round, JSON without float noise, refused rows flagged, refusals that write nothing.

References are computed here from scipy.stats, exact fractions or closed forms (named beside
each check), never from polyconv's output.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import re
from fractions import Fraction
from itertools import product
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from polyconv.cli import plots
from polyconv.cli.main import main
from polyconv.cli.report import (
    dumps,
    level_name,
    number_name,
    percentile_name,
    round_significant,
)


def run_json(argv: list[str]) -> tuple[int, dict | None, str]:
    """Run the CLI; exit status, the parsed JSON printed (if any) and stderr."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(argv)
    text = out.getvalue()
    return code, (json.loads(text) if code == 0 and "--json" in argv else None), err.getvalue()


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def row(rows: list[dict], name: str, value: float) -> dict:
    (found,) = [r for r in rows if r[name] == value]
    return found


def contains(r: dict, reference: float, slack: float = 0.0) -> bool:
    """``reference`` in the row's range (``high`` null in the JSON: no finite upper end)."""
    high = math.inf if r["high"] is None else r["high"]
    return r["low"] - slack <= reference <= high + slack


# ------------------------------------------------------------- aggregate vs scipy.stats

POISSON_UNIT = """
title = "test: Poisson number of unit claims"
currency = "EUR"
[claims]
law = "poisson"
mean = 4.0
[severity]
values = [1.0]
probabilities = [1.0]
[grid]
step = 1.0
[report]
levels = [0.5, 0.9, 0.995, 0.999999]
retentions = [3.0, 6.0, 10.0]
"""


@pytest.fixture(scope="module")
def poisson_report(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("poisson")
    spec = write(tmp, "claims.toml", POISSON_UNIT)
    code, s, err = run_json(["aggregate", str(spec), "-o", str(tmp / "rep"), "--json",
                             "--quiet"])
    assert code == 0, err
    return s, tmp / "rep"


def test_unit_claims_give_scipy_poisson_measures(poisson_report):
    # every claim is 1: S = N ~ Poisson(4) exactly on the unit grid (thinning nothing)
    s, _ = poisson_report
    law = stats.poisson(4.0)
    # mean and sd of a Poisson law: lambda and sqrt(lambda) (scipy.stats.poisson)
    assert s["mean"]["value"] == pytest.approx(law.mean(), rel=1e-12)
    assert contains(s["mean"], law.mean(), 1e-12)
    # the range holds the reference also when the sd is refused (then its reason is given)
    assert contains(s["sd"], law.std(), 1e-9)
    if s["sd"]["refused"]:
        assert s["sd"]["value"] is None and "std" in s["sd"]["reason"]
    else:
        assert s["sd"]["value"] == pytest.approx(law.std(), rel=1e-9)
    ks = np.arange(200)
    pmf = law.pmf(ks)
    for level in (0.5, 0.9, 0.995, 0.999999):
        # VaR_p = min{k : F(k) >= p}, scipy's ppf for a discrete law
        var = float(law.ppf(level))
        r = row(s["var"], "level", level)
        assert not r["refused"] and r["value"] == var and contains(r, var)
        # TVaR_p = VaR_p + E[(S - VaR_p)+] / (1 - p) (Acerbi & Tasche 2002), sum over scipy pmf
        tvar = var + float(np.sum(np.maximum(ks - var, 0) * pmf)) / (1 - level)
        r = row(s["tvar"], "level", level)
        # the lattice stops where Poisson(4) has ~1e-12 left: at 1 - p = 1e-6 that moves TVaR
        # by ~1e-7 relative; the certified range must account for it
        assert r["value"] == pytest.approx(tvar, rel=1e-6)
        assert contains(r, tvar, 1e-12 * tvar)
    for d in (3.0, 6.0, 10.0):
        # E[(S - d)+] = E[S] - d + E[(d - S)+] (identity (x)+ = x + (-x)+), from scipy's pmf
        ref = 4.0 - d + float(np.sum(np.maximum(d - ks, 0) * pmf))
        r = row(s["stop_loss"], "retention", d)
        assert r["value"] == pytest.approx(ref, rel=1e-9)
        assert contains(r, ref, 1e-9 * ref)


def test_labels_show_every_digit_and_never_round_to_100(poisson_report):
    s, folder = poisson_report
    labels = [r["label"] for r in s["var"]]
    assert labels == ["VaR 50%", "VaR 90%", "VaR 99.5%", "VaR 99.9999%"]
    md = (folder / "summary.md").read_text()
    assert "VaR 99.9999% (EUR)" in md and "TVaR 99.9999% (EUR)" in md
    assert "100%" not in md and "p100" not in md
    # the helpers on their own (the decimal shift of what the user wrote)
    assert level_name(0.999999) == "99.9999%"
    assert level_name(0.9999999999999) == "99.99999999999%"
    assert percentile_name(99.9999) == "p99.9999"
    assert percentile_name(99.99999999) == "p99.99999999"
    assert percentile_name(50.0) == "p50"


def test_retentions_are_numbers_and_json_has_no_float_noise(poisson_report):
    s, folder = poisson_report
    text = (folder / "summary.json").read_text()
    assert [r["retention"] for r in s["stop_loss"]] == [3.0, 6.0, 10.0]
    assert all(isinstance(r["retention"], float) for r in s["stop_loss"])
    # no "5e+06"-style keys: arguments are numbers inside the rows
    assert not re.search(r'"[-+\d.]+(e[-+]?\d+)?"\s*:', text)
    assert json.loads(text)["stop_loss"] == s["stop_loss"]
    # every float written has at most 12 significant digits (JSON_DIGITS) and reads back
    # as itself: re-rounding changes nothing
    floats = [float(t) for t in re.findall(r"-?\d+\.\d+(?:e[-+]?\d+)?|-?\d+e[-+]?\d+", text)]
    assert floats
    for x in floats:
        digits = re.sub(r"e.*$", "", repr(x)).replace("-", "").replace(".", "").strip("0")
        assert len(digits) <= 12, x
        assert round_significant(x) == x


def test_rounding_to_significant_digits_against_fractions():
    # 0.1 + 0.2 = 0.30000000000000004 in binary floating point (IEEE 754, from memory)
    assert dumps({"x": 0.1 + 0.2}, digits=12) == '{\n  "x": 0.3\n}'
    for x in (2 / 3, math.pi * 1e7, 1 / 7e-5, 5e-324, 1.5e308):
        down = round_significant(x, 12, "down")
        up = round_significant(x, 12, "up")
        # outward rounding: down <= x <= up, checked in exact rationals (fractions)
        assert Fraction(down) <= Fraction(x) <= Fraction(up)
        assert len(repr(down).split("e")[0].replace(".", "").lstrip("0")) <= 13
    assert number_name(5e6) == "5,000,000" and number_name(2.5) == "2.5"
    assert number_name(1e-300) == "1e-300"


def test_amount_column_of_the_csv_has_no_float_noise(tmp_path):
    spec = write(tmp_path, "c.toml", """
    [claims]
    law = "poisson"
    mean = 2.0
    [severity]
    values = [0.1, 0.2]
    probabilities = [0.5, 0.5]
    [grid]
    step = 0.1
    """)
    code, _, err = run_json(["aggregate", str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    assert code == 0, err
    amounts = [line.split(",")[0] for line in
               (tmp_path / "r" / "aggregate.csv").read_text().splitlines()[1:6]]
    # 3 * 0.1 is 0.30000000000000004 in floats (from memory); the file says 0.3
    assert amounts == ["0", "0.1", "0.2", "0.3", "0.4"]


# ------------------------------------------------------------------- refused rows flagged


SHORT_GRID = POISSON_UNIT.replace("step = 1.0", "step = 1.0\npoints = 12")


def test_a_quantile_beyond_the_grid_is_refused_on_its_own_row(tmp_path):
    # Poisson(4) on 12 points holds P(N <= 11) = 0.99908 (scipy.stats.poisson.cdf): VaR 99.5%
    # is on the grid (ppf 9), VaR 99.9999% is not
    assert stats.poisson(4.0).cdf(11) < 0.999999 < 1
    spec = write(tmp_path, "short.toml", SHORT_GRID)
    out = tmp_path / "r"
    code, s, err = run_json(["aggregate", str(spec), "-o", str(out), "--json", "--quiet"])
    assert code == 0, err
    far = row(s["var"], "level", 0.999999)
    assert far["refused"] is True and far["value"] is None and far["reason"]
    near = row(s["var"], "level", 0.995)
    assert near["refused"] is False and near["value"] == stats.poisson(4.0).ppf(0.995)
    md = (out / "summary.md").read_text()
    line = next(x for x in md.splitlines() if x.startswith("| VaR 99.9999%"))
    assert "| refused |" in line and "REFUSED" in line
    assert "REFUSED" not in next(x for x in md.splitlines() if x.startswith("| VaR 99.5%"))
    csv_rows = (out / "measures.csv").read_text().splitlines()
    assert csv_rows[0] == "measure,label,argument,value,low,high,refused,reason"
    far_csv = next(x for x in csv_rows if x.startswith("var,VaR 99.9999%,"))
    assert ",true," in far_csv
    code, _, _ = run_json(["aggregate", str(spec), "-o", str(out), "--quiet"])
    assert code == 0


# ------------------------------------------------------- delays vs exact fractions


def exact_law(values, probs):
    return {v: Fraction(p) for v, p in zip(values, probs, strict=True)}


def test_delays_measures_against_exact_enumeration(tmp_path):
    spec = write(tmp_path, "net.toml", """
    unit = "ms"
    [grid]
    step = 1.0
    [report]
    percentiles = [50, 90, 99.9999]
    deadlines = [4.0, 6.0, 7.0]
    [network]
    in_sequence = ["a", "both"]
    [stage.a]
    values = [1, 2, 3]
    probabilities = [0.5, 0.25, 0.25]
    [stage.both]
    all_of = ["b", "c"]
    [stage.b]
    values = [1, 3]
    probabilities = [0.5, 0.5]
    [stage.c]
    values = [2, 4]
    probabilities = [0.75, 0.25]
    """)
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r"), "--json",
                             "--quiet"])
    assert code == 0, err
    # exact enumeration with fractions: a + max(b, c) over independent draws (definition)
    a = exact_law([1, 2, 3], ["1/2", "1/4", "1/4"])
    b = exact_law([1, 3], ["1/2", "1/2"])
    c = exact_law([2, 4], ["3/4", "1/4"])
    total: dict[int, Fraction] = {}
    for (x, px), (y, py), (z, pz) in product(a.items(), b.items(), c.items()):
        t = x + max(y, z)
        total[t] = total.get(t, Fraction(0)) + px * py * pz
    assert sum(total.values()) == 1
    mean = sum(t * p for t, p in total.items())
    assert s["mean"]["value"] == pytest.approx(float(mean), rel=1e-12)
    assert contains(s["mean"], float(mean), 1e-12)
    for deadline in (4, 6, 7):
        miss = sum(p for t, p in total.items() if t > deadline)
        r = row(s["miss_probability"], "deadline", float(deadline))
        assert r["label"] == f"P(delay > {deadline} ms)"
        assert r["value"] == pytest.approx(float(miss), abs=1e-15)
        assert contains(r, float(miss), 1e-15)
    for q in (50, 90, 99.9999):
        # lower quantile min{t : F(t) >= q/100} from the exact cdf
        cum, ref = Fraction(0), None
        for t in sorted(total):
            cum += total[t]
            if cum >= Fraction(str(q)) / 100:
                ref = t
                break
        r = row(s["percentiles"], "percentile", q)
        assert r["label"] == percentile_name(q) and r["value"] == ref and contains(r, ref)
    assert row(s["percentiles"], "percentile", 99.9999)["label"] == "p99.9999"


# ------------------------------------------------------- refusals write nothing (issue 16)


SEVERITY_EXPON = """
[claims]
law = "poisson"
mean = {mean}
[severity]
law = "expon"
params = {{ scale = 1.0 }}
[grid]
step = {step}
"""

BEYOND_GRID = [
    (SEVERITY_EXPON.format(mean=3.0, step="1e-300"), "grid.step"),
    (SEVERITY_EXPON.format(mean=1e9, step="1.0"), "grid.step"),
    ("[claims]\nlaw = \"poisson\"\nmean = 3.0\n[severity]\nvalues = [1.0, 2.0]\n"
     "counts = [1e308, 1e308]\n[grid]\nstep = 1.0\n", "severity.counts"),
]


@pytest.mark.parametrize(("text", "key"), BEYOND_GRID)
def test_all_mass_beyond_the_grid_is_refused_and_nothing_written(tmp_path, text, key):
    spec = write(tmp_path, "beyond.toml", text)
    out = tmp_path / "r"
    code, _, err = run_json(["aggregate", str(spec), "-o", str(out), "--quiet"])
    assert code == 2
    assert f"key '{key}'" in err and "probability" in err and "nothing was written" in err
    assert "Traceback" not in err
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["beyond.toml"]


def test_delays_stage_with_overflowing_counts_is_refused(tmp_path):
    spec = write(tmp_path, "d.toml", """
    [grid]
    step = 1.0
    [network]
    in_sequence = ["a"]
    [stage.a]
    values = [1.0, 2.0]
    counts = [1e308, 1e308]
    """)
    code, _, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    assert code == 2 and "key 'stage.a.counts'" in err
    assert not (tmp_path / "r").exists()


@pytest.mark.parametrize("command", ["aggregate", "delays"])
def test_subnormal_grid_step_is_refused_by_name(tmp_path, command):
    # robustness campaign (seed 132): step = 5e-324 in a delays spec ended in "float division by
    # zero" when the coarse-step check halved it to 0.  The smallest normal double is 2^-1022
    # (IEEE 754-2008, binary64); below it rounding is no longer relative
    text = (SEVERITY_EXPON.format(mean=3.0, step="5e-324") if command == "aggregate" else
            "[grid]\nstep = 5e-324\n[network]\nin_sequence = [\"a\"]\n[stage.a]\n"
            "law = \"gamma\"\nparams = { a = 4.0, scale = 2.5 }\n")
    spec = write(tmp_path, "tiny.toml", text)
    code, _, err = run_json([command, str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    assert code == 2 and "key 'grid.step'" in err and "at least" in err and "5e-324" in err
    assert "division" not in err and not (tmp_path / "r").exists()


# --------------------------------------------------------------------------- figures


def test_amount_ticks_read_as_millions():
    # tick wording: common practice, no source
    assert plots.amount_text(1e7, 8e7) == "10m"
    assert plots.amount_text(2.5e6, 8e7) == "2.5m"
    assert plots.amount_text(0.0, 8e7) == "0"
    assert plots.amount_text(2e10, 5e10) == "20bn"
    assert plots.amount_text(250_000.0, 9e5) == "250,000"
    assert plots.amount_text(250_000.0, 2e6) == "0.25m"
    assert plots.amount_text(1_000_000.0, 2e6) == "1m"
    assert plots.amount_text(0.5, 3.0) == "0.5"


def test_atoms_are_found_at_zero_and_at_a_limit():
    # a compound law with P(S = 0) = e^-1 (Poisson(1) claim count, scipy) and a cap atom
    pmf = np.full(50, 0.01)
    pmf[0] = stats.poisson(1.0).pmf(0)
    pmf[-1] = 0.2
    assert list(plots.find_atoms(pmf)) == [0, 49]
    assert list(plots.find_atoms(np.full(10, 0.1))) == []


def test_report_figure_is_a_png(poisson_report):
    _, folder = poisson_report
    assert (folder / "aggregate.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


# ------------------------------------------------------------------ the caution, everywhere

DELAYS_SMALL = """
unit = "ms"
[grid]
step = 1.0
[report]
deadlines = [3.0]
[network]
in_sequence = ["a", "a"]
[stage.a]
values = [1, 2]
probabilities = [0.5, 0.5]
"""


@pytest.mark.parametrize(("command", "text", "practice"),
                         [("aggregate", POISSON_UNIT, "actuarial"),
                          ("delays", DELAYS_SMALL, "engineering")])
def test_every_report_output_carries_the_caution(tmp_path, command, text, practice):
    spec = write(tmp_path, "s.toml", text)
    out = tmp_path / "r"
    code, _, err = run_json([command, str(spec), "-o", str(out), "--quiet"])
    assert code == 0, err
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main([command, str(spec), "-o", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    for where in (re.sub(r"\s+", " ", buf.getvalue()),
                  (out / "summary.md").read_text(), " ".join(summary["caution"])):
        assert "model output, not advice" in where
        assert "local regulation and codes" in where
        assert f"licensed {practice} practice" in where


def _panels(lat, **options):
    fig = plots.distribution_panels(lat, title="t", quantity="loss", unit="EUR", **options)
    fig.canvas.draw()
    return fig


def _close(fig) -> None:
    import matplotlib.pyplot as plt

    plt.close(fig)


def test_exceedance_curve_stops_at_the_grid_end_and_says_so():
    # an exponential-like pmf cut after 200 points, 1e-3 of the mass beyond (invented shape)
    from polyconv.dist import Lattice

    k = np.arange(200)
    pmf = stats.geom(0.035).pmf(k + 1)
    pmf *= (1 - 1e-3) / pmf.sum()
    lat = Lattice(pmf, step=5e4)
    fig = _panels(lat)
    try:
        ax = fig.axes[1]
        end = float(lat.values[-1])
        curve = [ln for ln in ax.lines if ln.get_label() == "probability of exceeding x"]
        assert curve
        xs = np.asarray(curve[0].get_xdata(), dtype=float)
        ys = np.asarray(curve[0].get_ydata(), dtype=float)
        assert np.nanmax(xs[np.isfinite(ys)]) <= end  # no data drawn past the grid
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert any(t.startswith("end of the grid (9,950,000 EUR)") for t in labels)
        assert ax.get_xlim()[1] <= end * 1.04
        # plain words in the legends: no formula, no "trust floor"
        for text in labels + [t.get_text() for t in fig.axes[0].get_legend().get_texts()]:
            assert "P(" not in text and "trust floor" not in text
        # amounts reaching 10m read as millions (common practice, no source)
        ticks = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
        assert ticks and all(t == "0" or t.endswith("m") for t in ticks), ticks
    finally:
        _close(fig)


def test_an_atom_at_zero_is_drawn_and_labelled():
    from polyconv.dist import Lattice

    # P(S = 0) = e^-0.7 for a Poisson(0.7) count (scipy.stats.poisson), the rest smooth
    p0 = float(stats.poisson(0.7).pmf(0))
    rest = stats.gamma(3.0, scale=40.0).pdf(np.arange(1, 1000) + 0.5)
    rest *= (1 - p0) / rest.sum()
    lat = Lattice(np.concatenate(([p0], rest)), step=1.0)
    fig = _panels(lat)
    try:
        texts = [t.get_text() for t in fig.axes[0].texts]
        assert any(t.startswith(f"{p0:.2g} at 0 EUR") for t in texts), texts
        # the atom is far above the curve: its stem reaches the top, marked off scale
        assert any("off scale" in t for t in texts)
    finally:
        _close(fig)


def test_printed_ranges_contain_the_certified_range_and_stay_tight():
    from polyconv.cli.bounded_rows import range_text

    cases = [(0.999999999999, 1.00000000001, False), (390063.098643, 390063.100575, False),
             (2.0718608674e-2, 2.0718608678e-2, True), (139655.91, math.inf, False)]
    for low, high, prob in cases:
        text = range_text(low, high, prob)
        lo_text, hi_text = text.strip("[]").split(", ")
        lo = Fraction(lo_text.replace(",", ""))
        hi = math.inf if hi_text == "inf" else Fraction(hi_text.replace(",", ""))
        # outward: the printed range holds the certified one (exact rationals, fractions)
        assert lo <= Fraction(low) and (hi == math.inf or hi >= Fraction(high)), text
        if math.isfinite(high):
            assert hi - lo <= 2 * (Fraction(high) - Fraction(low)), text
    assert range_text(5.0, 5.0, False) == "exact on this grid"
