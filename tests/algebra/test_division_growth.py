"""poly_divmod over the integers when the quotient's coefficients grow (issue 12 item 5).

References: python-flint's ``fmpz_poly`` divmod (quotient and remainder), and the definition
``a = q b + r`` with ``deg r < deg b`` checked with Python ints.
"""

from __future__ import annotations

import numpy as np
import pytest

from polyconv.algebra import division, exact_quotient, poly_divmod

flint = pytest.importorskip("flint")


def _random(rng, n, bits):
    return [int(v) << (bits - 30) | int(w) for v, w in
            zip(rng.integers(-2**29, 2**29, n), rng.integers(0, 2**(bits - 30), n), strict=True)]


def _flint_divmod(a, b):
    q, r = divmod(flint.fmpz_poly(a), flint.fmpz_poly(b))
    return [int(v) for v in q.coeffs()], [int(v) for v in r.coeffs()]


def _strip_zeros(x):
    x = [int(v) for v in x]
    while len(x) > 1 and x[-1] == 0:
        x.pop()
    return x


@pytest.mark.parametrize("lead", [1, -1])
def test_growing_quotient_equals_flint(lead):
    # a random dividend over a divisor with 40-bit coefficients: the quotient's coefficients
    # reach thousands of bits (its top is small, its bottom large)
    rng = np.random.default_rng(7 + lead)
    a = _random(rng, 150, 40)
    b = _random(rng, 60, 40) + [lead]
    q, r = poly_divmod(np.array(a, dtype=object), np.array(b, dtype=object))
    fq, fr = _flint_divmod(a, b)
    assert _strip_zeros(q) == fq
    assert _strip_zeros(r) == (fr or [0])
    assert max(abs(int(v)) for v in q).bit_length() > 2000  # the growth this test is about
    bound = division.quotient_bits(np.array(a, dtype=object), np.array(b, dtype=object))
    assert max(abs(int(v)) for v in q).bit_length() <= bound  # the a-priori bound holds


def test_exact_multiple_with_large_roots_keeps_small_sizes():
    # a = q b exactly with small q: the quotient is found at its own size; flint is the reference
    rng = np.random.default_rng(3)
    q0 = [int(v) for v in rng.integers(-2**15, 2**15, 90)]
    b = [int(v) for v in rng.integers(-2**15, 2**15, 70)] + [1]
    a = [int(v) for v in (flint.fmpz_poly(q0) * flint.fmpz_poly(b)).coeffs()]
    a[0] += 5  # a remainder
    q, r = poly_divmod(np.array(a, dtype=np.int64), np.array(b, dtype=np.int64))
    assert q.dtype == np.int64 and q.tolist() == q0
    assert _strip_zeros(r) == [5]


def test_bound_proves_small_quotients():
    # a divisor with small roots: the a-priori bound is near the typical size, so one Newton round
    # mod 2^B is proved without the full product; the definition a = q b + r is the reference
    rng = np.random.default_rng(11)
    a = [int(v) for v in rng.integers(-2**20, 2**20, 80)]
    b = [1, 0, 0, 1] + [0] * 36 + [1]  # roots of modulus ~1
    assert division.quotient_bits(np.array(a), np.array(b)) <= 2 * 24
    q, r = poly_divmod(np.array(a), np.array(b))
    qb = [int(v) for v in (flint.fmpz_poly(q.tolist()) * flint.fmpz_poly(b)).coeffs()]
    total = [x - y for x, y in zip(a, qb + [0] * (len(a) - len(qb)), strict=True)]
    assert total[len(b) - 1:] == [0] * (len(a) - len(b) + 1)
    assert total[:len(b) - 1] == [int(v) for v in r]


@pytest.mark.parametrize("base", [8, 40, None])
def test_halving_splits_equal_flint(monkeypatch, base):
    # the exact halving with recurrence blocks of `base` terms (None: the default) on a quotient
    # of 281 terms, longer than the default block: splits, carries and blocks all run
    if base is not None:
        monkeypatch.setattr(exact_quotient, "_HALVING_BASE", base)
    rng = np.random.default_rng(21)
    a = _random(rng, 340, 36)
    b = _random(rng, 59, 36) + [-1]
    q, r = poly_divmod(np.array(a, dtype=object), np.array(b, dtype=object))
    fq, fr = _flint_divmod(a, b)
    assert _strip_zeros(q) == fq
    assert _strip_zeros(r) == (fr or [0])


@pytest.mark.parametrize("na,nb,lead", [(150, 60, 1), (150, 60, -1), (40, 2, 1), (40, 3, -1),
                                        (200, 100, 1)])
def test_remainder_of_growing_quotient_summed_term_by_term(na, nb, lead):
    """Quotients many times wider than the divisor: the remainder summed term by term (GMP
    products at their true sizes) equals flint's, with zero and negative coefficients in the
    divisor, and q b + r = a with Python ints (the definition)."""
    rng = np.random.default_rng(na + nb)
    a = _random(rng, na, 40)
    b = _random(rng, nb - 1, 40) + [lead]
    if nb > 3:
        b[0] = 0  # (a zero constant term: the divisor has a zero root)
        b[1] = -b[1]
    q, r = poly_divmod(np.array(a, dtype=object), np.array(b, dtype=object))
    eq, er = _flint_divmod(a, b)
    assert [int(v) for v in q] == eq and _strip_zeros(r) == _strip_zeros(er or [0])
    assert max(abs(int(v)) for v in q).bit_length() >= division._NARROW_FACTOR * 40
    prod = [0] * (len(q) + nb - 1)
    for i, u in enumerate(q):
        for j, v in enumerate(b):
            prod[i + j] += int(u) * v
    rr = [int(v) for v in r] + [0] * (len(prod) - len(r))
    assert [p + s for p, s in zip(prod, rr, strict=True)] == a
