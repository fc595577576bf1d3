"""A-posteriori check of exact integer products: random evaluation.

:func:`random_evaluation_check` is the Schwartz-Zippel test of ``c == a * b`` at random points
modulo a prime below ``2^28`` (Schwartz 1980, Zippel 1979); a float-FFT product certified by
"check" is accepted only when it passes.
"""

from __future__ import annotations

import math
import random

import numpy as np

#: The check prime: the largest prime below ``2^28``.  Residues below it have products below
#: ``2^56``, so 128 of them add up in uint64 before any reduction.
CHECK_PRIME = 268435399  # gmpy2.prev_prime(2**28); tests/engines/test_exact_engines.py checks it
#: False-pass odds the check is run to: at most ``2^-CHECK_SECURITY_BITS``.
CHECK_SECURITY_BITS = 40
_BLOCK = 128


def check_trials(degree: int) -> int:
    """Trials for false-pass odds ``(degree / q)^trials <= 2^-40``."""
    per_trial = math.log2(CHECK_PRIME / max(degree, 1))
    return max(1, math.ceil(CHECK_SECURITY_BITS / per_trial))


def random_evaluation_check(a: np.ndarray, b: np.ndarray, c: np.ndarray,
                            trials: int | None = None, rng: random.Random | None = None) -> bool:
    """Schwartz-Zippel test of ``c == a * b`` at random points modulo a prime ``q < 2^28``.

    Each trial draws ``t`` uniformly in ``[0, q)`` and compares ``a(t) b(t)`` with ``c(t)`` mod
    ``q``.  A wrong ``c`` (``a*b - c`` nonzero of degree ``d`` mod ``q``) passes one trial with
    probability ``<= d / q`` (Schwartz 1980, Zippel 1979), ``trials`` independent ones with
    ``(d / q)^trials``; by default enough trials for odds below ``2^-40``.  (Differences
    divisible by ``q`` are invisible; the rounding errors this check is for are small.)

    Evaluation in blocks of 128: ``x(t) = sum_j (t^128)^j sum_k x_(128 j + k) t^k``; the inner
    sums of 128 products below ``2^56`` need no reduction, so each trial costs one
    multiply-add per coefficient and a reduction per block.
    """
    rng = rng or random.SystemRandom()
    if trials is None:
        trials = check_trials(max(c.shape[0], 1))
    residues = [_residues(x, CHECK_PRIME) for x in (a, b, c)]
    q = CHECK_PRIME
    for _ in range(trials):
        t = rng.randrange(q)
        va, vb, vc = (_evaluate_blocked(r, t) for r in residues)
        if va * vb % q != vc:
            return False
    return True


def _residues(x: np.ndarray, q: int) -> np.ndarray:
    if x.dtype.kind == "u":
        return x % np.uint64(q)
    if x.dtype.kind in "ib":
        x = x.astype(np.int64)
        if x.size and -q < int(x.min()) and int(x.max()) < q:  # one conditional add, no division
            return np.where(x < 0, x + np.int64(q), x).astype(np.uint64)
        return (x % np.int64(q)).astype(np.uint64)
    return np.mod(x, q).astype(np.uint64)


def _powers_mod(t: int, count: int) -> np.ndarray:
    """``t^i mod q`` for ``i < count`` (uint64), by doubling the filled prefix."""
    q = np.uint64(CHECK_PRIME)
    out = np.ones(count, dtype=np.uint64)
    filled, factor = 1, t % CHECK_PRIME
    while filled < count:
        take = min(filled, count - filled)
        out[filled:filled + take] = out[:take] * np.uint64(factor) % q
        filled += take
        factor = factor * factor % CHECK_PRIME
    return out


def _evaluate_blocked(residues: np.ndarray, t: int) -> int:
    """``sum_i r_i t^i mod q`` (see :func:`random_evaluation_check`)."""
    q = CHECK_PRIME
    n = residues.shape[0]
    rows = -(-n // _BLOCK)
    padded = np.zeros(rows * _BLOCK, dtype=np.uint64)
    padded[:n] = residues
    inner = (padded.reshape(rows, _BLOCK) * _powers_mod(t, _BLOCK)).sum(axis=1) % np.uint64(q)
    outer = inner * _powers_mod(pow(t, _BLOCK, q), rows) % np.uint64(q)
    return int(outer.sum(dtype=np.uint64)) % q  # rows < 2^35: no overflow
