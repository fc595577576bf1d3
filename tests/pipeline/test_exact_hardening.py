"""Regression tests for issue 16 on the exact path: wrong answers and raw errors found by a
hostile campaign.

Every check names its source: python-flint (``fmpz_poly`` exact products, ``nmod_poly`` below
2^64), exact Python ints, or "common practice, no source".
"""

from __future__ import annotations

import random

import flint
import numpy as np
import pytest

import polyconv


def flint_product_mod(a, b, m: int) -> list[int]:
    """python-flint reference: fmpz_poly product, each coefficient reduced mod m (Python ints)."""
    c = flint.fmpz_poly([int(x) for x in a]) * flint.fmpz_poly([int(x) for x in b])
    out = [int(x) % m for x in c.coeffs()]
    return out + [0] * (len(a) + len(b) - 1 - len(out))


#: one modulus of every class the limb engine admits: below 2^31, odd 2^31..2^52 (the Montgomery
#: branch that once took P + m for parts below -m), odd above 2^52, powers of two
LIMB_MODULI = [3, 2**31 - 1, 2**31 + 11, 2**32 - 1, 3**20, 2**40 + 15, 2**52 - 1, 2**52 + 1,
               2**53 + 5, 2**61 - 1, 2**62 - 57, 2**16, 2**40, 2**62]


@pytest.mark.parametrize("m", LIMB_MODULI)
def test_forced_limbs_modular_is_exact_for_every_admitted_modulus(m):
    # reference: python-flint fmpz_poly reduced mod m.  The example first, then residues
    # just above m/2 (centred to about -m/2: the most negative limb parts) and random ones.
    small = 2**23 - 1
    got = polyconv.convolve([small], [m - small], modulus=m, method="limbs")
    assert [int(v) for v in got] == flint_product_mod([small], [m - small], m)
    rng = random.Random(m)
    for n in (1, 5, 64):
        for pattern in ("above-half", "alternating", "random"):
            if pattern == "above-half":
                a = [m // 2 + 1 + rng.randrange(3) for _ in range(n)]
            elif pattern == "alternating":
                a = [(m // 2 + 1) if i % 2 else m - 1 for i in range(n)]
            else:
                a = [rng.randrange(m) for _ in range(n)]
            b = [rng.randrange(m) for _ in range(n)]
            got = polyconv.convolve(a, b, modulus=m, method="limbs")
            assert [int(v) for v in got] == flint_product_mod(a, b, m), (n, pattern)


def flint_product(a, b) -> list[int]:
    """python-flint reference: exact fmpz_poly product, zero padded to n1 + n2 - 1."""
    c = flint.fmpz_poly([int(x) for x in a]) * flint.fmpz_poly([int(x) for x in b])
    out = [int(x) for x in c.coeffs()]
    return out + [0] * (len(a) + len(b) - 1 - len(out))


@pytest.mark.parametrize("method", ["auto", "direct-exact", "limbs", "kronecker"])
@pytest.mark.parametrize("big", [2**60, 2**1024, 2**2000])
def test_zero_operand_times_huge_values(method, big):
    # reference: exact Python ints (0 * anything = 0).  Long enough (200 x 200) for the norm pass
    # that once converted 2^1024 to float; fft-exact must refuse (the operand is not a float64)
    a, b = [0] * 200, [big] * 200
    if method == "limbs" and big > 2**64:  # no certified limb size: a clean refusal
        with pytest.raises(ValueError, match="method='limbs'"):
            polyconv.convolve(a, b, method=method)
        return
    got = polyconv.convolve(a, b, method=method)
    assert [int(v) for v in got] == [0] * 399
    with pytest.raises(ValueError, match="fft-exact"):
        polyconv.convolve(a, b, method="fft-exact")


def test_check_certificate_on_the_worst_measured_input_below_the_limit():
    # reference: python-flint fmpz_poly.  All coefficients at 2^18 - 1, n = 2^12: the a-priori
    # bound (8.9) is above 1/2 and below CHECK_BOUND_LIMIT, so the rounded product is checked
    n = 2**12
    a = np.full(n, 2**18 - 1, dtype=np.int64)
    the_plan = polyconv.plan(a, a, method="fft-exact")
    assert the_plan.certificate == "check"
    assert [int(v) for v in polyconv.convolve(a, a, method="fft-exact")] == flint_product(a, a)


def coefficients(p, n: int) -> list[int]:
    """The first n coefficients of a flint polynomial (zero padded)."""
    c = [int(v) for v in p.coeffs()]
    return (c + [0] * n)[:n]


BIG_LISTS = [[1], [0, 2**63 + 1], [-1, 2**63], [2**64 - 1, 1], [2**63, -(2**63)]]


@pytest.mark.parametrize("b", BIG_LISTS)
def test_lists_of_python_ints_near_two_to_the_64_stay_exact(b):
    # reference: python-flint fmpz_poly (numpy would have read these lists as float64)
    a = [3, -1]
    got = polyconv.convolve(a, b)
    assert got.dtype != np.float64 and polyconv.plan(a, b).exact
    assert [int(v) for v in got] == flint_product(a, b)
    assert [int(v) for v in polyconv.convolve(a, b, modulus=7)] == flint_product_mod(a, b, 7)
    nested = polyconv.convolve([a, a], (tuple(b),))
    assert [[int(v) for v in row] for row in nested] == [flint_product(a, b)] * 2


def test_algebra_keeps_lists_of_big_python_ints_exact():
    # reference: python-flint fmpz_poly divmod / power / series inverse (exact Python ints)
    q, r = polyconv.poly_divmod([5] * 96, [2**64 - 1, 1])
    fq, fr = divmod(flint.fmpz_poly([5] * 96), flint.fmpz_poly([2**64 - 1, 1]))
    assert [int(v) for v in q] == coefficients(fq, 95)
    assert [int(v) for v in r] == coefficients(fr, 1)
    base = [0, 2**63 + 1]
    assert [int(v) for v in polyconv.power(base, 3)] == coefficients(flint.fmpz_poly(base)**3, 4)
    # 1 / (1 - t x) = sum t^k x^k (geometric series), t = 2^63 + 5
    t = 2**63 + 5
    assert [int(v) for v in polyconv.inverse_series([1, -t], 5)] == [t**k for k in range(5)]


@pytest.mark.parametrize("bad", [(i for i in range(3)), {1: 2}, {1, 2}, iter([1, 2])],
                         ids=["generator", "dict", "set", "iterator"])
def test_unordered_containers_are_refused_by_name(bad):
    # common practice, no source: a clear TypeError naming the argument, not "a scalar"
    with pytest.raises(TypeError, match="^b must be an array-like.*pass list"):
        polyconv.convolve([1, 2], bad)
    with pytest.raises(TypeError, match="^a must be an array-like"):
        polyconv.power(bad, 2)
