"""``polyconv aggregate`` with the actuarial spec options (issue 14), each against an outside
reference: closed forms, Panjer's recursion written out here, scipy.stats, scipy.signal's 2-D
convolution, numpy enumeration.  Small grids with tables on the grid, so the lattice is exact
and the references are exact too (the tolerances are rounding)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import signal, special, stats

from polyconv.cli.main import main


def run_json(tmp_path: Path, text: str, capsys, name: str = "spec.toml") -> tuple[dict, Path]:
    spec = tmp_path / name
    spec.write_text(text, encoding="utf-8")
    out = tmp_path / (name + "-report")
    assert main(["aggregate", str(spec), "-o", str(out), "--json", "--quiet"]) == 0
    return json.loads(capsys.readouterr().out), out


def csv_pmf(out: Path) -> np.ndarray:
    rows = (out / "aggregate.csv").read_text().splitlines()[1:]
    return np.array([float(r.split(",")[1]) for r in rows])


def same_pmf(got: np.ndarray, ref: np.ndarray, atol: float) -> None:
    """``got`` (the CSV, its negligible tail cut) equals ``ref`` on its points, and ``ref``
    beyond it holds no more than ``atol`` per point."""
    n = min(got.size, ref.size)
    np.testing.assert_allclose(got[:n], ref[:n], atol=atol)
    assert float(np.max(ref[n:], initial=0.0)) <= atol and float(np.max(got[n:], initial=0.0)) \
        <= atol


def panjer_poisson(lam: float, f: np.ndarray, size: int) -> np.ndarray:
    """Compound Poisson pmf by Panjer's recursion (Panjer 1981; a = 0, b = lam), by hand."""
    f = np.concatenate([f, np.zeros(max(0, size - f.size))])
    g = np.zeros(size)
    g[0] = math.exp(lam * (f[0] - 1))
    for k in range(1, size):
        j = np.arange(1, k + 1)
        g[k] = lam / k * float(np.dot(j * f[j], g[k - j]))
    return g


def lower_quantile(pmf: np.ndarray, values: np.ndarray, p: float) -> float:
    return float(values[np.searchsorted(np.cumsum(pmf), p - 1e-12)])


def at_level(rows: list[dict], p: float) -> dict:
    return next(r for r in rows if r["level"] == p)


# -------------------------------------------------------------------------- reinsurance

PROGRAMME = """
currency = "EUR"
[claims]
law = "poisson"
mean = 1.2
[severity]
values = [1, 2, 4]
probabilities = [0.5, 0.3, 0.2]
[grid]
step = 1.0
points = 200
[reinsurance]
quota_share = 0.25
[reinsurance.xol]
deductible = 1.0
limit = 2.0
reinstatements = 1
rates = [0.5]
aggregate_deductible = 1.0
aggregate_limit = 3.0
[report]
levels = [0.9, 0.99]
return_periods = []
"""


def programme_reference(lam=1.2, values=(1, 2, 4), probs=(0.5, 0.3, 0.2), d=1, w=2, aad=1,
                        al=3, nmax=60):
    """Joint law of (retained, layer) by summing P(N = n) f^{*n} with scipy.signal.convolve2d
    (the compound's definition), then gross, recovery C = min(max(L - AAD, 0), AL), net."""
    size = 4 * 40
    f = np.zeros((5, 5))
    for x, p in zip(values, probs, strict=True):
        c = min(max(x - d, 0), w)
        f[x - c, c] += p
    joint = np.zeros((size, size))
    power = np.zeros((size, size))
    power[0, 0] = 1.0
    for n in range(nmax):
        joint += stats.poisson.pmf(n, lam) * power
        power = signal.convolve2d(power, f)[:size, :size]
    r, layer = np.meshgrid(np.arange(size), np.arange(size), indexing="ij")
    gross = r + layer
    rec = np.clip(layer - aad, 0, al)
    net = gross - rec
    def law(v):
        out = np.zeros(2 * size)
        np.add.at(out, v.ravel(), joint.ravel())
        return out
    return law(gross), law(rec), law(net)


def test_programme_terms_against_a_direct_two_dimensional_sum(tmp_path, capsys):
    s, out = run_json(tmp_path, PROGRAMME, capsys)
    g, c, n = programme_reference()
    x = np.arange(g.size)
    rein = s["reinsurance"]["the line"]
    assert rein["gross_mean"] == pytest.approx(1.2 * 1.9, rel=1e-11)  # lam E[X], closed form
    assert rein["expected_recovery"] == pytest.approx(float(x @ c), rel=1e-10)
    # pure premium with reinstatements, pro rata as to amount (common practice, no source):
    # P = E[C] / (1 + 0.5 E[min(C, W)] / W); E[RP] = P 0.5 E[min(C, W)] / W
    used = float(np.minimum(x, 2) @ c) / 2
    prem = float(x @ c) / (1 + 0.5 * used)
    assert rein["premium"] == pytest.approx(prem, rel=1e-10)
    assert rein["expected_reinstatement_premium"] == pytest.approx(prem * 0.5 * used, rel=1e-10)
    # net of XoL then 75% retained by the quota share: the net law is 0.75 (G - C)
    assert s["net_mean"]["value"] == pytest.approx(0.75 * float(x @ n), rel=1e-10)
    assert rein["quota_share_ceded_mean"] == pytest.approx(0.25 * float(x @ n), rel=1e-10)
    assert s["errors"]["l1"] < 1e-9
    v99 = at_level(s["net_var"], 0.99)["value"]
    # VaR of 0.75 (G - C): 0.75 times the quantile of G - C (a positive scaling), within one
    # grid step (the scaled law is put back on the step keeping its mass and mean)
    assert abs(v99 - 0.75 * lower_quantile(n, x, 0.99)) <= 1.0
    np.testing.assert_allclose(csv_pmf(out)[:40], g[:40], atol=1e-13)
    md = (out / "summary.md").read_text()
    assert "Reinsurance (the line)" in md and "model output, not advice" in md
    # mean checks from the table itself (by hand): E[X] = 1.9; the layer 2 xs 1 per claim:
    # E[min((X - 1)+, 2)] = 0.3 x 1 + 0.2 x 2 = 0.7; E[N] E[X] = 1.2 x 1.9
    checks = [(c["law"], c["lattice"]) for c in s["mean_checks"]]
    np.testing.assert_allclose(checks, [(1.9, 1.9), (0.7, 0.7), (2.28, 2.28)], rtol=1e-11)


def _powers_sum(f: np.ndarray, weights: np.ndarray, size: int) -> np.ndarray:
    """``sum_n weights[n] f^{*n}`` on ``size x size`` (scipy.signal.convolve2d powers)."""
    out = np.zeros((size, size))
    power = np.zeros((size, size))
    power[0, 0] = 1.0
    for w in weights:
        out += w * power
        power = signal.convolve2d(power, f)[:size, :size]
    return out


@pytest.mark.parametrize("basis", ["per-risk", "per-occurrence"])
def test_clustered_claims_against_a_direct_two_dimensional_sum(tmp_path, capsys, basis):
    # occurrences Poisson(0.9), claims per occurrence zero-truncated Poisson(0.7), amounts
    # 1, 2, 4; layer 2 xs 1 on each claim (per risk) or on each occurrence's total, AAL 3
    text = PROGRAMME.replace("quota_share = 0.25\n", "").replace(
        'mean = 1.2', 'mean = 0.9\nper_occurrence = { law = "zero-truncated", base = '
        '{ law = "poisson", mean = 0.7 } }').replace(
        "aggregate_deductible = 1.0", f'aggregate_deductible = 0.0\nbasis = "{basis}"')
    s, _ = run_json(tmp_path, text, capsys)
    size = 90
    k = np.arange(30)
    pk = stats.poisson.pmf(k, 0.7) / (1 - math.exp(-0.7))  # zero-truncated (definition)
    pk[0] = 0.0
    claim = np.zeros(5)
    claim[[1, 2, 4]] = [0.5, 0.3, 0.2]
    if basis == "per-risk":  # joint (retained, ceded) of one claim, then of one occurrence
        f = np.zeros((5, 5))
        for x, p in zip((1, 2, 4), (0.5, 0.3, 0.2), strict=True):
            c = min(max(x - 1, 0), 2)
            f[x - c, c] += p
        occ = _powers_sum(f, pk, size)
    else:  # the occurrence total, then its split
        total = _powers_sum(claim[:, None], pk, size)[:, 0]
        occ = np.zeros((size, size))
        for x in range(size):
            c = min(max(x - 1, 0), 2)
            occ[x - c, c] += total[x]
    joint = _powers_sum(occ, stats.poisson.pmf(np.arange(40), 0.9), size)
    r, layer = np.meshgrid(np.arange(size), np.arange(size), indexing="ij")
    rec = np.clip(layer, 0, 3)
    rein = s["reinsurance"]["the line"]
    assert rein["expected_recovery"] == pytest.approx(float((rec * joint).sum()), rel=1e-9)
    assert rein["net_mean"] == pytest.approx(float(((r + layer - rec) * joint).sum()),
                                             rel=1e-9)
    # E[S] = E[N] E[K] E[X] (Wald twice), the same for both bases
    assert s["mean"]["value"] == pytest.approx(0.9 * 0.7 / (1 - math.exp(-0.7)) * 1.9,
                                               rel=1e-10)


def test_programme_split_contributions_sum_to_the_gross_tvar(tmp_path, capsys):
    s, _ = run_json(tmp_path, PROGRAMME.replace("quota_share = 0.25\n", ""), capsys)
    split = s["reinsurance"]["the line"]["split"]
    g, _, _ = programme_reference()
    x = np.arange(g.size)
    p = 0.99
    v = lower_quantile(g, x, p)
    # Acerbi & Tasche (2002): TVaR = (E[G 1{G > v}] + v (F(v) - p)) / (1 - p)
    tv = (float(x[x > v] @ g[x > v]) + v * (float(g[x <= v].sum()) - p)) / (1 - p)
    assert split["tvar"] == pytest.approx(tv, rel=1e-9)
    assert split["ceded"] + split["net"] == pytest.approx(tv, rel=1e-12)  # Euler identity
    _, _, n = programme_reference()
    for q in (0.9, 0.99):  # net of the XoL without quota share: exact on the grid
        assert at_level(s["net_var"], q)["value"] == lower_quantile(n, x, q)


def test_surplus_share_is_a_quota_share(tmp_path, capsys):
    text = PROGRAMME.replace("quota_share = 0.25", "surplus = { sum_insured = 4.0e6, "
                             "retention = 1.0e6, lines = 2 }")
    s, _ = run_json(tmp_path, text, capsys)
    # surplus share min(lines R, max(V - R, 0)) / V = min(2e6, 3e6) / 4e6 = 0.5 (common practice)
    rein = s["reinsurance"]["the line"]
    assert rein["quota_share"] == pytest.approx(0.5)
    assert rein["quota_share_ceded_mean"] == pytest.approx(rein["net_mean"], rel=1e-12)


# ------------------------------------------------------------------------------- lines

LINES = """
currency = "EUR"
[grid]
step = 2.0
[[lines]]
name = "fine"
claims = { law = "poisson", mean = 1.5 }
severity = { values = [1, 3], probabilities = [0.6, 0.4] }
grid = { step = 1.0, points = 80 }
[[lines]]
name = "coarse"
claims = { law = "poisson", mean = 0.8 }
severity = { values = [2, 6], probabilities = [0.7, 0.3] }
grid = { step = 2.0, points = 40 }
[report]
levels = [0.95]
allocation = 0.95
return_periods = [20]
"""


def _regrid_by_hand(pmf: np.ndarray, h: float, big: float) -> np.ndarray:
    """Linear (mean-keeping) split of each point onto the grid of step ``big`` (definition)."""
    out = np.zeros(int(pmf.size * h / big) + 2)
    for k, p in enumerate(pmf):
        pos = k * h / big
        lo = math.floor(pos)
        out[lo] += p * (1 - (pos - lo))
        out[lo + 1] += p * (pos - lo)
    return out


def test_lines_on_different_steps_are_regridded_and_summed(tmp_path, capsys):
    s, out = run_json(tmp_path, LINES, capsys)
    fine = panjer_poisson(1.5, np.array([0, 0.6, 0, 0.4]), 80)
    coarse = panjer_poisson(0.8, np.array([0, 0.7, 0, 0.3]), 40)  # in units of 2
    total = np.convolve(_regrid_by_hand(fine, 1.0, 2.0), coarse)  # numpy.convolve
    got = csv_pmf(out)
    np.testing.assert_allclose(got, total[:got.size], atol=1e-13)
    assert got.size > 30 and float(total[got.size:].sum()) < 1e-13
    # mean: lam_1 E[X_1] + lam_2 E[X_2] (closed form, re-gridding keeps means)
    assert s["mean"]["value"] == pytest.approx(1.5 * 1.8 + 0.8 * 3.2, rel=1e-12)
    rows = s["lines"]["rows"]
    tvar = next(r for r in rows if r["measure"] == "TVaR 95%")
    assert tvar["diversification"] == pytest.approx(sum(tvar["lines"]) - tvar["total"])
    assert s["regrid"][0]["from_step"] == 1.0 and s["regrid"][0]["to_step"] == 2.0
    # the year's largest claim over both lines: P(M <= x) = prod_i exp(-lam_i (1 - F_i(x)))
    # (Poisson PGFs at the cdfs); 1 in 20: the smallest x with P(M <= x) >= 0.95
    x = np.arange(8)
    f1 = np.where(x >= 3, 1.0, np.where(x >= 1, 0.6, 0.0))
    f2 = np.where(x >= 6, 1.0, np.where(x >= 2, 0.7, 0.0))
    cdf = np.exp(-1.5 * (1 - f1) - 0.8 * (1 - f2))
    assert s["return_periods"][0]["occurrence"] == x[np.searchsorted(cdf, 0.95 - 1e-12)]


def test_allocation_against_enumeration_of_the_two_lines(tmp_path, capsys):
    s, _ = run_json(tmp_path, LINES, capsys)
    a = _regrid_by_hand(panjer_poisson(1.5, np.array([0, 0.6, 0, 0.4]), 80), 1.0, 2.0)[:60]
    b = panjer_poisson(0.8, np.array([0, 0.7, 0, 0.3]), 40)
    joint = np.outer(a, b)  # independence
    i, j = np.meshgrid(np.arange(a.size), np.arange(b.size), indexing="ij")
    tot = i + j
    pmf = np.bincount(tot.ravel(), joint.ravel())
    p = 0.95
    v = int(np.searchsorted(np.cumsum(pmf), p - 1e-12))
    atom = float(pmf[:v + 1].sum()) - p
    # Euler contribution (Tasche 1999, from memory): (E[X_i 1{S > v}] + E[X_i | S = v] atom)/(1-p)
    parts = []
    for x in (i, j):
        tail = float((2.0 * x * joint)[tot > v].sum())
        at = float((2.0 * x * joint)[tot == v].sum()) / float(pmf[v])
        parts.append((tail + at * atom) / (1 - p))
    alloc = s["allocation"]
    np.testing.assert_allclose(alloc["contributions"], parts, rtol=1e-9)
    assert sum(alloc["contributions"]) == pytest.approx(alloc["tvar"], rel=1e-10)


# ---------------------------------------------------------------------------- severities

def _sev_spec(severity: str, step: float = 0.05, points: int = 6000) -> str:
    return f"""
[claims]
law = "poisson"
mean = 2.0
[severity]
{severity}
[grid]
step = {step}
max_points = {points}
rule = "moments"
[report]
levels = [0.9]
return_periods = []
"""


@pytest.mark.parametrize("severity, mean", [
    # splice at 5: 0.9 E[X | X <= 5] (expon(2)) + 0.1 E[X | X > 5] (pareto 3, scale 5: 7.5)
    ('law = "splice"\nthreshold = 5.0\nweight_below = 0.9\n'
     'below = { law = "expon", params = { scale = 2.0 } }\n'
     'above = { law = "pareto", params = { b = 3.0, scale = 5.0 } }\ncensor_at = 200.0',
     # censored at 200: E[min(Y, 200)] = 7.5 - int_200^inf (5/y)^3 dy = 7.5 - 5^3 / (2 200^2)
     0.9 * (2 - 7 * math.exp(-2.5)) / (1 - math.exp(-2.5)) + 0.1 * (7.5 - 125 / 80000)),
    # mixture: weights times the component means (gamma 2 x 1.5, expon 4)
    ('law = "mixture"\ncomponents = [{ weight = 0.25, law = "gamma", params = { a = 2.0, '
     'scale = 1.5 } }, { weight = 0.75, law = "expon", params = { scale = 4.0 } }]',
     0.25 * 3.0 + 0.75 * 4.0),
    # memoryless: expon(3) truncated below 2 and shifted is expon(3) again
    ('law = "expon"\nparams = { scale = 3.0 }\ntruncate_below = 2.0\nshift = true', 3.0),
    # inflation of a lognormal: 1.1 exp(mu + s^2/2)
    ('law = "lognorm"\nparams = { s = 0.5, scale = 2.0 }\ninflation = 1.1',
     1.1 * 2.0 * math.exp(0.125)),
])
def test_composite_severities_against_closed_form_means(tmp_path, capsys, severity, mean):
    s, _ = run_json(tmp_path, _sev_spec(severity), capsys)
    checks = {c["quantity"]: c for c in s["mean_checks"]}
    first = next(iter(checks.values()))
    assert first["law"] == pytest.approx(mean, rel=1e-6)
    # the moments rule keeps the mean: E[S] = lam E[X] up to the grid's cut (closed form)
    assert s["mean"]["value"] == pytest.approx(2.0 * mean, rel=2e-4)


def test_splice_weight_below_is_the_cdf_at_the_threshold(tmp_path, capsys):
    sev = ('law = "splice"\nthreshold = 5.0\nweight_below = 0.9\n'
           'below = { law = "expon", params = { scale = 2.0 } }\n'
           'above = { law = "pareto", params = { b = 3.0, scale = 5.0 } }')
    text = _sev_spec(sev).replace('mean = 2.0', 'mean = 1.0e-9')
    s, out = run_json(tmp_path, text.replace('levels = [0.9]', 'levels = [0.5]'), capsys)
    # with almost no claims the aggregate is 0: the check is on the per-claim row instead
    assert s["mean_per_claim"]["value"] == pytest.approx(
        0.9 * (2 - 7 * math.exp(-2.5)) / (1 - math.exp(-2.5)) + 0.1 * 7.5, rel=1e-3)


# ------------------------------------------------------------------------------- counts

DEGENERATE = """
[claims]
{claims}
[severity]
values = [1.0]
probabilities = [1.0]
[grid]
step = 1.0
points = 120
[report]
levels = [0.5]
return_periods = []
"""


def _counts_pmf(tmp_path, capsys, claims: str) -> np.ndarray:
    _, out = run_json(tmp_path, DEGENERATE.format(claims=claims), capsys)
    return csv_pmf(out)  # severity 1: the aggregate's pmf is the count pmf


def test_zero_truncated_poisson_against_its_pmf(tmp_path, capsys):
    got = _counts_pmf(tmp_path, capsys, 'law = "zero-truncated"\nbase = { law = "poisson", '
                      'mean = 2.5 }')
    k = np.arange(40)
    ref = stats.poisson.pmf(k, 2.5) / (1 - math.exp(-2.5))  # definition
    ref[0] = 0.0
    same_pmf(got, ref, 1e-14)


def test_zero_modified_negative_binomial_against_its_pmf(tmp_path, capsys):
    got = _counts_pmf(tmp_path, capsys, 'law = "zero-modified"\np0 = 0.3\nbase = { law = '
                      '"negative-binomial", mean = 3.0, variance = 6.0 }')
    k = np.arange(60)
    base = stats.nbinom(3.0 ** 2 / 3.0, 0.5)  # r = mean^2 / (var - mean), p = mean / var
    ref = base.pmf(k) * 0.7 / (1 - base.pmf(0))  # (a, b, 1) definition: (1-p0)/(1-q0) q_k
    ref[0] = 0.3
    same_pmf(got, ref, 1e-14)


def test_zero_modified_by_recursion_and_by_transform_agree_with_the_pmf(tmp_path, capsys):
    # (a, b, 1) Panjer recursion (Sundt & Jewell 1981) and the transform route, same spec; the
    # reference: compound of the zero-modified Poisson pmf written out (definition, numpy)
    claims = 'law = "zero-modified"\np0 = 0.3\nbase = { law = "poisson", mean = 2.0 }'
    text = DEGENERATE.format(claims=claims).replace("values = [1.0]\nprobabilities = [1.0]",
                                                    "values = [1.0, 2.0]\n"
                                                    "probabilities = [0.5, 0.5]")
    k = np.arange(60)
    pn = stats.poisson.pmf(k, 2.0) * 0.7 / (1 - math.exp(-2.0))
    pn[0] = 0.3
    ref, power = np.zeros(130), np.array([1.0])
    for n in range(60):
        ref[:power.size] += pn[n] * power
        power = np.convolve(power, [0, 0.5, 0.5])
    for method in ("recursion", "fft"):
        _, out = run_json(tmp_path, text.replace("points = 120", f"points = 120\nmethod = "
                                                 f'"{method}"'), capsys, name=f"{method}.toml")
        same_pmf(csv_pmf(out), ref[:120], 1e-14)


def test_gamma_mixed_poisson_is_scipy_nbinom(tmp_path, capsys):
    got = _counts_pmf(tmp_path, capsys, 'law = "mixed-poisson"\nmean = 4.0\nmixing = "gamma"\n'
                      'cv = 0.5')
    r = 1 / 0.25  # gamma mixing with cv: nbinom(r = 1/cv^2, p = r/(r + mean)) (Loss Models)
    same_pmf(got, stats.nbinom.pmf(np.arange(80), r, r / (r + 4.0)), 1e-13)


def test_lognormal_mixed_poisson_mean_and_variance(tmp_path, capsys):
    got = _counts_pmf(tmp_path, capsys, 'law = "mixed-poisson"\nmean = 3.0\nmixing = '
                      '"lognormal"\ncv = 0.4')
    k = np.arange(got.size)
    # mixed Poisson: E = mean, Var = mean + mean^2 cv^2 (law of total variance)
    assert float(k @ got) == pytest.approx(3.0, rel=1e-9)
    assert float(k ** 2 @ got) - 9.0 == pytest.approx(3.0 + 9.0 * 0.16, rel=1e-6)


def test_empirical_counts_table_per_year_and_claims_file(tmp_path, capsys):
    got = _counts_pmf(tmp_path, capsys, 'law = "empirical"\nvalues = [0, 2, 5]\n'
                      'probabilities = [0.2, 0.5, 0.3]')
    np.testing.assert_allclose(got[:6], [0.2, 0, 0.5, 0, 0, 0.3], atol=1e-15)
    got = _counts_pmf(tmp_path, capsys, 'law = "empirical"\nper_year = [1, 3, 3, 0]')
    np.testing.assert_allclose(got[:4], [0.25, 0.25, 0, 0.5], atol=1e-15)  # frequencies
    (tmp_path / "claims.csv").write_text("year,amount\n2020,5\n2020,7\n2022,1\n")
    got = _counts_pmf(tmp_path, capsys, 'law = "empirical"\nclaims_file = "claims.csv"\n'
                      'years = [2020, 2023]')
    # years 2020..2023 hold 2, 0, 1, 0 claims: P(0) = 1/2, P(1) = 1/4, P(2) = 1/4
    np.testing.assert_allclose(got[:3], [0.5, 0.25, 0.25], atol=1e-15)


def test_claims_file_severity_keeps_the_sample_mean(tmp_path, capsys):
    (tmp_path / "claims.csv").write_text("amount\n120\n340\n75\n990\n")
    text = ('[claims]\nlaw = "poisson"\nmean = 2.0\n[severity]\nclaims_file = "claims.csv"\n'
            '[grid]\nstep = 50.0\n[report]\nlevels = [0.9]\nreturn_periods = []\n')
    s, _ = run_json(tmp_path, text, capsys)
    # each claim 1/n, split onto the grid keeping its mean: E[S] = lam mean(sample)
    assert s["mean"]["value"] == pytest.approx(2.0 * (120 + 340 + 75 + 990) / 4, rel=1e-12)
    assert any("Dvoretzky" in n for n in s["notes"])


# ------------------------------------------------------------------- exceedance, layers

CURVES = """
[claims]
law = "poisson"
mean = 2.0
[severity]
values = [1, 2, 5]
probabilities = [0.5, 0.3, 0.2]
[grid]
step = 1.0
points = 100
[report]
levels = [0.9]
retentions = [4.0]
return_periods = [10, 100, 1000]
layers = [{ limit = 3.0, attachment = 5.0 }]
distortions = { wang = 0.3, proportional_hazard = 1.5 }
basic_limit = 2.0
"""


def test_return_periods_and_exceedance_against_the_count_pgf(tmp_path, capsys):
    s, _ = run_json(tmp_path, CURVES, capsys)
    xs = np.arange(6)
    cdf_x = np.array([0, 0.5, 0.8, 0.8, 0.8, 1.0])
    largest = np.exp(-2.0 * (1 - cdf_x))  # P(M <= x) = P_N(F(x)), Poisson pgf (closed form)
    agg = panjer_poisson(2.0, np.array([0, 0.5, 0.3, 0, 0, 0.2]), 100)
    for row in s["return_periods"]:
        p = 1 - 1 / row["years"]
        assert row["occurrence"] == xs[np.searchsorted(largest, p - 1e-12)]
        assert row["aggregate"] == lower_quantile(agg, np.arange(100), p)
    ex = s["exceedance"][0]
    assert ex["oep"] == pytest.approx(1 - largest[4], rel=1e-12)
    assert ex["aep"] == pytest.approx(float(agg[5:].sum()), rel=1e-10)


def test_layer_prices_and_ilf_against_direct_sums(tmp_path, capsys):
    s, _ = run_json(tmp_path, CURVES, capsys)
    agg = panjer_poisson(2.0, np.array([0, 0.5, 0.3, 0, 0, 0.2]), 100)
    sf = 1 - np.cumsum(agg)  # S(k) on [k, k + 1)
    cells = sf[5:8]  # the layer 3 xs 5 covers [5, 8)
    row = s["layers"][0]
    assert row["expected"] == pytest.approx(float(cells.sum()), rel=1e-10)
    # Wang (2000): g(u) = Phi(Phi^-1(u) + lam); proportional hazard g(u) = u^(1/r)
    assert row["priced"]["wang 0.3"] == pytest.approx(
        float(special.ndtr(special.ndtri(cells) + 0.3).sum()), rel=1e-9)
    assert row["priced"]["proportional_hazard 1.5"] == pytest.approx(
        float((cells ** (1 / 1.5)).sum()), rel=1e-9)
    # ILF per claim: E[min(X, 8)] / E[min(X, 2)] = 2.1 / 1.5 (by hand from the table)
    assert row["ilf"] == pytest.approx(2.1 / 1.5, rel=1e-12)


def test_bad_actuarial_keys_are_named(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    spec.write_text(PROGRAMME.replace("reinstatements = 1", "reinstatements = 1\nrates = [1, 2, 3]"
                                      ).replace("rates = [0.5]\n", ""), encoding="utf-8")
    assert main(["aggregate", str(spec), "--quiet"]) == 2
    assert "reinsurance.xol.rates" in capsys.readouterr().err


# --------------------------------------------------------------------- bundled programme


def test_bundled_programme_spec_runs_and_keeps_its_identities(tmp_path, capsys):
    from polyconv.cli import demo_cmd
    assert "quillmere_programme.toml" in demo_cmd.EXAMPLES
    text = demo_cmd.scenario_text("quillmere_programme.toml")
    assert "fictional" in text and "not advice" in text
    s, out = run_json(tmp_path, text, capsys, name="quillmere_programme.toml")
    assert "model output, not advice" in " ".join(s["caution"])
    # independent lines: means add (linearity), re-gridding keeps them (definition)
    rows = {r["measure"]: r for r in s["lines"]["rows"]}
    assert s["mean"]["value"] == pytest.approx(sum(rows["mean"]["lines"]), rel=1e-9)
    # Euler identity: the contributions add up to the total's TVaR
    alloc = s["allocation"]
    assert sum(alloc["contributions"]) == pytest.approx(alloc["tvar"], rel=1e-9)
    assert alloc["tvar"] == pytest.approx(rows["TVaR 99%"]["total"], rel=1e-9)
    prop = s["reinsurance"]["property"]
    # gross = recovery + net of XoL (expectations, linearity)
    assert prop["gross_mean"] == pytest.approx(prop["expected_recovery"] + prop["net_mean"],
                                               rel=1e-9)
    # the law's exact means and the lattice's agree to the discretisation (relative 1e-3)
    for c in s["mean_checks"]:
        if c["law"] is not None:
            assert c["lattice"] == pytest.approx(c["law"], rel=2e-3), c["quantity"]
    md = (out / "summary.md").read_text()
    assert "Return periods" in md and "Layer prices" in md


@pytest.mark.parametrize("edit, key", [
    (lambda t: t.replace('basis = "x"', ""), None),  # control: the unedited spec runs
    (lambda t: t.replace("[reinsurance.xol]", '[reinsurance.xol]\nbasis = "per-event"'),
     "reinsurance.xol.basis"),
    (lambda t: t.replace("quota_share = 0.25", "quota_share = 0.25\nsurplus = { lines = 1 }"),
     "reinsurance.surplus"),
    (lambda t: t.replace("deductible = 1.0", "deductible = 1.5", 1), "reinsurance.xol.deductible"),
    (lambda t: t.replace('law = "poisson"\nmean = 1.2', 'law = "zero-modified"\np0 = 1.0\n'
                         'base = { law = "poisson", mean = 1.2 }'), "claims.p0"),
    (lambda t: t.replace('law = "poisson"\nmean = 1.2', 'law = "mixed-poisson"\nmean = 1.2\n'
                         'mixing = "beta"\ncv = 0.3'), "claims.mixing"),
    (lambda t: t.replace("values = [1, 2, 4]\nprobabilities = [0.5, 0.3, 0.2]",
                         'law = "mixture"\ncomponents = [{ weight = 0.5, law = "expon" }]'),
     "severity.components"),
    (lambda t: t.replace("values = [1, 2, 4]\nprobabilities = [0.5, 0.3, 0.2]",
                         'claims_file = "nowhere.csv"'), "severity.claims_file"),
    (lambda t: t.replace("return_periods = []", "return_periods = [0.5]"),
     "report.return_periods[0]"),
    (lambda t: t + "\n[[lines]]\nname = \"a\"\n", "claims"),
])
def test_bad_actuarial_keys_name_the_key(tmp_path, capsys, edit, key):
    # common practice, no source: a refused spec exits 2 and names the dotted key
    spec = tmp_path / "bad.toml"
    spec.write_text(edit(PROGRAMME), encoding="utf-8")
    code = main(["aggregate", str(spec), "-o", str(tmp_path / "out"), "--quiet"])
    err = capsys.readouterr().err
    if key is None:
        assert code == 0
    else:
        assert code == 2 and key in err, err
