"""polyconv.numerics.transforms (ducc0, else scipy's pocketfft) and the certificates that rest on
it."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

import polyconv
from polyconv.numerics import bounds
from polyconv.numerics import transforms as tf
from polyconv.numerics.transforms import fast_length
from polyconv.pipeline import choose

ROOT = Path(polyconv.__file__).resolve().parent.parent


def test_ducc0_runs_when_importable():
    pytest.importorskip("ducc0")
    assert tf.LIBRARY == "ducc0" or os.environ.get("POLYCONV_FFT") == "scipy"


@pytest.mark.parametrize("n", [1, 2, 7, 64, 100, 1000, 2**12])
def test_transforms_match_numpy_fft(n):
    rng = np.random.default_rng(n)
    x = rng.standard_normal((3, n))
    z = x + 1j * rng.standard_normal((3, n))
    # numpy.fft is the reference
    assert np.allclose(tf.rfft(x, -1, 1), np.fft.rfft(x, axis=-1))
    assert np.allclose(tf.irfft(np.fft.rfft(x, axis=-1), n, -1, 1), x)
    assert np.allclose(tf.fft(z, -1, 1), np.fft.fft(z, axis=-1))
    assert np.allclose(tf.ifft(z, -1, 1), np.fft.ifft(z, axis=-1))
    assert np.allclose(tf.rfft(x.T.copy(), 0, 2), np.fft.rfft(x.T, axis=0))  # other axis
    assert np.allclose(tf.rfft(np.arange(n), -1, 1), np.fft.rfft(np.arange(n)))  # integers


def _is_5_smooth(n: int) -> bool:
    for p in (2, 3, 5):
        while n % p == 0:
            n //= p
    return n == 1


@pytest.mark.parametrize("minimum", [1, 2, 7, 97, 1000, 1025, 4097, 123457])
def test_fast_length_is_the_next_5_smooth_length(minimum):
    # brute force over integers is the reference
    expected = next(m for m in range(minimum, 2 * minimum + 8) if _is_5_smooth(m))
    assert fast_length(minimum) == expected


def _reference_roots(n: int):
    """cos, sin of -2 pi k / n in long double from pi to 40 digits (mpmath's mp.pi)."""
    mpmath = pytest.importorskip("mpmath")
    mpmath.mp.dps = 45
    pi = np.longdouble(mpmath.nstr(mpmath.pi, 40))
    k = np.arange(n, dtype=np.longdouble)
    angle = -2 * pi * k / np.longdouble(n)
    cos, sin = np.cos(angle), np.sin(angle)
    for j in (1, n // 3, n - 1):  # the long double reference against mpmath itself
        assert abs(float(cos[j]) - float(mpmath.cos(-2 * mpmath.pi * j / n))) < 2**-60
    return cos, sin


@pytest.mark.parametrize("lg", [10, 14])
def test_measured_twiddle_error_of_the_running_library_holds(lg):
    # the roots of unity as rfft and fft produce them (unit impulse at index 1) stay within the
    # twiddle error the certificates assume; reference angles from mpmath's pi
    if not bounds.TWIDDLE_CERTIFIED:
        pytest.skip(bounds.TWIDDLE_NOTE)
    n = 1 << lg
    cos, sin = _reference_roots(n)
    impulse = np.zeros(n)
    impulse[1] = 1.0
    beta = float(bounds.TWIDDLE_ERROR)
    got = tf.rfft(impulse, -1, 1)
    m = got.shape[0]
    assert np.max(np.abs(got.real - cos[:m])) <= beta
    assert np.max(np.abs(got.imag - sin[:m])) <= beta
    got = tf.fft(impulse.astype(complex), -1, 1)
    assert np.max(np.abs(got.real - cos)) <= beta and np.max(np.abs(got.imag - sin)) <= beta


def test_certificate_names_library_and_version():
    assert bounds.TWIDDLE_NOTE.startswith(tf.LIBRARY)
    low, high, beta = bounds.MEASURED_TWIDDLE_ERROR[tf.LIBRARY]
    assert bounds.TWIDDLE_ERROR == beta and isinstance(beta, Fraction)
    version = tuple(int(v) for v in tf.LIBRARY_VERSION.split(".")[:2])
    assert low <= version < high


def test_unmeasured_library_gets_no_bound_certificate(monkeypatch):
    flint = pytest.importorskip("flint")
    rng = np.random.default_rng(2)
    a = rng.integers(-2**15, 2**15, 3000)
    assert polyconv.plan(a, a, method="fft-exact").certificate == "bound"
    monkeypatch.setattr(bounds, "TWIDDLE_CERTIFIED", False)
    monkeypatch.setattr(bounds, "TWIDDLE_NOTE", "some-fft 9.9: twiddle error not measured")
    choose._choose_cached.cache_clear()
    try:
        pl = polyconv.plan(a, a, method="fft-exact")
        assert pl.certificate == "check" and "twiddle error not measured" in pl.reason
        with pytest.raises(ValueError, match="limbs"):
            polyconv.plan(rng.integers(-2**40, 2**40, 3000), a, method="limbs")
        got = polyconv.convolve(a, a)
        ref = flint.fmpz_poly(a.tolist()) ** 2
        assert got.tolist() == [int(v) for v in ref.coeffs()]  # python-flint fmpz_poly
    finally:
        choose._choose_cached.cache_clear()


def test_scipy_fallback_when_ducc0_is_blocked():
    code = ("import sys, json\nsys.modules['ducc0'] = None\n"
            "import numpy as np\nfrom polyconv.numerics import transforms as tf, bounds\n"
            "x = np.arange(10.0)\n"
            "print(json.dumps({'lib': tf.LIBRARY, 'r': np.abs(tf.rfft(x, -1, 1)).tolist(),"
            " 'note': bounds.TWIDDLE_NOTE}))")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                          timeout=60, check=True, cwd=ROOT)
    got = json.loads(done.stdout.strip().splitlines()[-1])
    assert got["lib"] in ("pocketfft-scipy", "scipy.fft")
    assert np.allclose(got["r"], np.abs(np.fft.rfft(np.arange(10.0))))  # numpy.fft reference
    assert got["note"].startswith(got["lib"])


@pytest.mark.parametrize("n", [8, 96, 1024, 3 * 2**10])
def test_circular_product_is_the_circular_convolution(n):
    if not tf.FUSED:
        pytest.skip("the running FFT library has no fused circular product")
    rng = np.random.default_rng(n)
    rows = rng.standard_normal((3, n))
    kernel = rng.standard_normal(n)
    # reference: the circular convolution theorem with numpy.fft
    want = np.fft.irfft(np.fft.rfft(rows, axis=-1) * np.fft.rfft(kernel), n, axis=-1)
    out = np.empty_like(rows)
    got = tf.circular_product(rows, kernel, 1, out)
    assert got is out and np.allclose(got, want, atol=1e-12 * n)
    assert np.allclose(tf.circular_product(rows.copy(), kernel, 1), want, atol=1e-12 * n)
    z = rows + 1j * rng.standard_normal((3, n))
    want_z = np.fft.ifft(np.fft.fft(z, axis=-1) * np.fft.fft(kernel), axis=-1)
    got_z = tf.circular_product(z.copy(), kernel.astype(complex), 1)
    assert np.allclose(got_z, want_z, atol=1e-12 * n)
