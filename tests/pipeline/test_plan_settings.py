"""Typed engine settings of a Plan: one frozen record per engine family (issue 15, item 5)."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

import polyconv
from polyconv.engines.registry import REGISTRY
from polyconv.pipeline.plan import (
    SETTINGS_RECORDS,
    ExactSettings,
    FloatSettings,
    LimbSettings,
    NttSettings,
    engine_settings,
)

A = np.arange(1, 3001, dtype=np.int64) * 1000
B = np.arange(3000, 0, -1, dtype=np.int64)


def _offered(a, b, method):
    try:
        return polyconv.plan(a, b, method=method)
    except ValueError:  # the engine refuses here (e.g. no compiled kernels): nothing to check
        return None


@pytest.mark.parametrize("method", list(REGISTRY))
def test_every_engine_plans_with_a_frozen_record_that_reads_as_pairs(method):
    exact = REGISTRY[method].exact
    a, b = (A, B) if exact else (A.astype(float), B[:40].astype(float))  # overlap-add: n2 << n1
    the_plan = _offered(a, b, method)
    if the_plan is None:
        pytest.skip(f"{method} is not offered here")
    record = the_plan.settings
    assert type(record) in SETTINGS_RECORDS
    assert isinstance(record, ExactSettings) == exact
    assert type(record).__dataclass_params__.frozen  # a plan's settings cannot change
    if exact:
        with pytest.raises(dataclasses.FrozenInstanceError):
            record.product_int64 = not record.product_int64
    pairs = dict(record)
    assert list(pairs) == [f.name for f in dataclasses.fields(record)]
    for name, value in pairs.items():
        assert the_plan.setting(name) == value == getattr(record, name)
    assert the_plan.setting("no_such_setting", 17) == 17
    if exact:
        # product_int64 is the bound min(n1, n2) max|a| max|b| < 2^63 (worked by hand here:
        # 3000 * 3_000_000 * 3000 < 2^63)
        assert record.product_int64 is (3000 * int(A.max()) * int(B.max()) < 2**63)


def test_limb_record_covers_the_operands():
    # a split into k limbs of `bits` bits represents values below 2^(k bits) (definition of the
    # limb split; common practice, no source)
    the_plan = polyconv.plan(A, B, method="limbs")
    s = the_plan.settings
    assert isinstance(s, LimbSettings)
    assert s.limbs_a * s.limb_bits >= int(A.max()).bit_length()
    assert s.limbs_b * s.limb_bits >= int(B.max()).bit_length()
    assert f"limbs_a={s.limbs_a}" in str(the_plan)


def test_ntt_record_primes_exceed_the_signed_range():
    # CRT reconstruction of signed coefficients |c| <= bound needs prod(primes) > 2 bound
    # (Garner's algorithm, Knuth TAOCP vol. 2, 4.3.2)
    the_plan = polyconv.plan(A, B, method="ntt")
    s = the_plan.settings
    assert isinstance(s, NttSettings)
    bound = 3000 * int(A.max()) * int(B.max())
    assert math.prod(s.ntt_primes) > 2 * bound
    got = polyconv.convolve(A, B, method="ntt")
    assert got.tolist() == np.convolve(A, B).tolist()  # reference: numpy (fits int64 here)


def test_float_plans_carry_the_empty_record():
    the_plan = polyconv.plan([1.0, 2.0], [3.0])
    assert the_plan.settings == FloatSettings() and not the_plan.settings
    assert "settings:" not in str(the_plan)


def test_an_unknown_engine_parameter_is_refused_by_name():
    with pytest.raises(TypeError, match=r"engine 'newcomer' offered settings \['colour'"):
        engine_settings("newcomer", {"colour": "blue", "product_int64": True})


def test_a_wide_prime_bound_prints_as_a_power_of_two_that_covers_the_product():
    # The printed "ntt_bound=< 2^k" must cover every coefficient of the exact product;
    # reference product: python-flint fmpz_poly multiply (general-purpose library).
    flint = pytest.importorskip("flint")
    rng = np.random.default_rng(5)
    a = [int(v) << 900 for v in rng.integers(-2**40, 2**40, size=40)]
    b = [int(v) << 900 for v in rng.integers(-2**40, 2**40, size=30)]
    the_plan = _offered(np.array(a, dtype=object), np.array(b, dtype=object), "ntt-wide")
    if the_plan is None:
        pytest.skip("ntt-wide is not offered here (compiled kernels absent)")
    text = str(the_plan)
    (setting,) = [s for s in text.split("settings:")[1].split("\n")[0].split(", ")
                  if s.strip().startswith("ntt_bound=")]
    k = int(setting.split("< 2^")[1])
    exact = [int(c) for c in (flint.fmpz_poly(a) * flint.fmpz_poly(b)).coeffs()]
    assert max(abs(c) for c in exact) < 2**k
    assert len(text) < 2000  # no 2000-digit integer in the report
