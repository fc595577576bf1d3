"""The NTT primes of the wide engine (:mod:`polyconv.engines.ntt_wide`): primes ``p = c 2^e + 1``
in ``(2^29, 2^30)`` with the longest transforms first, and the fewest of them whose product
exceeds four times a coefficient bound."""

from __future__ import annotations

from functools import lru_cache

#: Most primes (float64 exactness of the CRT product: ``255 x 2^45 + 2^23 < 2^53``).
MAX_PRIMES = 255


def _is_prime(n: int) -> bool:
    """Deterministic Miller-Rabin for ``n < 3.2 10^9`` (bases 2, 7, 61: G. Jaeschke, Math.
    Comp. 61 (1993) 915-926)."""
    if n < 2 or n % 2 == 0:
        return n == 2
    d, s = n - 1, 0
    while d % 2 == 0:
        d, s = d // 2, s + 1
    for a in (2, 7, 61):
        if a % n == 0:
            continue
        x = pow(a, d, n)
        if x in (1, n - 1):
            continue
        for _ in range(s - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


@lru_cache(maxsize=1)
def prime_table() -> tuple[tuple[int, int, int], ...]:
    """``(p, g, e)``: the :data:`MAX_PRIMES` + 1 primes ``p = c 2^e + 1`` with ``2^29 < p <
    2^30`` and the largest ``e`` (longest transforms first; ``e`` is the exact power of two in
    ``p - 1``), with ``g`` the least quadratic non-residue (so ``g^((p - 1) / 2^s)`` has order
    ``2^s``: Euler's criterion)."""
    found: list[tuple[int, int, int]] = []
    e = 29
    while len(found) <= MAX_PRIMES and e > 1:
        for c in range((2**30 - 2) >> e, (2**29 >> e), -1):
            p = (c << e) + 1
            if c % 2 == 1 and 2**29 < p < 2**30 and _is_prime(p):
                g = next(g for g in range(2, p) if pow(g, (p - 1) // 2, p) == p - 1)
                found.append((p, g, e))
        e -= 1
    return tuple(found[:MAX_PRIMES + 1])


@lru_cache(maxsize=256)
def primes_for(bound: int, length: int) -> tuple[int, ...] | None:
    """Fewest primes of :func:`prime_table` admitting ``length``-point transforms with product
    ``P > 4 bound`` (the CRT's margin: ``|c| < P/4``), or None when they are not enough or more
    than :data:`MAX_PRIMES` would be needed."""
    target = 4 * bound
    chosen, product = [], 1
    for p, _, e in prime_table():
        if length <= 1 << e:
            chosen.append(p)
            product *= p
            if product > target:
                return tuple(chosen) if len(chosen) <= MAX_PRIMES else None
    return None
