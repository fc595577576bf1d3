"""polyconv.numerics.negacyclic: real linear products as complex negacyclic products of half the
length, held to the float certificate (Percival's bound) against exact products.

References: mpmath (roots of unity at 120 bits) for the tables; python-flint's ``fmpz_poly``
product of the operands scaled to integers (exact) for the products; numpy.convolve for a
smoke check of small cases.
"""

from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import numpy as np
import pytest

import polyconv
from polyconv.engines import fft
from polyconv.numerics import bounds
from polyconv.numerics import negacyclic as ng

flint = pytest.importorskip("flint")
needs_path = pytest.mark.skipif(not ng.USABLE, reason="negacyclic path not usable here")
EPS = 2.0**-53


@pytest.mark.parametrize("order, scale", [(64, 1), (4 * 2**12, 2**12), (4 * 3000, 3000),
                                          (4 * 2**20, 1), (12, 3)])
def test_roots_are_within_the_table_error_of_mpmath(order, scale):
    mpmath.mp.prec = 120
    rng = np.random.default_rng(order)
    r = np.concatenate([rng.integers(-10**9, 10**9, 400), np.arange(-3, 4),
                        [order // 8, order // 4 - 1, order - 1]])
    got = ng.roots(r, order, scale)
    worst = 0.0
    for k, z in zip(r.tolist(), got.tolist(), strict=True):
        exact = mpmath.expjpi(mpmath.mpf(2 * k) / order) / scale  # exp(2 pi i k / order) / s
        worst = max(worst, float(abs(mpmath.mpc(z) - exact) * scale))
    assert worst <= float(ng.TABLE_ERROR)  # modulus error relative to |root| = 1 / scale


def test_the_certificate_condition_holds_for_measured_libraries_only():
    # the exact inequality of the module notes, evaluated here independently with Fractions
    eps = Fraction(1, 2**53)
    for _low, _high, beta in bounds.MEASURED_TWIDDLE_ERROR.values():
        assert ng.fits_percival(beta)
        lhs = (1 + Fraction(2237, 1000) * eps) * (1 + ng.TABLE_ERROR) ** 2
        assert lhs <= (1 + eps) * (1 + beta)
    assert not ng.fits_percival(eps)  # a library with 1-eps twiddles leaves no room: refused


def _scaled_integers(x: np.ndarray) -> tuple[list[int], int]:
    """``x = ints * 2^-shift`` exactly (floats are dyadic rationals)."""
    shift = max(0, max(-math.frexp(v)[1] + 53 for v in x.tolist() if v != 0.0))
    return [int(Fraction(v) * 2**shift) for v in x.tolist()], shift


def _exact_product(x: np.ndarray, y: np.ndarray) -> list[Fraction]:
    """The exact linear product of two float arrays via flint's integer product."""
    ix, sx = _scaled_integers(x)
    iy, sy = _scaled_integers(y)
    coeffs = (flint.fmpz_poly(ix) * flint.fmpz_poly(iy)).coeffs()
    full = x.shape[0] + y.shape[0] - 1
    coeffs = [int(c) for c in coeffs] + [0] * (full - len(coeffs))
    return [Fraction(c, 2 ** (sx + sy)) for c in coeffs]


def _max_error(got: np.ndarray, exact: list[Fraction]) -> float:
    return float(max(abs(Fraction(g) - e) for g, e in zip(got.tolist(), exact, strict=True)))


def _operands(kind: str, n1: int, n2: int, rng):
    if kind == "impulses":
        x, y = np.zeros(n1), np.zeros(n2)
        x[[0, n1 // 3, n1 - 1]] = [1.0, -3.5, 2.0**40]
        y[[0, n2 - 1]] = [2.0**-30, 7.0]
        return x, y
    if kind == "ones":
        return np.ones(n1), np.ones(n2)
    if kind == "signs":
        return (rng.choice([-1.0, 1.0], n1) * 2.0**20, rng.choice([-1.0, 1.0], n2))
    # mixed scales: magnitudes from 2^-30 to 2^30 with random signs
    return (rng.standard_normal(n1) * 2.0 ** rng.integers(-30, 30, n1),
            rng.standard_normal(n2) * 2.0 ** rng.integers(-30, 30, n2))


@needs_path
@pytest.mark.parametrize("kind", ["impulses", "ones", "signs", "mixed"])
@pytest.mark.parametrize("n1, n2, n_fft, rows", [
    (2048, 2048, 4096, 1),      # no split
    (2048, 2048, 4096, 8),      # four-step split
    (3000, 1000, 4000, 1),      # n1 > N/2: the operand is folded; N not a power of two
    (3000, 1000, 4000, 16),     # folded and split (m = 2000 = 16 x 125)
    (700, 600, 1300, 1),        # N = 2 x 650
])
def test_products_stay_within_the_certified_bound(kind, n1, n2, n_fft, rows):
    rng = np.random.default_rng(n1 * 7 + n2 + rows)
    x, y = _operands(kind, n1, n2, rng)
    ng._cache[n_fft // 2] = ng.Tables(n_fft // 2, rows)
    try:
        got = ng.real_product(x, y, n_fft, n1 + n2 - 1)
    finally:
        ng._cache.pop(n_fft // 2, None)
    bound = bounds.convolution_error_bound("fft", bounds.norm2_upper(np.abs(x)),
                                           bounds.norm2_upper(np.abs(y)), n_fft, min(n1, n2))
    error = _max_error(got, _exact_product(x, y))
    assert error <= bound
    assert got.shape == (n1 + n2 - 1,) and got.dtype == np.float64


@needs_path
def test_truncated_output_and_squares():
    rng = np.random.default_rng(3)
    x = rng.standard_normal(300)
    want = np.convolve(x, x)  # numpy's direct sum
    got = ng.real_product(x, x, 600, 200)  # keep < N/2: real parts only
    assert got.shape == (200,) and np.allclose(got, want[:200], atol=1e-12)


@needs_path
def test_engine_takes_the_path_by_length_and_keeps_the_bound():
    rng = np.random.default_rng(11)
    x, y = rng.standard_normal(5000), rng.standard_normal(4000)  # N = 9000 (5-smooth)
    n_fft = fft.tf.fast_length(8999)
    ng._cache.pop(n_fft // 2, None)
    first = polyconv.convolve(x, y)
    assert n_fft // 2 in ng._cache  # the tables were made for it
    second = polyconv.convolve(x, y)
    np.testing.assert_array_equal(first, second)  # the same route each time
    exact = _exact_product(x, y)
    assert _max_error(first, exact) <= polyconv.error_bound(x, y)
    # the separate-calls route of the calibration does not use it
    assert np.allclose(fft.convolve_fft(x, y, n_fft, 8999, 1, fused=False), first, atol=1e-9)


def test_pricing_uses_its_own_rates_and_tables_without_them_still_load():
    from polyconv.tuning import costs

    table = costs.default_costs()
    n_fft = 2**16
    with_rates = fft.predict_fft(table, n_fft, 1.0, 1, False, True, True)
    rate = table["fft"]["negacyclic_rate_by_log2n"]["16"]  # the shipped constant
    assert math.isclose(with_rates, table["fft"]["fused_overhead"] + rate * n_fft * 16)
    table["fft"].pop("negacyclic_rate_by_log2n")
    assert costs.table_problem(table) is None  # a file calibrated before it is still valid
    assert fft.predict_fft(table, n_fft, 1.0, 1, False, True, True) == fft.predict_fft(
        table, n_fft, 1.0, 1, False, True)  # falls back to the fused constants


@needs_path
def test_calibration_measures_the_three_routes():
    from polyconv.tuning import calibrate

    table: dict = {}
    calibrate.measure_fft(table, np.random.default_rng(0), 0.002, 14)
    assert set(table["fft"]["negacyclic_rate_by_log2n"]) == {
        str(k) for k in range(ng.FROM.bit_length() - 1, 15)}  # the lengths the route takes
    assert set(table["fft"]["fused_rate_by_log2n"]) == {str(k) for k in range(4, 15)}
    assert all(v > 0 for v in table["fft"]["negacyclic_rate_by_log2n"].values())


@needs_path
@pytest.mark.parametrize("mode", ["full", "same", "valid"])
def test_modes_match_numpy(mode):
    # reference: numpy.convolve (direct sums); "valid" runs at N >= max(n1, n2) only, where the
    # negated wrap-around, like the cyclic one, lands in entries the mode drops
    rng = np.random.default_rng(5)
    x, y = rng.standard_normal(12000), rng.standard_normal(5000)
    plan = polyconv.plan(x, y, mode=mode)
    assert ng.eligible(plan.transform_length)  # this size does take the negacyclic route
    got = polyconv.convolve(x, y, mode=mode)
    want = np.convolve(x, y, mode=mode)
    assert got.shape == want.shape
    assert np.max(np.abs(got - want)) <= 2 * polyconv.error_bound(x, y) + 1e-12


@needs_path
def test_products_near_the_top_of_the_float_range_stay_finite():
    # reference: numpy.convolve (direct sums); outputs near 1e306 must come out finite, as the
    # 1/m of the inverse is applied before the inverse transform, not after it
    rng = np.random.default_rng(9)
    x, y = rng.random(4096) * 1e153, rng.random(4096) * 1e150
    got, want = polyconv.convolve(x, y), np.convolve(x, y)
    assert np.isfinite(want).all() and np.isfinite(got).all()
    assert np.max(np.abs(got - want)) <= 1e-10 * np.max(np.abs(want))
