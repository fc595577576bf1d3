"""``polyconv delays`` with measured samples, quorums, retries, hedges, units, shared stages,
sensitivity and reliability outputs, checked against numbers computed here (numpy, closed
forms, the library run directly).  Scenarios are invented."""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest

from polyconv.cli.delays_eval import compute
from polyconv.cli.delays_spec import parse
from polyconv.cli.main import main
from polyconv.cli.sample_files import SampleFileError, read_samples
from polyconv.cli.spec import load_spec
from polyconv.dist import Lattice, series
from polyconv.dist.samples import dkw_epsilon


def run_json(args, capsys):
    code = main(args + ["--json", "--quiet"])
    out, err = capsys.readouterr()
    return code, (json.loads(out) if code == 0 else None), err


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_samples_file_csv_column_band_and_support(tmp_path, capsys):
    rng = np.random.default_rng(2)
    x = np.round(rng.exponential(20.0, 50_000), 3)
    lines = ["id,latency_ms"] + [f"{i},{v}" for i, v in enumerate(x)]
    write(tmp_path, "db.csv", "\n".join(lines) + "\n")
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 0.5
[report]
percentiles = [50, 99, 99.999]
deadlines = [5000.0]
confidence = 0.9
[network]
in_sequence = ["db"]
[stage.db]
samples_file = "db.csv"
column = "latency_ms"
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    eps = dkw_epsilon(50_000, 0.1)  # one measured stage: alpha = 1 - confidence
    # the miss probability past every sample is a bound [0, eps], not 0 (Massart's band)
    miss = s["miss_probability"][0]
    assert miss["low"] == 0 and miss["high"] == pytest.approx(eps, rel=1e-3)
    sup = {r["percentile"]: r for r in s["sample_support"]}
    assert sup[99]["samples_beyond"] == 500 and sup[99]["supported"]
    assert sup[99.999]["samples_beyond"] == 0 and not sup[99.999]["supported"]
    # the stage's own percentiles say how many samples back them: floor(n (1 - q)), by hand
    db = s["measured_stages"]["db"]
    assert db["samples_beyond_p50"] == 25_000 and db["samples_beyond_p99"] == 500
    # the median is the binned empirical median (numpy reference, nearest rule)
    med = s["percentiles"][0]["value"]
    k = np.floor(x / 0.5 + 0.5)
    assert med == 0.5 * np.sort(k)[math.ceil(0.5 * x.size) - 1]


def test_inline_samples_and_counted_values_carry_the_dkw_band(tmp_path, capsys):
    x = [31, 35, 29, 44, 38, 41, 33, 30, 52, 36]
    spec = write(tmp_path, "s.toml", f"""unit = "ms"
[grid]
step = 1.0
[report]
deadlines = [60.0]
confidence = 0.9
[network]
in_sequence = ["pick", "pack", "label"]
[stage.pick]
samples = {x}
[stage.pack]
values = [2, 3, 5]
counts = [70, 20, 10]
[stage.label]
values = [1, 2]
probabilities = [0.5, 0.5]
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    # Massart (1990) at alpha = 0.1 split over the two measured stages (Bonferroni)
    bands = {n: m["band"] for n, m in s["measured_stages"].items()}
    assert bands == {"pick": pytest.approx(dkw_epsilon(10, 0.05), rel=1e-12),
                     "pack": pytest.approx(dkw_epsilon(100, 0.05), rel=1e-12)}
    # past the largest possible total (52 + 5 + 2) the data say only P <= the bands' sum
    miss = s["miss_probability"][0]
    assert miss["low"] == 0 and miss["high"] >= dkw_epsilon(10, 0.05) + dkw_epsilon(100, 0.05)


def test_microsecond_stages_on_a_millisecond_step_warn_naming_the_stage(tmp_path, capsys):
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 1.0
[network]
in_sequence = ["parse", "cache", "probe"]
[stage.parse]
law = "gamma"
params = { a = 4.0, scale = 2.5 }
[stage.cache]
law = "gamma"
params = { a = 3.0, scale = 20.0 }
unit = "us"
[stage.probe]
samples = [41, 52, 47, 60, 39, 44, 58, 50, 45, 49]
unit = "us"
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    notes = "\n".join(s["notes"])
    assert "stage cache: step 1000 is too coarse" in notes and "(in us:" in notes
    assert "stage probe: step 1 is much coarser than the samples' spread" in notes
    assert "stage parse" not in notes  # a 10 ms gamma on a 1 ms step is fine


def test_stage_scale_is_the_delay_multiplied(tmp_path, capsys):
    base = """unit = "ms"
[grid]
step = 1.0
[report]
percentiles = [50, 99]
[network]
in_sequence = ["a", "b"]
[stage.a]
values = [10, 20, 40]
probabilities = [0.5, 0.3, 0.2]
{scale_a}
[stage.b]
law = "gamma"
params = {{ a = 3.0, scale = 10.0 }}
{scale_b}
"""
    spec = write(tmp_path, "s.toml", base.format(scale_a="scale = 0.5", scale_b="scale = 2.0"))
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    # reference: a x 0.5 = values 5, 10, 20; b x 2 = gamma(3, scale 20) (scaling a gamma law)
    ref = write(tmp_path, "r.toml", base.format(scale_a="", scale_b="").replace(
        "values = [10, 20, 40]", "values = [5, 10, 20]").replace("scale = 10.0", "scale = 20.0"))
    code, r, err = run_json(["delays", str(ref), "-o", str(tmp_path / "r2")], capsys)
    assert code == 0, err
    assert [x["value"] for x in s["percentiles"]] == [x["value"] for x in r["percentiles"]]
    assert s["mean"]["value"] == pytest.approx(r["mean"]["value"], rel=1e-12)


def test_histogram_and_units_convert_onto_the_grid(tmp_path, capsys):
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 1.0
[network]
in_sequence = ["cache", "net"]
[stage.cache]
histogram = { edges = [0, 1000, 2000, 4000], counts = [6, 3, 1] }
unit = "us"
[stage.net]
values = [0.002, 0.004]
probabilities = [0.5, 0.5]
unit = "s"
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    # by hand: cache at 1, 2, 4 ms (upper edges, "up") with 0.6, 0.3, 0.1; net 2 or 4 ms
    # with 0.5 each: P(total <= 3) = 0.3, P(<= 4) = 0.45, P(<= 5) = 0.75, so p50 = 5 ms
    assert s["percentiles"][0]["value"] == 5.0
    assert s["measured_stages"]["cache"]["samples"] == 10


def test_quorum_shared_stages_equals_k_of(tmp_path, capsys):
    base = """unit = "ms"
[grid]
step = 1.0
[report]
percentiles = [50, 90, 99]
[stage.a]
law = "gamma"
params = { a = 2.0, scale = 10.0 }
[stage.b]
law = "lognorm"
params = { s = 0.5, scale = 20.0 }
[stage.c]
law = "expon"
params = { scale = 15.0 }
"""
    nested = base + """[network]
first_of = ["ab", "ac", "bc"]
[stage.ab]
all_of = ["a", "b"]
[stage.ac]
all_of = ["a", "c"]
[stage.bc]
all_of = ["b", "c"]
"""
    quorum = base + """[network]
k_of = ["a", "b", "c"]
k = 2
"""
    c1, s1, e1 = run_json(["delays", str(write(tmp_path, "n.toml", nested)), "-o",
                           str(tmp_path / "n")], capsys)
    c2, s2, e2 = run_json(["delays", str(write(tmp_path, "q.toml", quorum)), "-o",
                           str(tmp_path / "q")], capsys)
    assert c1 == 0 and c2 == 0, e1 + e2
    # one draw per stage: the nested form is the 2-of-3 quorum exactly (David & Nagaraja)
    for r1, r2 in zip(s1["percentiles"], s2["percentiles"],
                      strict=True):
        assert r1["value"] == r2["value"]
    assert s1["shared_stages"] == {"a": "events", "b": "events", "c": "events"}


def test_retry_and_hedge_blocks(tmp_path, capsys):
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 1.0
[network]
in_sequence = ["call"]
[stage.call]
retry = "attempt"
timeout = 3.0
retries = 2
backoff = [1.0, 2.0]
[stage.attempt]
values = [0, 1, 2, 3, 4, 5, 6]
probabilities = [0.1, 0.3, 0.2, 0.15, 0.1, 0.1, 0.05]
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    f = s["retries_and_hedges"]["call"]
    assert f["p_all_time_out"]["value"] == pytest.approx(0.25**3, rel=1e-12)  # geometric
    assert f["expected_attempts"] == pytest.approx((1 - 0.25**3) / 0.75, rel=1e-12)
    hedged = spec.read_text().replace('retry = "attempt"\ntimeout = 3.0\nretries = 2\n'
                                      'backoff = [1.0, 2.0]', 'hedge = "attempt"\nafter = 2.0')
    code, s, err = run_json(["delays", str(write(tmp_path, "h.toml", hedged)), "-o",
                             str(tmp_path / "h")], capsys)
    assert code == 0, err
    assert s["retries_and_hedges"]["call"]["extra_requests"]["value"] == pytest.approx(0.4)


def test_sensitivity_target_and_reliability(tmp_path, capsys):
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 1.0
[report]
percentiles = [99]
mission_times = [50.0]
sensitivity = { speedup_percent = 20, percentiles = [99] }
target = { stage = "b", percentile = 99, below = 150.0 }
[network]
in_sequence = ["a", "b"]
[stage.a]
law = "gamma"
params = { a = 3.0, scale = 10.0 }
[stage.b]
law = "lognorm"
params = { s = 0.5, scale = 50.0 }
""")
    code, s, err = run_json(["delays", str(spec), "-o", str(tmp_path / "r")], capsys)
    assert code == 0, err
    eff = {(e["stage"], e["level"]): e for e in s["sensitivity"]}
    res = compute(parse(load_spec(spec)))  # reference: the network re-run with b scaled
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a, b = res.stages["a"], res.stages["b"]
        assert eff[("b", 0.99)]["faster"] == series(a, b.scaled(0.8)).quantile(0.99)
        assert eff[("b", 0.99)]["removed"] == a.quantile(0.99)
        t = s["target"]
        assert t["reachable"] and t["quantile"] < 150.0
        assert series(a, b.scaled(t["factor"])).quantile(0.99) < 150.0
        assert s["reliability"][0]["value"] == pytest.approx(res.total.sf(50.0), rel=1e-6)


def test_shared_stage_too_costly_is_refused_naming_it(tmp_path, capsys):
    spec = write(tmp_path, "s.toml", """unit = "ms"
[grid]
step = 0.01
[network]
in_sequence = ["db", "after_db"]
[stage.after_db]
all_of = ["db", "cache"]
[stage.db]
law = "gamma"
params = { a = 3.0, scale = 20.0 }
[stage.cache]
law = "expon"
params = { scale = 5.0 }
""")
    code = main(["delays", str(spec), "-o", str(tmp_path / "r"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "'db'" in err and "shared" in err
    assert not (tmp_path / "r").exists()


def test_sample_file_forms_and_errors(tmp_path):
    x = np.array([1.5, 2.25, 30.0])
    np.save(tmp_path / "a.npy", x)
    (tmp_path / "a.txt").write_text("1.5 2.25\n30\n")
    (tmp_path / "a.csv").write_text("t,host\n1.5,a\n2.25,b\n30,c\n")
    for name, col in (("a.npy", None), ("a.txt", None), ("a.csv", "t"), ("a.csv", 0)):
        assert np.array_equal(read_samples(tmp_path / name, column=col), x)
    with pytest.raises(SampleFileError, match="no column 'latency'"):
        read_samples(tmp_path / "a.csv", column="latency")
    with pytest.raises(SampleFileError, match="cannot read"):
        read_samples(tmp_path / "missing.csv")


def test_compiled_parser_equals_python_float(tmp_path, monkeypatch):
    from polyconv.cli import sample_files
    monkeypatch.setattr(sample_files, "KERNEL_BYTES", 0)  # force the compiled kernel
    rng = np.random.default_rng(4)
    v = rng.lognormal(3.0, 1.5, 3000)
    texts = [f"{x:.{d}f}" for x, d in zip(v, rng.integers(0, 7, v.size), strict=True)]
    texts += ["1e3", "2.5E-2", "-0.000125", "+7", "123456789012345678"]
    (tmp_path / "v.csv").write_text("host,ms\n" + "".join(f"h{i},{t}\n"
                                                         for i, t in enumerate(texts)))
    (tmp_path / "v.txt").write_text(" ".join(texts) + "\n")
    ref = np.array([float(t) for t in texts])  # reference: Python's correctly rounded float()
    pytest.importorskip("numba")
    raw = np.frombuffer(" ".join(texts[:-1]).encode(), dtype=np.uint8)  # 18 digits: fallback
    got = sample_files.kernel_parse(raw, None, 0, 1)  # the kernel itself ran (no fallback)
    assert got is not None and np.array_equal(got, ref[:-1])
    assert np.array_equal(read_samples(tmp_path / "v.csv", column="ms"), ref)
    assert np.array_equal(read_samples(tmp_path / "v.txt"), ref)
    (tmp_path / "gap.csv").write_text("host,ms\na,1.5\nb\n")
    with pytest.raises(SampleFileError, match="gap.csv"):  # loadtxt names what is wrong
        read_samples(tmp_path / "gap.csv", column="ms")


ADVERSARIAL = [
    "4.35", "0.1", "0.3", "2.675", "1.015", "8.325", "0.000000000000000000001", "1e22",
    "1e23", "9007199254740992", "9007199254740993", "9007199254740991.5", "123456789012345678",
    "1234567890123456789", "0.1234567890123456789", "000123.4500", "-0", "-0.0", "+0.0", ".5",
    "5.", "1.7976931348623157e308", "5e-324", "2.2250738585072014e-308", "3.0e-22", "7e-23",
    "4.9406564584124654e-324", "1e-400", "0.30000000000000004", "9.999999999999999e22",
    "1.00000000000000011102230246251565404236316680908203125", "2.5E+21", "1E0", "-12.5e-3",
]
"""Strings where a naive digit parser rounds wrongly (double rounding, more than 2^53, powers of
ten past 10^22, subnormals, leading zeros, signs, a lone dot side): from memory of the classic
decimal-to-binary cases (Clinger 1990; Python's float() is the reference, correctly rounded)."""


def test_compiled_parser_adversarial_strings(tmp_path, monkeypatch):
    from polyconv.cli import sample_files
    monkeypatch.setattr(sample_files, "KERNEL_BYTES", 0)
    pytest.importorskip("numba")
    rng = np.random.default_rng(11)
    mids = [repr(float(np.nextafter(x, np.inf)) + 0.0) for x in rng.random(200) * 1000]
    plain = [f"{x:.{d}f}" for x, d in zip(rng.lognormal(3, 2, 300), rng.integers(0, 9, 300),
                                             strict=True)]
    texts = ADVERSARIAL + mids + [f"{x:.17g}" for x in rng.lognormal(0, 8, 500)] + plain
    ref = np.array([float(t) for t in texts])  # reference: Python's float()
    (tmp_path / "adv.csv").write_text("id,ms\n" + "".join(f"{i},{t}\r\n"
                                                          for i, t in enumerate(texts)))
    got = read_samples(tmp_path / "adv.csv", column="ms")
    assert got.tobytes() == ref.tobytes()  # bit for bit, -0.0 included
    taken = set()
    for t in texts:  # each string alone: the kernel takes it (same bits) or hands it back
        out = sample_files.kernel_parse(np.frombuffer(t.encode(), dtype=np.uint8), None, 0, 1)
        if out is not None:
            taken.add(t)
            assert out.tobytes() == np.array([float(t)]).tobytes(), t
    assert set(plain) <= taken  # plain decimals all go through the exact fast path
    assert read_samples_text(tmp_path, texts).tobytes() == ref.tobytes()


def read_samples_text(folder, texts):
    (folder / "adv.txt").write_text("\n".join(texts) + "\n")
    return read_samples(folder / "adv.txt")


def test_kernel_load_defers_the_blas_probe(tmp_path):
    """Loading the parser kernel does not import scipy.linalg, and leaves numba's BLAS flag as
    numba sets it (True with scipy installed), so later kernels still use BLAS."""
    pytest.importorskip("numba")
    import os
    import subprocess
    import sys
    from pathlib import Path
    code = ("import sys, numpy as np\n"
            "from polyconv.cli import sample_files\n"
            "sample_files.KERNEL_BYTES = 0\n"
            "v = sample_files.kernel_parse(np.frombuffer(b'1.5 2', dtype=np.uint8), None, 0, 1)\n"
            "import numba.np.arraymath as a\n"
            "print(v.tolist(), 'scipy.linalg' in sys.modules, a._HAVE_BLAS)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=str(tmp_path),
                         env={**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[2])})
    assert out.stdout.split() == ["[1.5,", "2.0]", "False", "True"]


def test_figure_log_axis_when_heavy_and_markers_outside_not_in_legend():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from scipy import stats

    from polyconv.cli.delays_figure import delays_panels
    heavy = Lattice.from_law(stats.lognorm(2.0, scale=10.0), step=1.0, size=200_000)
    light = Lattice.from_law(stats.gamma(20.0, scale=1.0), step=1.0, size=200)
    fig = delays_panels(heavy, title="t", unit="ms", deadlines=[(1e9, 0.0, 0.0, 0.0)],
                        markers=[("p50", 10.0)], stages={"x": light})
    ax1, ax2 = fig.axes[:2]
    # p99.9 / p50 of a lognormal(sigma 2) = exp(2 * 3.09) ~ 480 > 8: log time axis
    assert ax1.get_xscale() == "log" and ax2.get_xscale() == "log"
    labels = [t.get_text() for t in ax2.get_legend().get_texts()]
    assert not any("deadline" in t for t in labels)  # 1e9 ms is outside the plotted range
    assert any(t.startswith("p50") for t in labels)
    assert "stage x" in [t.get_text() for t in ax1.get_legend().get_texts()]
    plt.close(fig)
    fig = delays_panels(light, title="t", unit="ms")
    assert fig.axes[0].get_xscale() == "linear"
    plt.close(fig)
