"""Every engine of the registry against an outside reference, on random and adversarial inputs.

References: numpy.convolve for floats (the difference must stay within the sum of polyconv's
rigorous bound for the engine and Higham's bound for direct summation, the latter covering
numpy's own rounding: Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., 3.1);
python-flint's ``fmpz_poly`` product for integers, reduced with Python ints for a modulus.
Every refusal must name the engine and say why.
"""

from __future__ import annotations

import numpy as np
import pytest

import polyconv
from polyconv.engines.registry import EXACT_ENGINES, FLOAT_ENGINES, REGISTRY
from polyconv.pipeline.plan import METHODS

flint = pytest.importorskip("flint")
RNG = np.random.default_rng(20261203)
I64_MAX = 2**63 - 1


def _int_cases():
    """(name, a, b): random, near 2^63, zeros, one huge value, length one, object big ints."""
    return [
        ("random", RNG.integers(-1000, 1000, 60), RNG.integers(-1000, 1000, 37)),
        ("near-2^63", np.array([I64_MAX, -I64_MAX - 1, I64_MAX, 5], dtype=np.int64),
         np.array([-I64_MAX - 1, I64_MAX, 3], dtype=np.int64)),
        ("zeros", np.zeros(40, dtype=np.int64), RNG.integers(-2**62, 2**62, 25)),
        ("one-huge", np.array([0, 0, 2**200, 0], dtype=object), np.array([3, -1], dtype=object)),
        ("length-one", np.array([-7]), RNG.integers(-2**40, 2**40, 30)),
        ("wide-random", RNG.integers(-2**30, 2**30, 300), RNG.integers(-2**30, 2**30, 200)),
        ("long-small", RNG.integers(0, 8, 500), RNG.integers(-8, 8, 400)),
    ]


#: Modulus classes: none, tiny composite, NTT prime, prime below 2^31, odd below 2^62 (Mersenne
#: prime 2^61 - 1), powers of two 2^62 and 2^64, and one above int64.
MODULI = [None, 10, 998244353, 2**31 - 1, 2**61 - 1, 2**62, 2**64, 2**89 - 1]


def _exact_reference(a, b, modulus):
    """python-flint fmpz_poly product, reduced with Python ints."""
    c = flint.fmpz_poly([int(v) for v in a]) * flint.fmpz_poly([int(v) for v in b])
    coeffs = [int(v) for v in c.coeffs()]
    coeffs += [0] * (len(a) + len(b) - 1 - len(coeffs))  # fmpz_poly drops trailing zeros
    return coeffs if modulus is None else [v % modulus for v in coeffs]


def _check_refusal(name: str, error: ValueError) -> None:
    text = str(error)
    assert f"method={name!r}" in text
    why = text.split(f"method={name!r}", 1)[1]
    assert len(why.strip(" :")) > 20, text  # a reason, not just a name


def test_registry_is_the_method_list():
    # every engine is reachable through method= and nothing else is an engine
    assert METHODS == ("auto",) + tuple(REGISTRY)
    assert set(FLOAT_ENGINES) | set(EXACT_ENGINES) == set(REGISTRY)
    for name, engine in REGISTRY.items():
        assert engine.name == name and engine.kinds and callable(engine.option)
        if engine.when_unavailable is not None:
            assert engine.when_unavailable in REGISTRY


@pytest.mark.parametrize("name", EXACT_ENGINES)
def test_exact_engine_against_flint(name):
    ran = 0
    for label, a, b in _int_cases():
        for m in MODULI:
            try:
                pl = polyconv.plan(a, b, method=name, modulus=m)
            except ValueError as exc:
                _check_refusal(name, exc)
                continue
            got = polyconv.convolve(a, b, method=name, modulus=m)
            assert pl.engine == name and pl.exact
            assert got.dtype == (np.int64 if pl.output_int64 else object), (label, m)
            assert [int(v) for v in got] == _exact_reference(a, b, m), (label, m)
            ran += 1
    assert ran >= 3  # the engine serves some of these products (a silent registry entry fails)


@pytest.mark.parametrize("name", EXACT_ENGINES)
def test_exact_engine_modes(name):
    a, b = RNG.integers(-2**20, 2**20, 90), RNG.integers(-2**20, 2**20, 41)
    full = _exact_reference(a, b, None)
    for mode, length, want in (("valid", None, full[40:90]), ("same", None, full[20:110]),
                               ("full", 17, full[:17])):
        try:
            got = polyconv.convolve(a, b, method=name, mode=mode, length=length)
        except ValueError as exc:
            _check_refusal(name, exc)
            continue
        assert [int(v) for v in got] == want, (mode, length)  # numpy.convolve's mode slices


def _float_cases():
    return [
        ("random", RNG.standard_normal(200), RNG.standard_normal(31)),
        ("complex", RNG.standard_normal(64) + 1j * RNG.standard_normal(64),
         RNG.standard_normal(9) - 2j),
        ("zeros", np.zeros(50), RNG.standard_normal(20)),
        ("huge-and-tiny", np.array([1e300, -1e-300, 3.0, 1e150]), np.array([1e-10, 2.0])),
        ("batch", RNG.standard_normal((3, 40)), RNG.standard_normal(7)),
        ("length-one", np.array([2.5]), RNG.standard_normal(33)),
    ]


@pytest.mark.parametrize("name", FLOAT_ENGINES)
def test_float_engine_against_numpy(name):
    ran = 0
    for label, a, b in _float_cases():
        try:
            pl = polyconv.plan(a, b, method=name)
        except ValueError as exc:
            _check_refusal(name, exc)
            continue
        got = polyconv.convolve(a, b, method=name)
        ref = np.array([np.convolve(r, b) for r in np.atleast_2d(a)]).reshape(got.shape)
        tol = pl.error_bound + polyconv.error_bound(a, b, polyconv.plan(a, b, method="direct"))
        assert np.max(np.abs(got - ref)) <= tol, label
        ran += 1
    assert ran >= 3


@pytest.mark.parametrize("name", FLOAT_ENGINES)
def test_float_engine_refuses_integers_with_a_reason(name):
    with pytest.raises(ValueError) as info:
        polyconv.plan([1, 2, 3], [4, 5], method=name)
    _check_refusal(name, info.value)
    assert "exactly" in str(info.value)


@pytest.mark.parametrize("name", EXACT_ENGINES)
def test_exact_engine_refuses_floats_with_a_reason(name):
    with pytest.raises(ValueError) as info:
        polyconv.plan([1.5, 2.0], [4.0], method=name)
    _check_refusal(name, info.value)
    assert "real numbers" in str(info.value)
