"""Number-theoretic transform (NTT) convolution over word-size primes, and CRT by Garner.

Over ``Z/p`` with ``p = c 2^k + 1`` prime, ``w = g^((p-1)/N)`` (``g`` a generator) is a primitive
``N``-th root of unity for every ``N | 2^k``, so the convolution theorem holds exactly modulo ``p``
(J. M. Pollard, "The fast Fourier transform in a finite field", Math. Comp. 25 (1971) 365-374).

Transforms are iterative radix-2, vectorised with numpy over whole stages: the forward one is
decimation in frequency (Gentleman-Sande; natural order in, bit-reversed out) and the inverse one
decimation in time (Cooley-Tukey; bit-reversed in, natural out), so no bit-reversal permutation is
ever performed (common practice, no source).  Residues are uint64 below ``p < 2^32``; products of
two residues fit in uint64.  Multiplications by twiddles use Shoup's precomputed quotients (V.
Shoup, NTL; D. Harvey, "Faster arithmetic for number-theoretic transforms", J. Symbolic Comput. 60
(2014), section 2): with ``w' = floor(w 2^32 / p)`` and ``t < 2^32``, ``q = (t w') >> 32`` and
``r = t w - q p`` lie in ``[0, 2p)`` -- all within uint64, no ``%``.

Several primes are combined by Garner's algorithm (Knuth, TAOCP vol. 2, 3rd ed., section 4.3.2,
"mixed-radix" conversion) into the unique signed integer of absolute value below ``P/2``,
``P = prod p_i``.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from ..numerics.limits import magnitude_fits_int64
from . import _intpack
from ._common import INTEGER_KINDS, Engine, Job, Option, powers_mod

#: NTT-friendly primes ``c 2^k + 1`` with a generator ``g`` (DESIGN.md section 5, verified in
#: tests with sympy): prime -> (g, k).
PRIMES: dict[int, tuple[int, int]] = {
    998244353: (3, 23),
    469762049: (3, 26),
    167772161: (3, 25),
    754974721: (11, 24),
    2013265921: (31, 27),
    1004535809: (3, 21),
    3221225473: (5, 30),
}

#: Order in which :func:`primes_needed` takes primes (largest first, all below ``2^31`` but the
#: last, so lazy butterflies stay below ``2^32``).
PRIME_ORDER = (2013265921, 1004535809, 998244353, 754974721, 469762049, 167772161, 3221225473)

#: Below this half-length a stage's twiddles are tiled to the full width: numpy's inner loops
#: are slow on short broadcast axes.
_TILE_BELOW = 64

#: Stages with ``2h <= _CHUNK`` run chunk by chunk, all such stages on one chunk before the next,
#: so that the chunk and its temporaries stay in cache (measured here: ~1.6x at 2^19 points).
_CHUNK = 1 << 15

_U32 = np.uint64(32)


def primes_needed(bound: int, length: int = 1) -> tuple[int, ...]:
    """Fewest primes of :data:`PRIME_ORDER` whose product exceeds ``2 bound`` and whose 2-power
    order admits transforms of ``length`` points.

    ``bound`` bounds every ``|c_k|`` (for example ``min(n1, n2) max|a| max|b|``).
    Raises ValueError if all seven are not enough.
    """
    chosen: list[int] = []
    product = 1
    for p in PRIME_ORDER:
        if length > (1 << PRIMES[p][1]):
            continue
        chosen.append(p)
        product *= p
        if product > 2 * bound:
            return tuple(chosen)
    raise ValueError("product bound too large for the NTT primes")


def transform_length(n1: int, n2: int) -> int:
    """Smallest power of two ``>= n1 + n2 - 1``."""
    return 1 << max(0, (n1 + n2 - 2).bit_length())


@lru_cache(maxsize=16)
def _stage_tables(p: int, n: int, inverse: bool) -> tuple:
    """Per stage, largest half-length ``h`` first: ``(h, w^j, Shoup quotients)`` for ``j < h``.

    Stages that run inside cache-sized chunks (``2h <= chunk``) with ``h`` below
    :data:`_TILE_BELOW` get their twiddles tiled to the chunk's width.
    """
    g, _ = PRIMES[p]
    chunk = min(n, _CHUNK)
    tables = []
    h = n >> 1
    while h >= 1:
        step = pow(g, (p - 1) // (2 * h), p)
        if inverse:
            step = pow(step, p - 2, p)
        w = powers_mod(step, h, p)
        if h < _TILE_BELOW:
            w = np.tile(w, chunk // (2 * h)).reshape(chunk // (2 * h), h)
        tables.append((h, w, (w << _U32) // np.uint64(p)))
        h >>= 1
    return tuple(tables)


def _mul_shoup(t: np.ndarray, w: np.ndarray, shoup: np.ndarray, p: np.uint64) -> np.ndarray:
    """``t w mod p`` in ``[0, p)`` for ``t < 2^32`` by Shoup's method."""
    q = t * shoup
    q >>= _U32
    q *= p
    r = t * w
    r -= q
    return np.minimum(r, r - p, out=r)


def ntt_forward(x: np.ndarray, p: int) -> np.ndarray:
    """In-place forward NTT (decimation in frequency) of a power-of-two length uint64 array.

    Input in natural order with entries in ``[0, p)``; output in bit-reversed order.
    """
    n = x.shape[0]
    chunk = min(n, _CHUNK)
    tables = _stage_tables(p, n, False)
    wide = [t for t in tables if 2 * t[0] > chunk]
    narrow = [t for t in tables if 2 * t[0] <= chunk]
    for stage in wide:
        _dif_stage(x, stage, p)
    for start in range(0, n, chunk):
        part = x[start:start + chunk]
        for stage in narrow:
            _dif_stage(part, stage, p)
    return x


def _dif_stage(x: np.ndarray, stage: tuple, p: int) -> None:
    """One Gentleman-Sande stage: ``(u, v) -> (u + v, (u - v) w^j)``."""
    h, w, shoup = stage
    pp = np.uint64(p)
    view = x.reshape(x.shape[0] // (2 * h), 2, h)
    u, v = view[:, 0, :], view[:, 1, :]
    d = u + pp
    d -= v
    if p >= 1 << 31:
        np.minimum(d, d - pp, out=d)
    u += v
    np.minimum(u, u - pp, out=u)
    v[...] = _mul_shoup(d, w, shoup, pp)


def ntt_inverse(x: np.ndarray, p: int) -> np.ndarray:
    """In-place inverse NTT (decimation in time, scaled by 1/N): bit-reversed in, natural out."""
    n = x.shape[0]
    chunk = min(n, _CHUNK)
    tables = _stage_tables(p, n, True)[::-1]
    narrow = [t for t in tables if 2 * t[0] <= chunk]
    wide = [t for t in tables if 2 * t[0] > chunk]
    for start in range(0, n, chunk):
        part = x[start:start + chunk]
        for stage in narrow:
            _dit_stage(part, stage, p)
    for stage in wide:
        _dit_stage(x, stage, p)
    return _scale(x, pow(n, p - 2, p), p)


def _dit_stage(x: np.ndarray, stage: tuple, p: int) -> None:
    """One Cooley-Tukey stage: ``(u, v) -> (u + v w^-j, u - v w^-j)``."""
    h, w, shoup = stage
    pp = np.uint64(p)
    view = x.reshape(x.shape[0] // (2 * h), 2, h)
    u, v = view[:, 0, :], view[:, 1, :]
    t = _mul_shoup(v, w, shoup, pp)
    d = u + pp
    d -= t
    u += t
    np.minimum(u, u - pp, out=u)
    np.minimum(d, d - pp, out=v)


def _scale(x: np.ndarray, factor: int, p: int) -> np.ndarray:
    w = np.uint64(factor)
    shoup = np.uint64((factor << 32) // p)
    x[...] = _mul_shoup(x, w, shoup, np.uint64(p))
    return x


def pointwise_product(x: np.ndarray, y: np.ndarray, p: int) -> np.ndarray:
    """``x y mod p`` entrywise for residues below ``p < 2^32`` (float-quotient Barrett).

    The quotient ``floor(x y / p)`` is estimated in float64 (relative error below ``2^-50``, so
    off by at most 1 for products below ``2^64``); the remainder computed in wrapping uint64
    arithmetic is then corrected by one conditional addition or subtraction of ``p``.
    """
    pp = np.uint64(p)
    q = x.astype(np.float64)
    q *= y
    q *= 1.0 / p
    qi = q.astype(np.uint64)
    r = x * y
    r -= qi * pp
    r = r.view(np.int64)
    r += np.where(r < 0, np.int64(p), np.int64(0))
    r = r.view(np.uint64)
    return np.minimum(r, r - pp, out=r)


def convolve_ntt_mod_prime(a: np.ndarray, b: np.ndarray, p: int,
                           keep: int | None = None) -> np.ndarray:
    """Full product of two residue sequences modulo an NTT prime ``p`` of :data:`PRIMES`.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, integer arrays with entries already in ``[0, p)``.
    p : int
        A key of :data:`PRIMES`; the caller guarantees ``n1 + n2 - 1 <= 2^k`` (``p = c 2^k + 1``).
    keep : int, optional
        Return only the first ``keep`` coefficients.

    Returns
    -------
    numpy.ndarray
        uint64, entries in ``[0, p)``, length ``min(keep, n1 + n2 - 1)``.
    """
    count = a.shape[0] + b.shape[0] - 1
    n = transform_length(a.shape[0], b.shape[0])
    fa = _padded(a, n)
    fb = _padded(b, n)
    ntt_forward(fa, p)
    ntt_forward(fb, p)
    product = ntt_inverse(pointwise_product(fa, fb, p), p)
    return product[: count if keep is None else min(keep, count)]


def _padded(x: np.ndarray, n: int) -> np.ndarray:
    out = np.zeros(n, dtype=np.uint64)
    out[: x.shape[0]] = x
    return out


def convolve_ntt_crt(a: np.ndarray, b: np.ndarray, primes: tuple[int, ...],
                     keep: int | None = None, as_int64: bool | None = None) -> np.ndarray:
    """Exact signed product of two integer sequences from NTTs modulo several primes.

    Parameters
    ----------
    a, b : numpy.ndarray
        1-D, non-empty, int64 or uint64 arrays (any signs).
    primes : tuple of int
        Keys of :data:`PRIMES`; the caller guarantees ``prod(primes) > 2 max_k |c_k|`` (see
        :func:`primes_needed`) and that each admits the transform length.
    keep : int, optional
        Return only the first ``keep`` coefficients.
    as_int64 : bool, optional
        Force int64 output (the caller proved ``|c_k| < 2^63``); default: int64 when
        ``prod(primes) / 2 < 2^63``, else an object array of Python ints.

    Returns
    -------
    numpy.ndarray
        The exact coefficients ``c_k``, length ``min(keep, n1 + n2 - 1)``.
    """
    residues = [convolve_ntt_mod_prime(_reduce(a, p), _reduce(b, p), p, keep) for p in primes]
    return garner(residues, primes, as_int64)


def _reduce(x: np.ndarray, p: int) -> np.ndarray:
    if x.dtype.kind == "u":
        return x % np.uint64(p)
    return (x % np.int64(p)).astype(np.uint64)


def garner(residues: list[np.ndarray], primes: tuple[int, ...],
           as_int64: bool | None = None) -> np.ndarray:
    """Signed CRT reconstruction (Garner's mixed-radix algorithm, Knuth 4.3.2).

    ``x = t_0 + p_0 (t_1 + p_1 (t_2 + ...))`` with mixed-radix digits ``t_i < p_i`` computed in
    uint64 (every product of two values below ``2^32`` fits); the result is shifted into
    ``(-P/2, P/2]``.  The sign test compares the digits with those of ``floor(P/2)``, most
    significant first, so it needs no big integers.
    """
    digits = _mixed_radix_digits(residues, primes)
    total = 1
    for p in primes:
        total *= p
    upper = _above_half(digits, primes, total)
    if as_int64 is None:
        as_int64 = magnitude_fits_int64(total // 2)
    if as_int64:
        value = np.zeros_like(digits[0])
        for t, p in zip(reversed(digits), reversed(primes), strict=True):
            value = value * np.uint64(p) + t
        value -= upper.astype(np.uint64) * np.uint64(total % 2**64)
        return value.view(np.int64)
    value = np.zeros(digits[0].shape[0], dtype=object)
    for t, p in zip(reversed(digits), reversed(primes), strict=True):
        value = value * p + t.astype(object)
    return np.where(upper, value - total, value)


def _mixed_radix_digits(residues, primes):
    digits = []
    for i, (r, p) in enumerate(zip(residues, primes, strict=True)):
        pp = np.uint64(p)
        t = r.astype(np.uint64) % pp
        for j in range(i):
            # t <- (t - t_j) / p_j  (mod p_i): Garner's step, one earlier prime at a time
            t = t + pp - digits[j] % pp
            np.minimum(t, t - pp, out=t)
            inv = pow(primes[j] % p, p - 2, p)
            t = pointwise_product(t, np.full_like(t, inv), p)
        digits.append(t)
    return digits


def _above_half(digits, primes, total) -> np.ndarray:
    """``x > floor(P/2)`` by comparing mixed-radix digits from the most significant."""
    half = total // 2
    half_digits = []
    for p in primes:
        half_digits.append(half % p)
        half //= p
    greater = np.zeros(digits[0].shape[0], dtype=bool)
    equal = np.ones_like(greater)
    for t, h in zip(reversed(digits), reversed(half_digits), strict=True):
        greater |= equal & (t > np.uint64(h))
        equal &= t == np.uint64(h)
    return greater


def convolve_ntt_crt_objects(a: np.ndarray, b: np.ndarray, primes: tuple[int, ...],
                             keep: int | None = None) -> np.ndarray:
    """As :func:`convolve_ntt_crt` for object operands (residues taken with Python ints)."""
    residues = []
    for p in primes:
        ra = np.mod(_intpack.to_objects(a), p).astype(np.uint64)
        rb = np.mod(_intpack.to_objects(b), p).astype(np.uint64)
        residues.append(convolve_ntt_mod_prime(ra, rb, p, keep))
    return garner(residues, primes)


# ----------------------------------------------------------------------------- registry record
#
# Cost per row (constants ``exact.ntt``), ``N`` the power-of-two length of the full product and
# ``k`` primes: ``t = c0 + c_nlogn N (k lg N + k^2)``: ``k`` transforms' worth of butterflies plus
# Garner's ``k (k - 1) / 2`` modular digit steps per coefficient, charged at the butterfly rate
# (not measured separately; ``k = 1`` for a prime modulus of :data:`PRIMES`).


def _primes_for(job: Job) -> tuple[int, ...] | str:
    m, n = job.modulus, job.n_full
    if m is not None and m in PRIMES:
        if n > 1 << PRIMES[m][1]:
            return (f"the product needs {n} points, more than transforms modulo {m} have "
                    f"(2^{PRIMES[m][1]})")
        return (m,)
    bound = job.bound if m is None else min(job.n1, job.n2) * (m - 1) ** 2
    try:
        return primes_needed(bound, n)
    except ValueError:
        return (f"a {bound.bit_length()}-bit coefficient bound at {n} points needs more NTT "
                f"primes than the seven of {sorted(PRIMES)}")


def option(job: Job) -> Option | str:
    """NTT modulo a prime modulus of :data:`PRIMES`, else NTTs modulo enough primes for the
    coefficient bound and Garner's CRT (reduced by any other modulus afterwards)."""
    primes = _primes_for(job)
    if isinstance(primes, str):
        return primes
    c = job.costs["exact"]["ntt"]
    n, k = job.n_full, len(primes)
    seconds = c["overhead"] + job.rows * c["per_nlogn"] * n * (k * max(1, math.log2(n)) + k * k)
    what = f"the prime {primes[0]}" if k == 1 else f"{k} primes and Garner CRT"
    return Option(seconds, "construction", f"NTT modulo {what}",
                  {"transform_length": n, "ntt_primes": primes})


def run_planned(plan, a: np.ndarray, b: np.ndarray, keep: int | None) -> np.ndarray:
    """The plan's product of two rows: residues modulo one NTT prime, or the exact (signed)
    product from several (any other modulus is applied by the caller)."""
    primes = plan.setting("ntt_primes")
    if plan.modulus is not None and primes == (plan.modulus,):
        out = convolve_ntt_mod_prime(a.astype(np.uint64), b.astype(np.uint64), plan.modulus, keep)
        return out.astype(np.int64)
    if a.dtype == object or b.dtype == object:
        return convolve_ntt_crt_objects(a, b, primes, keep)
    return convolve_ntt_crt(a, b, primes, keep)


ENGINE = Engine("ntt", INTEGER_KINDS, option, run_planned, exact=True)
