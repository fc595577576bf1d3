"""The memory budget (polyconv.budget): parsing, precedence, refusal before allocation."""

import os

import pytest

from polyconv import budget


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
