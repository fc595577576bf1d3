"""Regression tests for what bench/robustness_campaign.py reported (issue 16, second campaign).

Each test names the campaign's finding; the expected values come from arithmetic stated beside
each check.
"""

import numpy as np
import pytest

import polyconv
from polyconv.numerics import budget

# ----------------------------------------------------------------------------- convolve_chunks
# Finding: None entries reached abs() ("bad operand type for abs(): 'NoneType'") or were named
# "a" (the name inside the product of one chunk) instead of the argument the user passed.


@pytest.mark.parametrize("chunks, kernel, named", [
    ([None], [1, 2], r"chunks\[0\] is None"),
    ([[1, 2], None], [1], r"chunks\[1\] is None"),
    ([[1, None]], [1], r"chunks\[0\] must hold numbers; found an entry of type NoneType"),
    ([[None]], [1], r"chunks\[0\] must hold numbers"),
    (None, [1], r"chunks must be an iterable"),
    (5, [1], r"chunks must be an iterable"),
    ("12", [1], r"chunks must be an iterable"),
    ([[1, 2]], [1, None], r"kernel must hold numbers; found an entry of type NoneType"),
])
def test_convolve_chunks_names_a_bad_chunk(chunks, kernel, named):
    with pytest.raises(TypeError, match=named):
        list(polyconv.convolve_chunks(chunks, kernel))


def test_convolve_chunks_with_object_ints_still_exact():
    # reference: (1 + 2^70 x) (1 + 2^65 x) = 1 + (2^70 + 2^65) x + 2^135 x^2 (expanded by hand)
    out = np.concatenate(list(polyconv.convolve_chunks([[1], [2**70]], [1, 2**65])))
    assert [int(v) for v in out] == [1, 2**70 + 2**65, 2**135]


# ----------------------------------------------------------------------------- algebra sizes
# Finding: power() of an all-zero operand allocated k (len - 1) + 1 zeros without the budget
# check ("Unable to allocate 792 TiB").  2^40 * 98 + 1 int64 zeros are 784 TiB (arithmetic).


def test_power_of_zeros_is_refused_before_allocating():
    with budget.using_budget("1G"):
        with pytest.raises(budget.MemoryBudgetError, match="k=1099511627776"):
            polyconv.power([0] * 99, 2**40)
        with pytest.raises(budget.MemoryBudgetError, match="k=1099511627776"):
            polyconv.power([0, 0], 2**40, modulus=7)
        with pytest.raises(budget.MemoryBudgetError, match="length=1099511627776"):
            polyconv.product([[0], [1, 1]], length=2**40)
    # a small all-zero power is still all zeros: 0^3 of a degree-1 polynomial has 4 terms
    assert polyconv.power([0, 0], 3).tolist() == [0, 0, 0, 0]


def test_inverse_series_growth_is_checked_at_the_final_length_up_front():
    # b = 1 / (1 - c x - c x^2) with c = 2^60 satisfies b_j = c (b_(j-1) + b_(j-2)) (comparing
    # coefficients of a b = 1), so b_j >= 2^(60 j): at j = 4095 each coefficient has ~245,700
    # bits (about 32 KiB), 4096 of them ~128 MiB, over a 64 MiB budget.  The refusal must come
    # before the Newton steps, so it names the final step (4096 terms), not an earlier one.
    with budget.using_budget("64M"):
        with pytest.raises(budget.MemoryBudgetError, match="at its step to 4096 terms"):
            polyconv.inverse_series([1, -2**60, -2**60], 4096)
    # the same series at a small length is exact: Fibonacci-like recurrence by hand
    c = 2**60
    want = [1, c, c * (c + 1)]
    assert [int(v) for v in polyconv.inverse_series([1, -c, -c], 3)] == want


# ----------------------------------------------------------------------------- huge int * float
# Finding: a Python int beyond float64's range among float operands raised numpy's bare
# "int too large to convert to float" (from plan() and convolve(), so from `polyconv multiply`).


@pytest.mark.parametrize("a, b, named", [
    ([10**5000], [1.5], "a holds an integer too large for floating point"),
    ([1.5, 2.0], [10**400, 1], "b holds an integer too large for floating point"),
])
def test_huge_int_among_floats_is_named(a, b, named):
    with pytest.raises(ValueError, match=named):
        polyconv.convolve(a, b)
    with pytest.raises(ValueError, match=named):
        polyconv.plan(a, b)


def test_large_but_finite_int_among_floats_still_multiplies():
    # 10^300 * 1.5 = 1.5e300 (float64 holds up to about 1.8e308; IEEE 754 binary64)
    assert polyconv.convolve([10**300], [1.5]).tolist() == [1.5e300]


# ----------------------------------------------------------------------------- convolve_file
# Finding: a header whose shape tuple is cut (`(58,R, }`) made numpy's header tokenizer raise
# tokenize.TokenError, which reached the user raw.


def test_convolve_file_names_a_header_numpy_cannot_tokenize(tmp_path):
    src = tmp_path / "src.npy"
    np.save(src, np.arange(58))
    raw = bytearray(src.read_bytes())
    at = raw.index(b"(58,") + 4
    raw[at] = ord("R")  # the tuple now never closes: tokenize reports EOF in a statement
    src.write_bytes(bytes(raw))
    with pytest.raises(ValueError, match="damaged .npy header"):
        polyconv.convolve_file(src, [1, 2, 3], tmp_path / "out.npy")
    assert not (tmp_path / "out.npy").exists()


# ------------------------------------------------------------------------------- from_law
# Finding (issue 16 item 11 audit): a frozen scipy law with parameters outside its family's
# domain (scipy.stats.gamma(-1): the shape must be > 0, scipy's gamma documentation) reached
# math.floor(nan) ("cannot convert float NaN to integer") instead of naming the law.


@pytest.mark.parametrize("family, args, kwds", [("gamma", (-1,), {}), ("lognorm", (), {"s": -1}),
                                               ("gamma", (2,), {"scale": -1})])
def test_a_scipy_law_with_invalid_parameters_is_named(family, args, kwds):
    from scipy import stats

    frozen = getattr(stats, family)(*args, **kwds)
    assert np.isnan(frozen.support()[0])  # scipy's own verdict: the parameters are invalid
    with pytest.raises(ValueError, match=r"law: invalid parameters for scipy\.stats\."):
        polyconv.dist.Lattice.from_law(frozen, step=0.1)


# ----------------------------------------------------------------------------- step check
# Finding (robustness campaign, "hang" over 60 s): Lattice.from_law(lognorm(1, scale=5),
# step=0.1, size=1, rule="moments") searched 40 halvings of the step for a suggestion, the
# last twenty on 2^20-point trial lattices, although no step can pass: one point of step 0.1
# leaves the law's mass beyond 0.1 (scipy: lognorm.sf(0.1) = 0.99991) truncated.


def test_the_step_suggestion_gives_up_when_the_size_truncates_the_law():
    import warnings

    from scipy import stats

    law = stats.lognorm(1.0, scale=5.0)
    assert law.sf(0.1) > 0.999  # scipy: nearly all the mass lies beyond the one point
    res = polyconv.dist.check_step(law, step=0.1, size=1, rule="moments", warn=False)
    assert not res.ok and np.isnan(res.suggested_step)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        polyconv.dist.Lattice.from_law(law, step=0.1, size=1, rule="moments")
    assert any("raise size" in str(w.message) for w in caught)
    # a step that is merely coarse still gets a suggestion that passes the same check, also
    # from a step far beyond the law's scale (was 1e300 / 2^40 = 9.1e287, failing again)
    for step in (3.0, 1e300):
        coarse = polyconv.dist.check_step(law, step=step, warn=False)
        assert not coarse.ok and coarse.suggested_step < 100.0
        assert polyconv.dist.check_step(law, step=coarse.suggested_step, warn=False).ok


# -------------------------------------------------- third campaign (seed 17, 1200 s) findings


def test_stop_loss_is_not_snapped_to_a_point_of_a_huge_step():
    # Finding ("wrong"): Lattice([1.0], 1e300, 2.0).stop_loss(0.0) was 0.0 with the certified
    # range [0, 0]: d = 0 lies within 1e-9 steps of the point 2 and was snapped to it.
    # X = 2 surely, so E[(X - 0)+] = 2 (definition of the stop-loss premium).
    lat = polyconv.dist.Lattice([1.0], 1e300, 2.0)
    assert lat.stop_loss(0.0) == pytest.approx(2.0, rel=1e-12)
    b = lat.bounded("stop_loss", 0.0)
    assert b.low <= 2.0 <= b.high
    # a unit step: d just below the point 1 counts the sliver (1 - d) P(X >= 1) (direct sum)
    small = polyconv.dist.Lattice([0.2, 0.3, 0.5])
    d = 1 - 1e-12
    assert small.stop_loss(d) == pytest.approx(0.3 * (1 - d) + 0.5 * (2 - d), rel=1e-12)


def test_moments_rule_cells_are_integrated_in_blocks():
    # Finding ("memory"): from_law(..., rule="moments") built 12 Gauss nodes x all cells at once
    # (1.5 GiB at 2^24 points), beyond the 64 bytes per point checked against the budget
    import tracemalloc

    from scipy import stats

    from polyconv.dist import from_law

    law = from_law.LawAccess(stats.lognorm(1.0, scale=5.0))
    nodes, weights = from_law._GL_NODES, from_law._GL_WEIGHTS
    n = 1 << 21
    tracemalloc.start()
    try:
        cells = from_law._cell_integrals(law, 0.0, 1e-4, n, nodes, weights)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 8 * nodes.size * n  # below one nodes x cells array of the old code
    # Gauss-Legendre on each cell against scipy's own integral of S (sf) over a few cells
    from scipy import integrate

    for j in (0, 1, 1000, n - 1):
        ref = integrate.quad(law.frozen.sf, 1e-4 * j, 1e-4 * (j + 1), epsabs=0, epsrel=1e-13)[0]
        assert cells[j] == pytest.approx(ref, rel=1e-9)


def test_weibull_tail_moments_far_beyond_the_float_range_of_z_to_the_c():
    # Finding ("unclear", delays with step 1e300): z ** c raised OverflowError "(34, 'Numerical
    # result out of range')".  E[X 1{X > b}] and E[X^2 1{X > b}] vanish as b -> inf (the
    # Weibull tail exp(-b^c), scipy.stats.weibull_min)
    from scipy import stats

    from polyconv.dist import law_moments

    law = stats.weibull_min(2.0)
    assert law_moments.tail_moment(law, 1e300) == 0.0
    assert law_moments.tail_moment2(law, 1e300) == 0.0
    assert law_moments.tail_moment(law, 1.0) == pytest.approx(
        law.expect(lambda x: x, lb=1.0), rel=1e-9)  # scipy quadrature
