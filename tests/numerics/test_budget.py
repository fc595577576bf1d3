"""The memory budget (polyconv.numerics.budget): parsing, precedence, refusal before allocation."""

import os

import numpy as np
import pytest

import polyconv
from polyconv.numerics import budget


def test_parse_budget_binary_prefixes():
    # IEC 80000-13 binary prefixes: Ki = 2^10, Mi = 2^20, Gi = 2^30, Ti = 2^40
    assert budget.parse_budget("8G") == 8 * 2**30
    assert budget.parse_budget("512M") == 512 * 2**20
    assert budget.parse_budget("1.5e9") == 1_500_000_000
    assert budget.parse_budget("2KiB") == 2048


@pytest.mark.parametrize("text", ["nan", "inf", "-1", "0", "", "8X", "\u0661\u0662", "1e400"])
def test_parse_budget_refuses_non_sizes(text):
    with pytest.raises(ValueError, match="POLYCONV_MEMORY_BUDGET"):
        budget.parse_budget(text)


def test_precedence_context_then_environment(monkeypatch):
    monkeypatch.setenv(budget.ENV_VARIABLE, "1M")
    assert budget.memory_budget() == 2**20
    with budget.using_budget("2M"):
        assert budget.memory_budget() == 2 * 2**20
        with pytest.raises(budget.MemoryBudgetError, match="length=9"):
            budget.check_allocation(4 * 2**20, "length=9")
        budget.check_allocation(2 * 2**20, "fits exactly")
    assert budget.memory_budget() == 2**20
    monkeypatch.delenv(budget.ENV_VARIABLE)
    assert budget.memory_budget() == budget.default_budget()


def test_default_is_a_fraction_of_physical_memory():
    # os.sysconf is the operating system's own count of physical pages
    total = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    assert budget.default_budget() == int(total * budget.DEFAULT_FRACTION)


def test_nan_and_inf_requests_are_refused():
    for size in (float("nan"), float("inf")):
        with pytest.raises(budget.MemoryBudgetError, match="power"):
            budget.check_allocation(size, "power")


# ----------------------------------------------------------------------------- refused up front
# Sizes by arithmetic: 2^40 int64 or float64 coefficients are 8 TiB; 2^(2^40) has 2^40 bits.
# Each call must be refused at once (before any product), naming the argument at fault.

P = 998244353  # an NTT prime (common practice, no source)


@pytest.mark.parametrize("call, named", [
    (lambda: polyconv.power([1, 1], 2**40, modulus=P), "k=1099511627776"),
    (lambda: polyconv.power([2], 2**40), "k=1099511627776"),
    (lambda: polyconv.inverse_series([1.0, 1.0], 2**40), "length=1099511627776"),
    (lambda: polyconv.product([[1, 1]] * 3, length=2**40), "length=1099511627776"),
    (lambda: polyconv.convolve([1, 2], [3, 4], length=2**40), "length=1099511627776"),
    (lambda: polyconv.convolve([1.0, 2.0], [3.0], length=2**40), "length=1099511627776"),
    (lambda: polyconv.convolve(np.ones((2**20, 4)), np.ones(2**20)), "batch of 1048576"),
])
def test_oversized_requests_are_refused_before_allocating(call, named):
    with pytest.raises(budget.MemoryBudgetError, match=named):
        call()


def test_a_smaller_budget_refuses_what_the_default_allows(monkeypatch, tmp_path):
    # 2^21 float64 coefficients (16 MiB) fit the default budget, not a 4 MiB one
    a = np.ones(2**20)
    assert polyconv.convolve(a, [1.0, 1.0]).shape == (2**20 + 1,)
    monkeypatch.setenv(budget.ENV_VARIABLE, "4M")
    with pytest.raises(budget.MemoryBudgetError, match="a \\(1048576 coefficients\\)"):
        polyconv.convolve(a, [1.0, 1.0])
    from polyconv.scale.streaming import convolve_file
    np.save(tmp_path / "x.npy", np.ones(2**18))
    with pytest.raises(budget.MemoryBudgetError, match="block=262144"):
        convolve_file(tmp_path / "x.npy", [1.0, 2.0], tmp_path / "y.npy", block=2**18)
    assert not (tmp_path / "y.npy").exists()


def test_truncated_power_with_a_huge_exponent_still_runs():
    # reference: math.comb (binomial theorem: (1 + x)^k has coefficients C(k, j))
    import math
    k = 2**40
    assert [int(v) for v in polyconv.power([1, 1], k, length=4)] == [math.comb(k, j)
                                                                     for j in range(4)]
