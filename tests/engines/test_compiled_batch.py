"""Batched row products and product trees (polyconv.engines.ntt_batch) against python-flint.

Every row of a batch is compared with python-flint's ``nmod_poly`` / ``fmpz_poly`` product of
the same row (the reference); shapes cover both sides of the schoolbook/NTT cutoff.
"""

from __future__ import annotations

import numpy as np
import pytest

flint = pytest.importorskip("flint")
pytest.importorskip("numba")

from flint_rows import flint_row_product as _reference  # noqa: E402

from polyconv.engines import ntt_batch as nb  # noqa: E402

P = 998244353


pytestmark = pytest.mark.usefixtures("batch_kernels")


SHAPES = [(1, 1, 1), (5, 3, 4), (4, 1, 9), (3, 40, 50), (2, 130, 100), (2, 700, 3)]


@pytest.mark.parametrize("rows,n1,n2", SHAPES)
def test_rows_mod_prime_equal_flint(rows, n1, n2):
    rng = np.random.default_rng(rows * 1000 + n1 + n2)
    a = rng.integers(-2**63, 2**63 - 1, (rows, n1))  # any int64: reduced inside
    b = rng.integers(0, P, (rows, n2))
    b[0, -1] = P - 1
    out = nb.multiply_rows_mod_prime(a, b, P)
    assert out.shape == (rows, n1 + n2 - 1)
    for r in range(rows):
        assert out[r].tolist() == _reference(a[r], b[r], P)
    kept = nb.multiply_rows_mod_prime(a, b, P, keep=2)
    assert kept.tolist() == out[:, :2].tolist()


def test_one_row_broadcasts_and_bad_rows_are_refused():
    rng = np.random.default_rng(3)
    a = rng.integers(0, P, 7)
    b = rng.integers(0, P, (3, 5))
    out = nb.multiply_rows_mod_prime(a, b, P)
    for r in range(3):
        assert out[r].tolist() == _reference(a, b[r], P)  # python-flint
    with pytest.raises(ValueError, match="row counts"):
        nb.multiply_rows_mod_prime(np.ones((2, 3), np.int64), np.ones((3, 3), np.int64), P)
    with pytest.raises(ValueError, match="NTT prime"):
        nb.multiply_rows_mod_prime(a, b, 10**9 + 9)


@pytest.mark.parametrize("bits", [8, 31, 62, 64, 200])
@pytest.mark.parametrize("rows,n1,n2", [(6, 4, 3), (2, 90, 80), (2, 600, 520)])
def test_rows_exact_equal_flint(bits, rows, n1, n2):
    rng = np.random.default_rng(bits + n1)
    if bits <= 62:
        a = rng.integers(-2**bits, 2**bits, (rows, n1))
        b = rng.integers(-2**bits, 2**bits, (rows, n2))
        b[-1] = 2**bits - 1  # adversarial: every product at the bound
        a[-1] = 2**bits - 1
    else:
        top = 2**bits - 1
        a = np.array([[top if i % 3 else -int(v) << (bits - 62) for i, v in enumerate(row)]
                      for row in rng.integers(0, 2**62, (rows, n1))], dtype=object)
        b = np.array([[-top if i % 2 else int(v) << (bits - 62) for i, v in enumerate(row)]
                      for row in rng.integers(0, 2**62, (rows, n2))], dtype=object)
    bound = min(n1, n2) * (2**bits) ** 2
    out = nb.multiply_rows_exact(a, b, bound)
    assert out.dtype == (np.int64 if bound < 2**63 else object)
    for r in range(rows):
        assert [int(v) for v in out[r]] == _reference(a[r], b[r])  # python-flint fmpz_poly


def test_wrapping_schoolbook_is_exact_past_int64_partial_sums():
    # every partial sum leaves int64 but each final coefficient fits: arithmetic modulo 2^64 is
    # a ring homomorphism (common practice, no source); the reference is python-flint
    a = np.array([[2**62, 2**62, -2**62, -2**62]], dtype=np.int64)
    b = np.array([[3, 3]], dtype=np.int64)
    out = nb.multiply_rows_exact(a, b, 2**62 * 3)
    assert out[0].tolist() == _reference(a[0], b[0])


@pytest.mark.parametrize("m", [2**61 - 1, 10**9, 2**62 + 135, 2**64 + 13, (1 << 200) - 75])
def test_rows_mod_any_modulus_equal_flint(m):
    rng = np.random.default_rng(m % 1000)
    dtype = np.int64 if m <= 2**63 else object
    for rows, n1, n2 in [(4, 3, 5), (2, 150, 140)]:
        a = np.array([[int(v) * 7919 % m for v in rng.integers(0, 2**62, n1)] for _ in range(rows)],
                     dtype=dtype)
        b = np.array([[int(v) * 104729 % m for v in rng.integers(0, 2**62, n2)]
                      for _ in range(rows)], dtype=dtype)
        a[0, 0] = m - 1
        b[0, :] = m - 1
        out = nb.multiply_rows_mod(a, b, m)
        for r in range(rows):
            assert [int(v) for v in out[r]] == _reference(a[r], b[r], m)


@pytest.mark.parametrize("m", [P, 2**61 - 1])
def test_product_tree_equal_flint(m):
    rng = np.random.default_rng(11)
    factors = [rng.integers(0, min(m, 2**62), 2) for _ in range(101)]
    factors += [rng.integers(0, min(m, 2**62), k) for k in (1, 3, 17, 64, 300)]
    ref = flint.nmod_poly([1], m)
    for f in factors:
        ref *= flint.nmod_poly(f.tolist(), m)  # python-flint's product, factor by factor
    want = [int(v) for v in ref.coeffs()]
    got = nb.product_mod(factors, m)
    assert got.tolist() == want + [0] * (len(got) - len(want))
    assert nb.product_mod(factors, m, keep=40).tolist() == want[:40]
    same = [rng.integers(0, min(m, 2**62), 3) for _ in range(9)]
    ref = flint.nmod_poly([1], m)
    for f in same:
        ref *= flint.nmod_poly(f.tolist(), m)
    assert nb.product_mod(same, m).tolist() == [int(v) for v in ref.coeffs()]
    with pytest.raises(ValueError, match="factors"):
        nb.product_mod([], m)


@pytest.mark.parametrize("m", [P, 10**9 + 7])
def test_algebra_product_mod_takes_the_batched_tree(m):
    # polyconv.product with the kernels loaded runs one batched call per tree level; the
    # reference is python-flint's nmod_poly product, factor by factor
    from polyconv import algebra

    rng = np.random.default_rng(5)
    factors = [rng.integers(1, m, 2) for _ in range(300)]
    ref = flint.nmod_poly([1], m)
    for f in factors:
        ref *= flint.nmod_poly(f.tolist(), m)
    want = [int(v) for v in ref.coeffs()]
    with algebra.counting_products() as log:
        got = algebra.product(factors, modulus=m)
    assert got.tolist() == want
    assert len(log) == 299 and log[0][2] == "batched"
    assert algebra.product(np.array(factors), modulus=m).tolist() == want  # a 2-D stack
    assert algebra.product(factors, modulus=m, length=7).tolist() == want[:7]
    assert algebra.product(factors, modulus=m, length=400).tolist() == want + [0] * 99
    factors[3] = np.array([0, 5])  # a factor to trim: the general path, same answer
    ref = flint.nmod_poly([1], m)
    for f in factors:
        ref *= flint.nmod_poly(f.tolist(), m)
    assert algebra.product(factors, modulus=m).tolist() == [int(v) for v in ref.coeffs()]


def test_algebra_small_products_skip_planning_and_match_flint():
    # with the kernels loaded, short int64 products of the algebra go straight to ntt_batch
    # (rings._small_product); python-flint's nmod_series / fmpz_poly / divmod are the references
    from polyconv import algebra
    from polyconv.algebra import rings

    rng = np.random.default_rng(9)
    a = rng.integers(0, P, 100)
    a[0] = 3
    x, y = rng.integers(0, P, 9), rng.integers(0, P, 70)
    assert rings._small_product(x, y, P, None, "valid", (P - 1, P - 1)).tolist() == \
        [int(v) for v in (flint.nmod_poly(x.tolist(), P) * flint.nmod_poly(y.tolist(), P))
         .coeffs()][8:70]
    inv = algebra.inverse_series(a, 100, modulus=P)
    want = flint.nmod_poly(a.tolist(), P) * flint.nmod_poly(inv.tolist(), P)
    assert [int(v) for v in want.coeffs()][:100] == [1] + [0] * 99  # a * (1/a) = 1 mod x^100
    small = rng.integers(-50, 50, 12)
    assert algebra.power(small, 5).tolist() == [
        int(v) for v in (flint.fmpz_poly(small.tolist()) ** 5).coeffs()] + [0] * (
        55 - len((flint.fmpz_poly(small.tolist()) ** 5).coeffs()))
    num, den = rng.integers(0, P, 120), rng.integers(0, P, 50)
    q, r = algebra.poly_divmod(num, den, modulus=P)
    fq, fr = divmod(flint.nmod_poly(num.tolist(), P), flint.nmod_poly(den.tolist(), P))
    assert q.tolist() == [int(v) for v in fq.coeffs()]
    assert r.tolist()[:len(fr.coeffs())] == [int(v) for v in fr.coeffs()]
    assert rings._small_product(x, y, P, None, "full", None) is None  # residues not certified


def test_algebra_product_over_z_batches_its_int64_levels():
    # 101 linear 8-bit factors over Z: the low tree levels run as batched int64 products, the
    # rest on the heap; python-flint's fmpz_poly product (factor by factor) is the reference
    from polyconv import algebra

    rng = np.random.default_rng(21)
    factors = [np.array([int(v) or 1, int(w) or -1]) for v, w in rng.integers(-128, 128, (101, 2))]
    ref = flint.fmpz_poly([1])
    for f in factors:
        ref *= flint.fmpz_poly(f.tolist())
    with algebra.counting_products() as log:
        got = algebra.product(factors)
    assert [int(v) for v in got] == [int(v) for v in ref.coeffs()]
    assert sum(1 for entry in log if entry[2] == "batched") >= 50 + 25  # two int64 levels
    assert len(log) == 100


def test_small_product_equals_flint_and_declines_what_it_cannot_do():
    rng = np.random.default_rng(31)
    x, y = rng.integers(-2**20, 2**20, 64), rng.integers(-2**20, 2**20, 64)
    assert nb.small_product(x, y).tolist() == _reference(x, y)  # python-flint fmpz_poly
    wx, wy = rng.integers(-2**62, 2**62, 64), rng.integers(-2**62, 2**62, 64)
    assert nb.small_product(wx, wy) is None  # past int64 and wide=False
    assert [int(v) for v in nb.small_product(wx, wy, wide=True)] == _reference(wx, wy)
    rx, ry = rng.integers(0, P, 30), rng.integers(0, P, 50)
    assert nb.small_product(rx, ry, P, keep=20).tolist() == _reference(rx, ry, P)[:20]
    negative = rx.copy()
    negative[0] = -1
    assert nb.small_product(negative, ry, P) is None  # residues are checked
    assert nb.small_product(np.arange(200), np.arange(200)) is None  # too long for this path
    assert nb.small_product(rx.astype(np.float64), ry) is None  # int64 only


@pytest.mark.parametrize("rows,n1,n2,top", [(50, 4, 4, 2**62), (20, 7, 5, 2**61),
                                            (3, 32, 32, 2**58), (4, 1, 1, 2**63),
                                            (2, 300, 200, 2**55)])
def test_rows_exact_128_bit_sums_equal_flint(rows, n1, n2, top):
    """Products between 2^63 and 2^127 in 128-bit schoolbook sums (the extreme int64 -2^63
    included), each row against flint."""
    rng = np.random.default_rng(rows + n1 + n2)
    a = rng.integers(-top, top - 1, (rows, n1), endpoint=True)
    b = rng.integers(-top, top - 1, (rows, n2), endpoint=True)
    if top == 2**63:
        a[0, 0], b[0, 0], a[1, 0], b[1, 0] = -2**63, -2**63, -2**63, 2**63 - 1
    bound = min(n1, n2) * top * top
    assert 2**63 <= bound < 2**127 and n1 * n2 <= nb.SCHOOLBOOK_WORK_128
    got = nb.multiply_rows_exact(a, b, bound)
    assert got.dtype == object
    for r in range(rows):
        assert [int(v) for v in got[r]] == _reference(a[r], b[r])  # python-flint fmpz_poly
