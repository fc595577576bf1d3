"""Newton iterations for power series on the coefficient rings of :mod:`polyconv.algebra`.

The kernels behind :mod:`polyconv.algebra.series_functions`: they take already validated arrays in a
ring's form (floats, or residues mod ``m``) and return ``n`` coefficients.  Every product is one
call of the ring's ``mul`` (so :func:`polyconv.algebra.counting_products` logs it).  Costs are
counted in ``U(n)``: the transform work of one full ``n x n`` product (a middle product of an
``N``-term by a ``k``-term operand, "valid" mode, runs at transform length ``N``).

Sources

* Newton iteration for ``1/f`` and the middle product: von zur Gathen & Gerhard, *Modern Computer
  Algebra* (MCA), 3rd ed., Algorithm 9.3; Hanrot, Quercia & Zimmermann, "The middle product
  algorithm I", AAECC 14 (2004).
* Division ``num/den`` with the last Newton step folded into the product (Karp & Markstein,
  "High-precision division and square root", ACM TOMS 23 (1997)).
* ``exp`` by Newton on ``log`` while the inverse of the iterate is carried along at half
  precision, and ``sqrt`` by the same coupled iteration: Brent, "Multiple-precision zero-finding
  methods and the complexity of elementary function evaluation" (1976) and Bernstein, "Removing
  redundancy in high-precision Newton iteration" (2004), section on exp; the formulas used here
  are derived in the docstrings.
"""

from __future__ import annotations

import operator

import numpy as np

from .rings import _as_objects, _fit, _Floats, _Modular, _Ring
from .series import _inverse, _precisions

__all__ = ["BASE_TERMS", "derivative", "divide", "exp_newton", "integral", "inverse_step",
           "sqrt_newton", "unit_inverses", "vmul"]

#: Up to this many terms the schoolbook recurrences on Python numbers are used (a few hundred
#: multiply-adds, cheaper than the Newton steps' convolve calls they replace).
BASE_TERMS = 32

_SMALL = 2**31  # residues below this multiply in int64 without overflow


# ----------------------------------------------------------------------------- elementwise


def vmul(ring: _Ring, x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Elementwise product ``x * w`` in ``ring`` (``w`` in the ring's form)."""
    if isinstance(ring, _Modular):
        m = ring.modulus
        if m < _SMALL and x.dtype == np.int64 and w.dtype == np.int64:
            return np.mod(x * w, np.int64(m))
        return ring._store((_as_objects(x) * _as_objects(w)) % m)
    return x * w


def vadd(ring: _Ring, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Elementwise sum in ``ring``."""
    if isinstance(ring, _Modular):
        m = ring.modulus
        if m < 2**62 and x.dtype == np.int64 and y.dtype == np.int64:
            return np.mod(x + y, np.int64(m))
        return ring._store((_as_objects(x) + _as_objects(y)) % m)
    return x + y


def _indices(ring: _Ring, lo: int, hi: int) -> np.ndarray:
    """``lo, ..., hi - 1`` in the ring's form."""
    if isinstance(ring, _Modular):
        if ring.modulus < _SMALL:
            return np.mod(np.arange(lo, hi, dtype=np.int64), np.int64(ring.modulus))
        return ring._store(np.array([k % ring.modulus for k in range(lo, hi)], dtype=object))
    return np.arange(lo, hi, dtype=np.float64).astype(ring.dtype)


_inverse_cache: dict[int, np.ndarray] = {}


def unit_inverses(ring: _Ring, count: int) -> np.ndarray:
    """``[1/1, 1/2, ..., 1/count]`` in ``ring`` (index ``j`` holds ``1/(j+1)``).

    Modulo ``m`` every ``k <= count`` must be a unit (the caller checks that the smallest prime
    factor of ``m`` exceeds ``count``).  Residues below ``2^31`` use the recurrence
    ``1/k = -(m div k) / (m mod k)`` (from ``m = (m div k) k + (m mod k)``; common practice, no
    source), vectorised over blocks ``[L, 2L)``: an entry is ready once the entry ``m mod k < k``
    it depends on is; tables are kept per modulus and extended when a longer one is asked for.
    """
    if not isinstance(ring, _Modular):
        return (1.0 / np.arange(1, count + 1, dtype=np.float64)).astype(ring.dtype)
    m = ring.modulus
    if m >= _SMALL:
        return ring._store(np.array([pow(k, -1, m) for k in range(1, count + 1)], dtype=object))
    table = _inverse_cache.get(m)
    if table is None or table.shape[0] <= count:
        table = _inverse_table(m, max(count, 2 * (0 if table is None else table.shape[0])))
        if len(_inverse_cache) >= 4:
            _inverse_cache.clear()
        _inverse_cache[m] = table
    return table[1: count + 1]


def _inverse_table(m: int, count: int) -> np.ndarray:
    inv = np.zeros(count + 1, dtype=np.int64)
    known = np.zeros(count + 1, dtype=bool)
    known[0] = True  # never read as a dependency: m mod k != 0 for the units k asked for
    if count >= 1:
        inv[1], known[1] = 1, True
    lo = 2
    while lo <= count:
        idx = np.arange(lo, min(2 * lo, count + 1), dtype=np.int64)
        dep, fac = m % idx, m - m // idx
        while idx.size:
            ready = known[dep]
            i, d = idx[ready], dep[ready]
            inv[i] = fac[ready] * inv[d] % m
            known[i] = True
            idx, dep, fac = idx[~ready], dep[~ready], fac[~ready]
        lo *= 2
    return inv


def derivative(ring: _Ring, x: np.ndarray) -> np.ndarray:
    """``x'``: coefficients ``k x_k`` for ``k = 1 .. len(x) - 1`` (at least one coefficient)."""
    if x.shape[0] <= 1:
        return ring.zeros(1)
    return vmul(ring, x[1:], _indices(ring, 1, x.shape[0]))


def integral(ring: _Ring, x: np.ndarray, inverses: np.ndarray) -> np.ndarray:
    """``integral of x`` with zero constant term: ``[0, x_0/1, x_1/2, ...]``."""
    body = vmul(ring, x, inverses[: x.shape[0]])
    return np.concatenate([ring.zeros(1), body])


# ----------------------------------------------------------------------------- Newton steps


def inverse_step(ring: _Ring, f: np.ndarray, g: np.ndarray, target: int) -> np.ndarray:
    """``g = 1/f mod x^k`` extended to ``1/f mod x^target`` (``k < target <= 2k``): one middle
    product ``e`` (coefficients ``k..target-1`` of ``f g``) and one product ``g e``; cost about
    ``U(target)``."""
    k = g.shape[0]
    middle = ring.mul(_fit(f, target), g, mode="valid")
    correction = ring.mul(g[: target - k], middle[1:], length=target - k)
    return np.concatenate([g, ring.neg(correction)])


def _grow_inverse(ring: _Ring, f: np.ndarray, g: np.ndarray, target: int) -> np.ndarray:
    while g.shape[0] < target:
        g = inverse_step(ring, f, g, min(target, 2 * g.shape[0]))
    return g


def divide(ring: _Ring, num: np.ndarray, den: np.ndarray, n: int, first) -> np.ndarray:
    """``num / den mod x^n`` given ``first = 1/den[0]``, cost about ``2.5 U(n)``.

    ``g = 1/den mod x^k`` with ``k = ceil(n/2)`` (Newton, ``U(n)``), ``q0 = num g mod x^k``; then
    ``num - den q0 = x^k E`` and ``q = q0 + x^k (g E mod x^(n-k))``: the residual ``E`` is one
    middle product, so the inverse never goes to full precision (Karp & Markstein 1997).
    """
    if n <= 2 * BASE_TERMS:
        return ring.mul(_fit(num, n), _inverse(ring, den, n, first), length=n)
    k = (n + 1) // 2
    g = _inverse(ring, den, k, first)
    q0 = ring.mul(_fit(num, k), g, length=k)
    residual = ring.mul(_fit(den, n), q0, mode="valid")[1:]
    e = ring.sub(_fit(num, n)[k:], residual)
    q1 = ring.mul(g[: n - k], e, length=n - k)
    return np.concatenate([q0, q1])


def _reduce(ring: _Ring, value):
    return value % ring.modulus if isinstance(ring, _Modular) else value


def _exp_base(ring: _Ring, a: np.ndarray, n: int, inverses: np.ndarray) -> np.ndarray:
    """``exp(a) mod x^n`` (``a_0 = 0``) by ``k b_k = sum_(j=1..k) j a_j b_(k-j)`` (from
    ``b' = a' b``; Knuth, TAOCP vol. 2, 4.7)."""
    da = derivative(ring, _fit(a, n)).tolist()  # da[j-1] = j a_j
    inv = inverses[:n].tolist()
    b = [ring.one(1).tolist()[0]]
    for k in range(1, n):
        total = sum(map(operator.mul, da[:k], reversed(b)))
        b.append(_reduce(ring, _reduce(ring, total) * inv[k - 1]))
    return ring.convert(np.array(b, dtype=object))


def _newton_steps(n: int, start: int):
    """The Newton steps from ``start`` known terms to ``n``: pairs ``(m, target)``, the length
    before a step and after it (each step ends where the next begins; :func:`_precisions`)."""
    m = start
    for target in _precisions(n):
        if target > m:
            yield m, target
            m = target


def exp_newton(ring: _Ring, a: np.ndarray, n: int, inverses: np.ndarray) -> np.ndarray:
    """``exp(a) mod x^n`` for ``a_0 = 0``; ``inverses`` holds ``1/1 .. 1/n``.  Cost about
    ``4 U(n)``.

    Newton on ``log``: ``f <- f (1 + a - log f)``.  With ``f = exp(a) mod x^m`` and
    ``g = 1/f mod x^h`` (``h = M - m``, kept by :func:`inverse_step` one precision behind),
    ``f' - f a' = -x^(m-1) s`` where ``s`` = coefficients ``m-1 .. M-2`` of ``f a'`` (one middle
    product), so ``(a - log f)_(m+j) = u_j / (m+j)`` with ``u = g s mod x^h`` and the step is
    ``f <- f + x^m (f (u_j / (m+j)) mod x^h)``: per doubling one inverse step (``~U(m)``), the
    middle product (``~U(m)``) and two ``h``-term products.
    """
    base = min(n, BASE_TERMS)
    f = _exp_base(ring, a, base, inverses)
    if n == base:
        return f
    da = derivative(ring, _fit(a, n))  # n - 1 terms
    g = _inverse(ring, f, base, ring.unit_inverse(f[0]))
    for m, target in _newton_steps(n, base):
        h = target - m
        g = _grow_inverse(ring, f, g, h)
        s = ring.mul(da[: target - 1], f, mode="valid")  # coefficients m-1 .. target-2 of f a'
        u = ring.mul(g[:h], s, length=h)
        v = vmul(ring, u, inverses[m - 1: target - 1])
        f = np.concatenate([f, ring.mul(f[:h], v, length=h)])
    return f


def _sqrt_base(ring: _Ring, a: np.ndarray, n: int, root) -> np.ndarray:
    """``sqrt(a) mod x^n`` with ``s_0 = root`` by ``2 s_0 s_k = a_k - sum_(i=1..k-1) s_i s_(k-i)``
    (coefficients of ``s^2 = a``)."""
    coeffs = _fit(a, n).tolist()
    two_root = ring.unit_inverse(2 * root if ring.modulus is None else (2 * root) % ring.modulus)
    s = [root]
    for k in range(1, n):
        total = sum(map(operator.mul, s[1:k], reversed(s[1:k])))
        s.append(_reduce(ring, _reduce(ring, coeffs[k] - total) * two_root))
    return ring.convert(np.array(s, dtype=object))


def sqrt_newton(ring: _Ring, a: np.ndarray, n: int, root) -> np.ndarray:
    """``sqrt(a) mod x^n`` with constant term ``root`` (``root^2 = a_0``, ``2 root`` a unit).
    Cost about ``3 U(n)``.

    Heron/Newton ``s <- s + (a - s^2) / (2 s)`` with ``g = 1/s mod x^h`` carried along one
    precision behind (as in :func:`exp_newton`): with ``s`` known mod ``x^m`` and
    ``a - s^2 = x^m e + ...``, the step is ``s <- s + x^m (g e / 2 mod x^h)``, ``h = M - m``:
    per doubling one square (``U(m)``), one ``h``-term product and one inverse step.
    """
    base = min(n, BASE_TERMS)
    s = _sqrt_base(ring, a, base, root)
    if n == base:
        return s
    a = _fit(a, n)
    half = ring.unit_inverse(2)
    g = _inverse(ring, s, base, ring.unit_inverse(root))
    for m, target in _newton_steps(n, base):
        h = target - m
        g = _grow_inverse(ring, s, g, h)
        square = _fit(ring.mul(s, s, length=target), target)
        e = ring.sub(a[m:target], square[m:target])
        s = np.concatenate([s, ring.scale(ring.mul(g[:h], e, length=h), half)])
    return s


def is_float_ring(ring: _Ring) -> bool:
    return isinstance(ring, _Floats)
