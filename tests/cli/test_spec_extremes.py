"""Claim-count parameters at the ends of the float range (robustness campaign, run D).

A negative binomial with mean 3 and variance 1e308 is a valid law (p = 3e-308); its largest-
claim table took log1p(-1) ("math domain error").  A mean of 5e-324 gives n = p = 0 after
underflow: refused naming the key, exit status 2 (the CLI's usage-error status, README).
"""

import warnings

from polyconv.cli.main import main

SPEC = """\
[claims]
law = "negative-binomial"
mean = {mean}
variance = {variance}

[severity]
law = "expon"
params = {{ scale = 1000.0 }}

[grid]
step = 100.0
"""


def _run(tmp_path, capsys, mean, variance):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.format(mean=mean, variance=variance))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        status = main(["aggregate", str(spec), "-o", str(tmp_path / "out"), "--quiet"])
    return status, capsys.readouterr().err


def test_huge_variance_runs(tmp_path, capsys):
    status, err = _run(tmp_path, capsys, "3.0", "1e308")
    assert status == 0, err
    assert "math domain error" not in err


def test_underflowing_mean_is_refused_by_name(tmp_path, capsys):
    status, err = _run(tmp_path, capsys, "5e-324", "95.0")
    assert status == 2
    assert "claims.mean" in err and "negative binomial" in err
