"""Short exact products of Python-int operands by the compiled NTT, read from ``marshal`` streams.

The multi-prime route of :func:`polyconv.engines.ntt_compiled.convolve_exact` on object arrays
pays, per product, two byte-row conversions, two residue kernels, one Python call per prime
(object operands are residue matrices) and the Garner kernel: ~57 us for two 64-term 128-bit
operands (9 primes), of which the arithmetic is under half.  Here the operands go in as
``marshal.dumps(list, 2)`` streams (CPython's C loop, ~20 ns per 128-bit value) and one compiled
call (:func:`polyconv.engines._kernels_objects.stream_product`) reads their 15-bit digits, forms
the residues modulo every prime, runs the NTT products and writes the Garner recombination as a
marshal stream of Python ints (Knuth, TAOCP vol. 2, section 4.3.2; the streams are those of
:mod:`polyconv.engines._pyints`, checked once per process).  The same values as
``convolve_exact``: the same primes (``P > 2 B`` for the a-priori bound ``B``), the same
transforms (power-of-two length ``>= n1 + n2 - 1``), the same recombination.
"""

from __future__ import annotations

import marshal
from functools import lru_cache

import numpy as np

from . import _pyints, jit_state
from .ntt_compiled import (
    STACKED_TABLES_LENGTH,
    _garner_constants,
    _modulus_words,
    _stacked_tables,
    primes_for,
    transform_length,
)

_kernels = None  # the short-product kernel module, once loaded (and streams checked)


def kernels():
    """The module of ``stream_bits`` / ``stream_product`` when the kernels are ready in this
    process and marshal streams read back correctly, else None (no compile is started)."""
    global _kernels
    if _kernels is None and jit_state.state() == "compiled" and _pyints.ready() is not None:
        _kernels = jit_state.kernels("_kernels_objects")
    return _kernels


def streams(a: np.ndarray, b: np.ndarray) -> tuple | None:
    """``(da, db, bits_a, bits_b, negative)``: the marshal streams of two 1-D arrays of
    integers, the bit lengths of ``max|a|``, ``max|b|`` and whether an entry is negative; None
    when the kernels are not ready or an entry is not an exact Python int (bools,
    ``gmpy2.mpz``, numpy scalars, int subclasses, floats)."""
    k = _kernels or kernels()
    if k is None:
        return None
    try:
        da = np.frombuffer(marshal.dumps(a.tolist(), 2), dtype=np.uint8)
        db = da if b is a else np.frombuffer(marshal.dumps(b.tolist(), 2), dtype=np.uint8)
    except ValueError:  # unmarshallable entries (int subclasses, mpz, numpy scalars)
        return None
    bits_a, bits_b, neg_a, neg_b = k.stream_bits(da, db)
    if bits_a < 0 or bits_b < 0:
        return None
    return da, db, bits_a, bits_b, bool(neg_a or neg_b)


@lru_cache(maxsize=128)
def _packed(primes: tuple[int, ...], n: int) -> tuple:
    """The tables and constants of ``primes`` for ``n``-point transforms, packed as
    :func:`polyconv.engines._kernels_objects.stream_product` takes them, and ``P``'s bits."""
    arr, tw, twq, itw, itwq, neg_inv, f, fq = _stacked_tables(primes, n)
    tab = np.ascontiguousarray(np.stack([tw, twq, itw, itwq]))
    consts = np.ascontiguousarray(np.stack([arr, neg_inv, f, fq]))
    _, inv, invq = _garner_constants(primes)
    words, bits = _modulus_words(primes, False)
    return tab, consts, np.ascontiguousarray(np.stack([inv, invq])), words, bits


def fits(n1: int, n2: int) -> bool:
    """Whether :func:`product` takes operands of these lengths (one stacked-table call)."""
    return transform_length(n1, n2) <= STACKED_TABLES_LENGTH


def product(da: np.ndarray, db: np.ndarray, n1: int, n2: int, bound: int,
            count: int) -> np.ndarray:
    """The first ``count`` coefficients of the exact product of the streams ``da``, ``db``
    (from :func:`streams`; ``n1``, ``n2`` values, :func:`fits`) whose coefficients are at most
    ``bound`` in magnitude (``bound >= 2^63``: Python ints out), as a 1-D object array."""
    n = transform_length(n1, n2)
    tab, consts, garner, words, bits = _packed(primes_for(bound, n), n)
    buf = _pyints.buffer(count, bits, "Python ints from CRT residues")
    used = _kernels.stream_product(da, db, tab, consts, garner, words, count, buf)
    return _pyints.objects(buf, used, count)


def product_mod(da: np.ndarray, db: np.ndarray, n1: int, n2: int, m: int,
                count: int) -> np.ndarray:
    """:func:`product` of residues in ``[0, m)`` reduced modulo ``m`` (the exact product is
    below ``min(n1, n2) (m - 1)^2``): int64 for ``m <= 2^63``, else Python ints."""
    values = product(da, db, n1, n2, max(min(n1, n2) * (m - 1) ** 2, 2**63), count)
    out = np.empty(count, dtype=object)
    out[:] = [v % m for v in values.tolist()]
    return out.astype(np.int64) if m <= 2**63 else out
