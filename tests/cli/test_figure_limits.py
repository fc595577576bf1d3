"""A report whose amounts pass what float64 tick arithmetic can hold leaves its figure out.

Regression (hardening campaign): ``aggregate`` with ``grid.step = 1e308`` failed inside
matplotlib ("Axis limits cannot be NaN or Inf"), because the grid's end overflows float64
(largest finite double about 1.8e308, IEEE 754).  Now the report is written without the
figure and says why.
"""

import warnings

from polyconv.cli.main import main

SPEC = """\
[claims]
law = "poisson"
mean = 2.0

[severity]
law = "expon"
params = { scale = 1000.0 }

[grid]
step = 1e308
"""


def test_huge_step_report_without_figure(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    out = tmp_path / "report"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["aggregate", str(spec), "-o", str(out), "--quiet"]) == 0
    assert not list(out.glob("*.png"))
    assert "figure left out" in (out / "summary.md").read_text()
