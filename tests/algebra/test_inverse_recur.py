"""Exact inverse_series over Z by the compiled recurrence (polyconv.algebra.series_recur,
polyconv.engines._kernels_recur) and short int64 powers (polyconv.algebra.power_small).

References: python-flint's ``1 / fmpz_series`` and ``fmpz_poly ** k``; for short cases also the
coefficient recurrence ``b_k = -a_0 sum_(i=1..k) a_i b_(k-i)`` on Python ints (Knuth, TAOCP
vol. 2, 4.7) and repeated multiplication by schoolbook products on Python ints (common
practice, no source).  The portable routes (kernels not loaded, or ``POLYCONV_JIT=0`` in a
fresh process) must give the same values and dtypes.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import polyconv
from polyconv.algebra import power_small, series_recur

flint = pytest.importorskip("flint")

ROOT = Path(polyconv.__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def recur_kernels():
    from polyconv.engines import jit_state as jit

    try:
        jit.kernels("_kernels_recur")
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    if series_recur._ready() is None:
        pytest.skip("marshal streams are not read back here")


def _flint_inverse(a: np.ndarray, n: int) -> list[int]:
    cap = flint.ctx.cap
    flint.ctx.cap = max(cap, n)
    try:
        c = [int(v) for v in (1 / flint.fmpz_series(a.tolist(), prec=n)).coeffs()]
    finally:
        flint.ctx.cap = cap
    return c + [0] * (n - len(c))


def _schoolbook_inverse(a: list[int], n: int) -> list[int]:
    b = [a[0]]  # 1/a_0 = a_0 for a_0 = +-1
    for k in range(1, n):
        b.append(-a[0] * sum(a[i] * b[k - i] for i in range(1, min(k, len(a) - 1) + 1)))
    return b


def _coefficients(rng, n: int, bits: int, first: int, zeros: bool) -> np.ndarray:
    if bits >= 64:
        a = rng.integers(-2**63, 2**63 - 1, n, dtype=np.int64, endpoint=True)
    else:
        a = rng.integers(-2**(bits - 1), 2**(bits - 1), n, dtype=np.int64, endpoint=True)
    if zeros and n > 4:
        a[1: n // 2] = 0  # a run of zeros
    a[0] = first
    return a


def _result_dtype_ok(got: np.ndarray, values: list[int]) -> bool:
    fits = max(abs(v) for v in values) < 2**63
    return got.dtype == (np.int64 if fits else object)


@pytest.mark.parametrize("n", [1, 2, 3, 5, 16, 31, 32, 33, 64, 65, 127, 200, 256, 300])
@pytest.mark.parametrize("bits", [1, 2, 16, 31, 32, 33, 48, 63, 64])
def test_compiled_inverse_matches_flint(recur_kernels, n, bits):
    rng = np.random.default_rng(1000 * n + bits)
    for first, zeros in ((1, False), (-1, True)):
        a = _coefficients(rng, n, bits, first, zeros)
        want = _flint_inverse(a, n)                         # python-flint fmpz_series
        got = polyconv.inverse_series(a, n)
        assert [int(v) for v in got] == want
        assert _result_dtype_ok(got, want)
        assert series_recur.inverse_compiled(a, n) is not None  # the compiled route ran


@pytest.mark.parametrize("extreme", [-2**63, 2**63 - 1, 2**32, -2**32, 2**31, -2**31 - 1])
def test_compiled_inverse_extreme_words(recur_kernels, extreme):
    # word boundaries of the 32-bit rows and int64's own ends; Knuth's recurrence on Python ints
    for a in ([1, extreme], [-1, extreme, extreme, 1], [1, 0, 0, extreme, 7, -extreme // 2]):
        arr = np.array(a, dtype=np.int64)
        for n in (1, 2, 7, 40):
            assert [int(v) for v in polyconv.inverse_series(arr, n)] == _schoolbook_inverse(a, n)


@pytest.mark.parametrize("signs", ["all positive", "all negative", "alternating", "runs"])
def test_compiled_inverse_sign_patterns(recur_kernels, signs):
    # the kernel sums the terms of positive and of negative a_i in separate columns: every
    # pattern of signs against Knuth's recurrence on Python ints (TAOCP vol. 2, 4.7)
    rng = np.random.default_rng(17)
    mags = [int(v) for v in rng.integers(1, 2**63 - 1, 40, dtype=np.int64)]
    pick = {"all positive": lambda i: 1, "all negative": lambda i: -1,
            "alternating": lambda i: -1 if i % 2 else 1, "runs": lambda i: -1 if i % 10 < 5 else 1}
    for first in (1, -1):
        a = [first] + [pick[signs](i) * m for i, m in enumerate(mags)]
        got = polyconv.inverse_series(np.array(a, dtype=np.int64), 41)
        assert [int(v) for v in got] == _schoolbook_inverse(a, 41)


def test_compiled_inverse_short_and_long_operands(recur_kernels):
    rng = np.random.default_rng(7)
    a = _coefficients(rng, 10, 20, 1, False)
    for n in (3, 10, 50):  # a longer than, as long as, shorter than the length
        assert [int(v) for v in polyconv.inverse_series(a, n)] == _flint_inverse(a, n)
    # 1/(1 - x) = 1 + x + x^2 + ... (geometric series), int64 out
    got = polyconv.inverse_series(np.array([1, -1]), 300)
    assert got.dtype == np.int64 and got.tolist() == [1] * 300


def test_non_unit_constant_term_still_refused(recur_kernels):
    with pytest.raises(ValueError, match=r"a\[0\] = 3 is not \+1 or -1"):
        polyconv.inverse_series(np.array([3, 1, 2]), 40)
    with pytest.raises(ValueError, match=r"a\[0\] = 0 is not \+1 or -1"):
        polyconv.inverse_series(np.array([0, 1]), 40)


def test_portable_route_gives_the_same(recur_kernels, monkeypatch):
    rng = np.random.default_rng(11)
    cases = [(_coefficients(rng, n, bits, first, False), n)
             for n, bits, first in ((16, 16, 1), (64, 64, -1), (100, 40, 1), (33, 5, -1))]
    compiled = [polyconv.inverse_series(a, n) for a, n in cases]
    monkeypatch.setattr(series_recur, "_ready", lambda: None)
    for (a, n), c in zip(cases, compiled, strict=True):
        portable = polyconv.inverse_series(a, n)
        assert portable.dtype == c.dtype and [int(v) for v in portable] == [int(v) for v in c]


# ----------------------------------------------------------------------------- short powers


def _flint_power(a: np.ndarray, k: int) -> list[int]:
    c = [int(v) for v in (flint.fmpz_poly(a.tolist()) ** k).coeffs()]
    return c + [0] * (k * (a.shape[0] - 1) + 1 - len(c))


@pytest.mark.parametrize("n", [1, 2, 5, 16, 40, 64])
@pytest.mark.parametrize("bits", [1, 8, 16, 24, 31, 40, 63])
def test_short_powers_match_flint(batch_kernels, n, bits):
    rng = np.random.default_rng(100 * n + bits)
    for k in (2, 3, 4, 5, 7):
        a = _coefficients(rng, n, min(bits, 63), 1, False)
        a[0] = rng.integers(1, 2**(min(bits, 63) - 1), endpoint=True) * (-1) ** k
        a[-1] = a[-1] or -1
        got = polyconv.power(a, k)
        want = _flint_power(a, k)                           # python-flint fmpz_poly
        assert [int(v) for v in got] == want
        assert _result_dtype_ok(got, want)


def test_short_power_route_taken_and_declined(batch_kernels):
    a = np.array([3, -1, 4, 1, -5], dtype=np.int64)
    # schoolbook on Python ints: a^4 = ((a a) a) a
    want = [1]
    for _ in range(4):
        want = [sum(want[i] * int(a[j - i]) for i in range(len(want)) if 0 <= j - i < len(a))
                for j in range(len(want) + len(a) - 1)]
    assert power_small.power_int64(a, 4).tolist() == want
    assert power_small.power_int64(np.array([0, 1, 2]), 3) is None        # trimmed generally
    assert power_small.power_int64(np.array([2**40, 1]), 4) is None       # over 2^127
    assert power_small.power_int64(np.array([3, 1]), 1) is None
    wide = np.full(200, 2**15 - 1, dtype=np.int64)  # a^2 a^2: 399 x 399 terms, over MAX_WORK
    assert power_small.power_int64(wide, 4) is None
    assert [int(v) for v in polyconv.power(wide, 4)] == _flint_power(wide, 4)  # python-flint
    assert polyconv.power(np.array([0, 1, 2]), 3).tolist() == [0, 0, 0, 1, 6, 12, 8]  # (x(1+2x))^3


def test_short_power_portable_route_gives_the_same(batch_kernels, monkeypatch):
    from polyconv.pipeline import small

    rng = np.random.default_rng(5)
    cases = [(rng.integers(-2**15, 2**15, 16), 4), (rng.integers(-2**30, 2**30, 9), 3)]
    compiled = [polyconv.power(a, k) for a, k in cases]
    monkeypatch.setattr(power_small, "power_int64", lambda a, k: None)
    monkeypatch.setattr(small, "batch_kernels", lambda: None)
    for (a, k), c in zip(cases, compiled, strict=True):
        portable = polyconv.power(a, k)
        assert portable.dtype == c.dtype and [int(v) for v in portable] == [int(v) for v in c]


def test_jit_disabled_process_gives_the_same():
    """POLYCONV_JIT=0 in a fresh process: the portable routes, values checked against flint."""
    code = ("import json, numpy as np, polyconv\n"
            "rng = np.random.default_rng(3)\n"
            "a = rng.integers(-2**62, 2**62, 70); a[0] = -1\n"
            "p = rng.integers(-2**15, 2**15, 16)\n"
            "print(json.dumps({'inv': [str(v) for v in polyconv.inverse_series(a, 70)],"
            " 'pow': [str(v) for v in polyconv.power(p, 4)], 'a': a.tolist(),"
            " 'p': p.tolist()}))")
    env = {k: v for k, v in os.environ.items() if k != "POLYCONV_JIT"}
    env.update(PYTHONPATH=str(ROOT), POLYCONV_JIT="0")
    done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                          timeout=120, check=False, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    got = json.loads(done.stdout.strip().splitlines()[-1])
    a, p = np.array(got["a"], dtype=np.int64), np.array(got["p"], dtype=np.int64)
    assert [int(v) for v in got["inv"]] == _flint_inverse(a, 70)     # python-flint
    assert [int(v) for v in got["pow"]] == _flint_power(p, 4)
