"""``import polyconv`` stays light: heavy optional modules load on first use only.

A user who only multiplies integer sequences should not pay for scipy.stats (about a second
cold), matplotlib or a JIT compiler at import time (requirement of the project; common practice
for libraries with optional heavy parts, no source).
"""

import json
import subprocess
import sys

HEAVY = ("scipy.stats", "scipy.special", "matplotlib", "numba", "polyconv.dist")


def _loaded_after(code: str) -> list[str]:
    probe = (f"import sys\n{code}\nimport json\n"
             f"print(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                         check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_import_polyconv_loads_no_heavy_module():
    assert _loaded_after("import polyconv") == []


def test_dist_loads_on_first_use():
    loaded = _loaded_after("import polyconv\nL = polyconv.dist.Lattice([0.5, 0.5])")
    assert "polyconv.dist" in loaded
    assert "matplotlib" not in loaded


def test_import_dist_loads_no_scipy_stats():
    # scipy.stats costs about a second cold and scipy.special half of that: polyconv.dist
    # imports them when a law is first used
    loaded = _loaded_after("import polyconv, polyconv.dist\n"
                           "L = polyconv.dist.Lattice([0.5, 0.5])\nm = (L + L).mean()")
    assert loaded == ["polyconv.dist"]


def test_command_line_parser_loads_no_scipy_stats():
    # every command (even `polyconv multiply`) builds the parser of all sub-commands first
    loaded = _loaded_after("from polyconv.cli.main import build_parser\nbuild_parser()")
    assert "scipy.stats" not in loaded and "matplotlib" not in loaded


def test_from_import_dist_still_works():
    # `from polyconv import dist` must give the same module as attribute access
    code = ("import polyconv\nfrom polyconv import dist\n"
            "assert dist is polyconv.dist\nassert dist.Lattice([1.0]).mean() == 0.0")
    subprocess.run([sys.executable, "-c", code], check=True)
