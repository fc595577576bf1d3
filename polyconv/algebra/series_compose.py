"""Composition of power series ``f(g) mod x^n`` for ``g`` with zero constant term.

Brent & Kung, "Fast algorithms for manipulating formal power series", J. ACM 25 (1978),
Algorithm 2.1 (baby steps, giant steps): with ``m = ceil(sqrt(n))``,

    f(g) = sum_j (sum_(i<m) f_(jm+i) g^i) (g^m)^j   mod x^n,

so the ``m`` baby powers ``g^0 .. g^m`` take ``m`` products, the inner sums are one matrix
product of the ``ceil(len f / m) x m`` block matrix of ``f`` by the ``m x n`` matrix of powers,
and Horner's rule in ``g^m`` takes one product per block: about ``2 sqrt(n)`` products of length
``n`` plus ``n^2`` multiply-adds in the matrix product (BLAS for floats; four exact float64
products of 16-bit halves for residues below ``2^31``, every sum below ``2^53``).  Since
``g^i`` starts at degree ``i``, every product is taken on the shifted operands (``x^i``
divided out), which saves the leading zeros' work.
"""

from __future__ import annotations

import numpy as np

from ..numerics.budget import check_allocation
from .checks import _check_chain, _check_length, _check_modulus, _combine, _sequence
from .rings import _fit, _Floats, _Modular, _Ring, _ring_for

__all__ = ["compose_series"]

#: residues below this take the float64 matrix product (halves of 16 bits, m <= 2^20)
_SPLIT_LIMIT = 2**31
#: columns of the power matrix per matrix product (bounds the work space)
_COLUMNS = 4096


def compose_series(f, g, length: int, *, modulus: int | None = None) -> np.ndarray:
    """The first ``length`` coefficients of ``f(g(x))``.

    Parameters
    ----------
    f : array_like, 1-D
        The outer series (or polynomial), lowest degree first; only its first ``length``
        coefficients matter.
    g : array_like, 1-D
        The inner series; ``g[0]`` must be 0 (modulo ``modulus``), so that every coefficient of
        ``f(g)`` is a finite sum.
    length : int
        Number of coefficients wanted, ``>= 1``.
    modulus : int, optional
        Integer ``f`` and ``g`` only: compute mod ``modulus`` (any modulus).

    Returns
    -------
    numpy.ndarray
        ``length`` coefficients: exact integers (int64 when they fit), residues in
        ``[0, modulus)``, or float64/complex128 when ``f`` or ``g`` is.

    Raises
    ------
    ValueError
        If ``g[0]`` is not zero, or for a bad ``f``, ``g``, ``length`` or ``modulus``.
    TypeError
        For non-numeric input or wrongly typed ``length``/``modulus``.

    Notes
    -----
    Brent & Kung (1978), Algorithm 2.1; about ``2 sqrt(length)`` products of ``length`` terms and
    ``length^2`` multiply-adds (module docstring).  Floats: each coefficient is a sum of products
    of coefficients of ``f`` and ``g``; its rounding error grows with ``length`` and with the
    size of ``g``'s coefficients as for any evaluation of the sum.

    Examples
    --------
    >>> from polyconv.algebra.series_compose import compose_series
    >>> compose_series([1, 1, 1, 1], [0, 1, 1], 5).tolist()    # 1 + y + y^2 + y^3, y = x + x^2
    [1, 1, 2, 3, 4]
    """
    arr_f, kind_f = _sequence(f, "f")
    arr_g, kind_g = _sequence(g, "g")
    kind = _combine([kind_f, kind_g])
    n = _check_length(length, required=True)
    m = _check_modulus(modulus, kind, "f and g hold")
    ring = _ring_for(kind, m)
    x, y = ring.convert(arr_f[:n]), _fit(ring.convert(arr_g[:n]), n)
    if not ring.is_zero(y[0]):
        raise ValueError(f"g[0] must be 0{'' if m is None else f' modulo {m}'} (otherwise every "
                         f"coefficient of f(g) is an infinite sum); got g[0] = {y[0]}")
    _check_chain(ring, n, 0, f"compose_series(f, g, length={n})")
    return ring.to_result(_compose(ring, x, y, n))


def _shifted_product(ring: _Ring, p: np.ndarray, shift_p: int, q: np.ndarray, shift_q: int,
                     n: int) -> np.ndarray:
    """``(x^shift_p p)(x^shift_q q) mod x^n`` with ``p``, ``q`` the parts above the shifts."""
    shift = shift_p + shift_q
    out = ring.zeros(n)
    if shift >= n:
        return out
    room = n - shift
    prod = ring.mul(p[:room], q[:room], length=room)
    out = out.astype(prod.dtype) if prod.dtype != out.dtype else out
    out[shift: shift + prod.shape[0]] = prod[:room]
    return out


def _compose(ring: _Ring, f: np.ndarray, g: np.ndarray, n: int) -> np.ndarray:
    m = max(1, int(np.ceil(np.sqrt(n))))
    blocks = -(-f.shape[0] // m)
    baby = min(m, f.shape[0])  # powers g^0 .. g^(baby-1) enter the inner sums
    top = m if blocks > 1 else baby - 1
    check_allocation((top + 3) * n * ring.zeros(1).itemsize,
                     f"compose_series: {top + 1} powers of g of {n} coefficients")
    powers = [ring.one(n)]
    for i in range(1, top + 1):  # g^i starts at degree i: multiply the parts above x^(i-1), x
        powers.append(_shifted_product(ring, powers[-1][i - 1:], i - 1, g[1:], 1, n))
    inner = _block_sums(ring, _fit(f, blocks * m).reshape(blocks, m)[:, :baby],
                        powers[:baby], n)
    if blocks == 1:
        return inner[0]
    giant = powers[m]
    result = inner[blocks - 1]
    for j in range(blocks - 2, -1, -1):
        result = _add(ring, _shifted_product(ring, result, 0, giant[m:], m, n), inner[j])
    return result


def _add(ring: _Ring, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    return ring.sub(x, ring.neg(y))


def _block_sums(ring: _Ring, coeffs: np.ndarray, powers: list[np.ndarray], n: int) -> list:
    """Row ``j``: ``sum_i coeffs[j, i] powers[i]`` (the baby-step linear combinations)."""
    fast = isinstance(ring, _Floats) or (
        isinstance(ring, _Modular) and ring.modulus < _SPLIT_LIMIT and coeffs.dtype == np.int64)
    if fast:
        out = np.empty((coeffs.shape[0], n), dtype=powers[0].dtype)
        for start in range(0, n, _COLUMNS):  # bounded work space: m x _COLUMNS
            block = np.stack([p[start: start + _COLUMNS] for p in powers])
            out[:, start: start + _COLUMNS] = (coeffs @ block if isinstance(ring, _Floats)
                                               else _matmul_mod(coeffs, block, ring.modulus))
        return list(out)
    rows = []
    for row in coeffs:
        acc = ring.zeros(n)
        for c, power in zip(row.tolist(), powers, strict=True):
            if not ring.is_zero(c):
                acc = _add(ring, acc, ring.scale(power, c))
        rows.append(acc)
    return rows


def _matmul_mod(a: np.ndarray, b: np.ndarray, m: int) -> np.ndarray:
    """``a @ b mod m`` for residues below ``2^31``: 16-bit halves, four float64 products whose
    sums stay below ``2^53`` for inner dimensions up to ``2^20`` (so BLAS is exact)."""
    mask = np.int64(0xFFFF)
    a0, a1 = (a & mask).astype(np.float64), (a >> 16).astype(np.float64)
    b0, b1 = (b & mask).astype(np.float64), (b >> 16).astype(np.float64)
    mm = np.int64(m)

    def part(x, y):
        return np.mod((x @ y).astype(np.int64), mm)

    high = part(a1, b1)
    mid = np.mod(part(a1, b0) + part(a0, b1), mm)
    low = part(a0, b0)
    shift16 = np.int64((1 << 16) % m)
    out = np.mod(np.mod(high * shift16, mm) * shift16, mm)   # each factor < 2^31
    out = np.mod(out + np.mod(mid * shift16, mm), mm)
    return np.mod(out + low, mm)
