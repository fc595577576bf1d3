"""The compiled passes of the negacyclic real product (polyconv.engines._kernels_negacyclic)
give the numpy passes' bits (polyconv.numerics.negacyclic), and numpy's complex product is the
FMA expression the kernels copy; the products themselves are checked against numpy.convolve and
python-flint in tests/numerics/test_negacyclic.py.  Also: overlap-add's kept work arrays give
numpy.convolve's values on consecutive products of different shapes."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("numba")

from polyconv.engines import fft, overlap_add  # noqa: E402
from polyconv.engines import jit_state as jit  # noqa: E402
from polyconv.numerics import negacyclic as ng  # noqa: E402


@pytest.fixture(scope="module")
def passes():
    """The compiled passes, loaded and self-checked once (skipped where they cannot run)."""
    if not ng.USABLE:
        pytest.skip("negacyclic route not used here")
    try:
        jit.kernels()
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    module = fft.negacyclic_kernels()
    if module is None:
        pytest.skip("numpy's complex product is not the FMA expression here")
    return module


def _operands(rng, kind: str, n: int) -> np.ndarray:
    """Adversarial operands (common practice, no source): impulses, all-ones, signs, zeros with
    signs, mixed scales 2^-300..2^300, random."""
    if kind == "impulse":
        x = np.zeros(n)
        x[rng.integers(n)] = 1.0
        return x
    if kind == "ones":
        return np.ones(n)
    if kind == "signed_zeros":
        return np.where(rng.random(n) < 0.5, -0.0, 0.0) + (rng.random(n) < 0.1)
    if kind == "scales":
        return rng.standard_normal(n) * 2.0 ** rng.integers(-300, 300, n)
    return rng.standard_normal(n)


@pytest.mark.parametrize("n_fft", [2**12, 2**13, 2**16, 2**17, 3 * 2**13, 5 * 2**12])
@pytest.mark.parametrize("kind", ["impulse", "ones", "signed_zeros", "scales", "random"])
def test_compiled_passes_give_numpy_bits(passes, n_fft, kind):
    rng = np.random.default_rng(n_fft + len(kind))
    t = ng.tables(n_fft // 2)
    m = n_fft // 2
    # unfolded (both <= m), folded (n1 > m), lengths not powers of two, short keep
    for n1, n2, keep in ((m, m, 2 * m - 1), (m + m // 2 + 3, m // 2 - 7, 2 * m - 5),
                         (m - 11, 37, m + 25), (101, m - 3, m - 40)):
        a, b = _operands(rng, kind, n1), _operands(rng, "random", n2)
        with np.errstate(all="ignore"):
            want = ng._real_product(a, b, t, keep)
            got = ng._real_product(a, b, t, keep, passes)
        assert got.tobytes() == want.tobytes()
        # and the value: numpy.convolve as an independent oracle (finite, moderate scales)
        if kind != "scales" and n1 + n2 - 1 <= n_fft:
            ref = np.convolve(a, b)[:keep]
            assert np.max(np.abs(got - ref)) <= 1e-9 * max(1.0, np.max(np.abs(ref)))


def test_numpy_complex_product_is_the_fma_expression(passes):
    """The expression the kernels copy: numpy 2's complex multiply (its SIMD loop's
    ``npyv_muladdsub``; read from numpy's source loops_arithm_fp.dispatch.c.src, from memory),
    checked through the kernels' own twist on the folded operand."""
    rng = np.random.default_rng(5)
    a, tw = rng.standard_normal(64), np.exp(1j * rng.standard_normal(32))
    u = np.empty(32, dtype=np.complex128)
    passes.twist_unsplit(a, tw, u)
    want = (a[:32] + 1j * a[32:]) * tw
    assert u.tobytes() == want.tobytes()


def test_overlap_add_kept_arrays_match_numpy_convolve():
    rng = np.random.default_rng(9)
    for n, m, n_fft in ((65536, 4096, 16384), (5000, 300, 1024), (65536, 4096, 16384),
                        (65536, 4000, 16384), (70000, 4096, 16384)):
        x, k = rng.standard_normal(n), rng.standard_normal(m)
        got = overlap_add.convolve_overlap_add(x, k, n_fft, 1)
        ref = np.convolve(x, k)  # numpy's direct sum (independent oracle)
        assert np.max(np.abs(got - ref)) <= 1e-10 * np.max(np.abs(ref))


@pytest.mark.parametrize("n_fft", [2**13, 2**17])
def test_read_only_operands_take_the_compiled_passes(passes, n_fft):
    # Operands of the distributions and the CLI arrive as read-only views: the same bits as
    # writable copies through the numpy passes; values against numpy.convolve (reference).
    rng = np.random.default_rng(n_fft)
    m = n_fft // 2
    a, b = rng.standard_normal(m), rng.standard_normal(m - 5)
    ro_a, ro_b = a.copy(), b.copy()
    ro_a.flags.writeable = False
    ro_b.flags.writeable = False
    with np.errstate(all="ignore"):
        got = ng.real_product(ro_a, ro_b, n_fft, 2 * m - 6, passes)
        want = ng.real_product(a, b, n_fft, 2 * m - 6, None)
    assert got.tobytes() == want.tobytes()
    ref = np.convolve(a, b)
    assert np.max(np.abs(got - ref)) <= 1e-10 * np.max(np.abs(ref))
