"""Roots of constant terms: the ``q``-th roots that sqrt and rational powers need.

Floats take the real root, exact integers the integer root (or a refusal); modulo ``m``:

* prime ``m``, ``q = 2``: Tonelli-Shanks (Shanks, "Five number-theoretic algorithms", 1973;
  Cohen, *A Course in Computational Algebraic Number Theory*, Algorithm 1.5.1);
* prime ``m`` with ``gcd(q, m - 1) = 1``: ``c^(q^-1 mod (m - 1))`` (the ``q``-th power map is a
  bijection of the units; common practice, no source);
* any other modulus below ``2^20``: search.
"""

from __future__ import annotations

import math

import gmpy2
import numpy as np

from .rings import _Floats, _Integers, _Ring

__all__ = ["check_units", "constant_root", "root_mod"]

#: moduli below this are searched when no formula applies
_SEARCH_LIMIT = 2**20


def root_mod(c: int, q: int, m: int) -> int | None:
    """A residue ``r`` with ``r^q = c (mod m)``, or None when none exists or none is found.

    For ``q = 2`` the smaller of ``r`` and ``m - r`` is returned.
    """
    c %= m
    if c in (0, 1) or q == 1:
        return c
    if gmpy2.is_prime(m):
        if q == 2:
            r = _tonelli_shanks(c, m)
            return None if r is None else min(r, m - r)
        if math.gcd(q, m - 1) == 1:
            return pow(c, pow(q, -1, m - 1), m)
    if m < _SEARCH_LIMIT:
        for r in range(m):
            if pow(r, q, m) == c:
                return r
    return None


def _tonelli_shanks(c: int, p: int) -> int | None:
    if p == 2:
        return c
    if pow(c, (p - 1) // 2, p) != 1:
        return None
    s, q = 0, p - 1
    while q % 2 == 0:
        s, q = s + 1, q // 2
    z = 2
    while pow(z, (p - 1) // 2, p) != p - 1:
        z += 1
    m, cz, t, r = s, pow(z, q, p), pow(c, q, p), pow(c, (q + 1) // 2, p)
    while t != 1:
        i, t2 = 0, t
        while t2 != 1:
            t2, i = t2 * t2 % p, i + 1
        b = pow(cz, 1 << (m - i - 1), p)
        m, cz, t, r = i, b * b % p, t * b * b % p, r * b % p
    return r


def check_units(m: int, count: int, what: str) -> None:
    """Refuse a modulus with a prime factor ``<= count`` (``1 .. count`` must be units)."""
    if count < 2:
        return
    if gmpy2.is_prime(m):
        if m > count:
            return
        factor = m
    else:
        factor = _small_factor(m, count)
        if factor is None:
            return
    raise ValueError(f"modulus={m} has the prime factor {factor} <= {count}: {what} divides "
                     f"coefficient k by k for every k < length, so length must be at most the "
                     f"smallest prime factor of the modulus ({factor})")


def _small_factor(m: int, count: int) -> int | None:
    """The smallest prime factor of ``m`` that is ``<= count``, or None."""
    limit = min(count, math.isqrt(m))
    sieve = np.ones(limit + 1, dtype=bool)
    sieve[:2] = False
    for p in range(2, math.isqrt(limit) + 1):
        if sieve[p]:
            sieve[p * p:: p] = False
    primes = np.flatnonzero(sieve)
    if m < 2**63:
        hits = primes[np.int64(m) % primes == 0]
        if hits.size:
            return int(hits[0])
    else:
        for p in primes.tolist():
            if m % p == 0:
                return p
    return m if m <= count else None  # no factor up to sqrt(m): m is prime


def constant_root(ring: _Ring, c, q: int, what: str):
    """A ``q``-th root of the constant term ``c`` in ``ring`` (ValueError naming ``what``):
    the real root for floats, the exact integer root (``gmpy2.iroot``), or :func:`root_mod`."""
    if isinstance(ring, _Floats):
        if ring.dtype.kind == "f" and c < 0:
            raise ValueError(f"{what} = {c} is negative: its square root is not real; pass "
                             "complex coefficients for the principal root")
        return c ** (1.0 / q)
    if isinstance(ring, _Integers):
        root, exact = gmpy2.iroot(abs(int(c)), q)
        if int(c) < 0 and q % 2 == 0 or not exact:
            raise ValueError(f"{what} = {c} is not a perfect {_ordinal(q)} power, so the result "
                             "does not have integer coefficients; pass floats or a modulus")
        return int(root) if int(c) >= 0 else -int(root)
    root = root_mod(int(c), q, ring.modulus)
    if root is None:
        raise ValueError(f"{what} = {c} has no {_ordinal(q)} root modulo {ring.modulus} (or none "
                         "that this function can find: prime moduli, and any modulus below 2^20)")
    return root


def _ordinal(q: int) -> str:
    return {2: "square", 3: "cube"}.get(q, f"{q}-th")
