"""JIT state of the compiled kernels (polyconv.engines.jit_state) and the compiled engine in the
exact planner.

Fallbacks run in subprocesses (numba blocked through ``sys.modules``, a read-only cache, numba
never imported by ``import polyconv``); none of them compiles, so they stay fast.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import polyconv
from polyconv.engines import jit_state as jit

ROOT = Path(polyconv.__file__).resolve().parent.parent


def _run(code: str, env_extra: dict | None = None, path: Path = ROOT) -> dict:
    """Run ``code`` in a fresh interpreter with polyconv from ``path``; it prints one JSON line."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("NUMBA_CACHE_DIR", "POLYCONV_CACHE_DIR", "POLYCONV_JIT")}
    env["PYTHONPATH"] = str(path)
    env.update(env_extra or {})
    done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                          timeout=120, check=False, cwd=path)  # "-c" puts the cwd on sys.path
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_import_and_small_product_do_not_import_numba():
    got = _run("import sys, json, numpy as np, polyconv\n"
               "before = 'numba' in sys.modules\n"
               "c = polyconv.convolve(np.arange(64), np.arange(64) % 7)\n"
               "print(json.dumps({'before': before, 'after': 'numba' in sys.modules,"
               " 'c': c.tolist()}))")
    assert got["before"] is False and got["after"] is False
    # numpy.convolve is the reference
    assert got["c"] == np.convolve(np.arange(64), np.arange(64) % 7).tolist()


def test_numba_blocked_means_numpy_engines_and_plan_says_so():
    code = ("import sys, json\nsys.modules['numba'] = None\n"
            "import numpy as np, polyconv\nfrom polyconv.engines import jit_state as jit\n"
            "a = np.arange(5000) * 7919 % 998244353\n"
            "pl = polyconv.plan(a, a, modulus=998244353)\n"
            "c = polyconv.convolve(a, a, modulus=998244353)\n"
            "try:\n    polyconv.convolve(a, a, modulus=998244353, method='ntt-compiled')\n"
            "    forced = 'ran'\nexcept ValueError as e:\n    forced = str(e)\n"
            "print(json.dumps({'state': jit.state(), 'reason': pl.reason, 'engine': pl.engine,"
            " 'c': [int(v) for v in c[:50]] + [int(v) for v in c[-50:]], 'forced': forced}))")
    got = _run(code)
    assert got["state"] == "unavailable"
    assert got["engine"] != "ntt-compiled"
    assert "compiled engines unavailable" in got["reason"] and "numba" in got["reason"]
    assert "ntt-compiled" in got["forced"]
    flint = pytest.importorskip("flint")
    a = np.arange(5000) * 7919 % 998244353
    ref = [int(v) for v in (flint.nmod_poly(a.tolist(), 998244353) ** 2).coeffs()]
    assert got["c"] == ref[:50] + ref[-50:]  # python-flint nmod_poly


def test_disabled_by_environment():
    got = _run("import json\nfrom polyconv.engines import jit_state as jit\n"
               "print(json.dumps({'state': jit.state(), 'reason': jit.reason()}))",
               {"POLYCONV_JIT": "0"})
    assert got == {"state": "unavailable",
                   "reason": "compiled kernels disabled by POLYCONV_JIT=0"}


def _read_only_copy(tmp_path: Path) -> Path:
    """A copy of the package whose kernel directory cannot hold a cache.

    The test suite may run as root, for whom permission bits do not stop writes, so the
    ``__pycache__`` directory is replaced by a regular file (no directory can be made there)
    and the write bits are removed as well.
    """
    dest = tmp_path / "site"
    shutil.copytree(ROOT / "polyconv", dest / "polyconv",
                    ignore=shutil.ignore_patterns("__pycache__"))
    engines = dest / "polyconv" / "engines"
    (engines / "__pycache__").write_text("not a directory")
    engines.chmod(0o555)
    return dest


def test_read_only_install_falls_back_to_user_cache_dir(tmp_path):
    site = _read_only_copy(tmp_path)
    try:
        user = tmp_path / "user-cache"
        got = _run("import json, os\nfrom polyconv.engines import jit_state as jit\n"
                   "print(json.dumps({'enabled': jit.cache_enabled(), 'why': "
                   "jit.cache_description(), 'env': os.environ.get('NUMBA_CACHE_DIR'),"
                   " 'state': jit.state(), 'file': jit.__file__}))",
                   {"XDG_CACHE_HOME": str(user)}, site)
        assert got["file"].startswith(str(site))
        assert got["enabled"] is True
        assert got["env"] == str(user / "polyconv" / "numba")
        assert "user cache directory" in got["why"]
        assert got["state"] in ("compile", "cached")
    finally:
        (site / "polyconv" / "engines").chmod(0o755)


def test_read_only_everywhere_means_no_cache_not_an_error(tmp_path):
    site = _read_only_copy(tmp_path)
    blocker = tmp_path / "blocker"
    blocker.write_text("a file where a directory would have to be")
    try:
        got = _run("import json, numpy as np, polyconv\n"
                   "from polyconv.engines import jit_state as jit\n"
                   "c = polyconv.convolve(np.arange(10), np.arange(3))\n"
                   "print(json.dumps({'enabled': jit.cache_enabled(), 'why': "
                   "jit.cache_description(), 'state': jit.state(), 'c': c.tolist()}))",
                   {"XDG_CACHE_HOME": str(blocker / "x"),
                    "NUMBA_CACHE_DIR": str(blocker / "y")}, site)
        assert got["enabled"] is False and "no writable cache directory" in got["why"]
        assert got["state"] == "compile"
        assert got["c"] == np.convolve(np.arange(10), np.arange(3)).tolist()  # numpy reference
    finally:
        (site / "polyconv" / "engines").chmod(0o755)


def test_cold_state_is_charged_in_the_plan():
    # in a fresh process the kernels are not loaded: a one-off small product is not offered
    # the compiler's seconds, and plan() says what state the kernels are in
    got = _run("import json, numpy as np, polyconv\n"
               "a = np.arange(64)\n"
               "pl = polyconv.plan(a, a, modulus=998244353)\n"
               "print(json.dumps({'engine': pl.engine, 'reason': pl.reason,"
               " 'alt': dict(pl.alternatives)}))")
    assert got["engine"] != "ntt-compiled"
    assert "compiled NTT not chosen" in got["reason"]
    assert got["alt"]["ntt-compiled"] >= 0.1  # a load or a compile is charged


@pytest.fixture(scope="session")
def kernels():
    pytest.importorskip("numba")
    return jit.kernels()


def test_ready_kernels_are_planned_and_exact(kernels):
    flint = pytest.importorskip("flint")
    assert jit.state() == "compiled"
    rng = np.random.default_rng(4)
    a, b = rng.integers(0, 998244353, 2**13), rng.integers(0, 998244353, 2**13 - 5)
    pl = polyconv.plan(a, b, modulus=998244353)
    assert pl.engine == "ntt-compiled" and pl.certificate == "construction"
    assert "ready in this process" in pl.reason
    got = polyconv.convolve(a, b, modulus=998244353)
    ref = (flint.nmod_poly(a.tolist(), 998244353) * flint.nmod_poly(b.tolist(), 998244353))
    assert got.tolist() == [int(v) for v in ref.coeffs()]  # python-flint nmod_poly
    x = rng.integers(-2**62, 2**62, 3000)
    got = polyconv.convolve(x, x[::-1], method="ntt-compiled")
    ref = flint.fmpz_poly(x.tolist()) * flint.fmpz_poly(x[::-1].tolist())
    assert [int(v) for v in got] == [int(v) for v in ref.coeffs()]  # python-flint fmpz_poly
    m = 2**62 - 57
    y = rng.integers(0, m, 2000)
    got = polyconv.convolve(y, y, modulus=m, method="ntt-compiled")
    ref = flint.nmod_poly(y.tolist(), m) ** 2
    assert got.tolist() == [int(v) for v in ref.coeffs()]  # python-flint nmod_poly


def test_batch_rows_through_the_compiled_engine(kernels):
    flint = pytest.importorskip("flint")
    rng = np.random.default_rng(9)
    a = rng.integers(-2**20, 2**20, (3, 500))
    b = rng.integers(-2**20, 2**20, (3, 400))
    got = polyconv.convolve(a, b, method="ntt-compiled")
    for i in range(3):  # python-flint fmpz_poly, row by row
        ref = flint.fmpz_poly(a[i].tolist()) * flint.fmpz_poly(b[i].tolist())
        assert got[i].tolist() == [int(v) for v in ref.coeffs()]
