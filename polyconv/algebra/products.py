"""Powers and products of many polynomials.

* :func:`power`: left-to-right binary powering (Knuth, TAOCP vol. 2, section 4.6.3), truncating
  every intermediate product to ``length`` when given.
* :func:`product`: a balanced product tree built with a heap, always multiplying the two shortest
  sequences (the Huffman-tree order; von zur Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed.,
  section 10.1 for product trees).

Both refuse, before any product is formed, a result whose coefficient bits (bounded by the 1-norm,
or by counting compositions when truncated) would not fit the memory budget.
"""

from __future__ import annotations

import heapq
import itertools
import math
from collections.abc import Iterable

import numpy as np

from ..bounds import max_abs
from .checks import (
    _check_chain,
    _check_exponent,
    _check_length,
    _check_modulus,
    _combine,
    _sequence,
)
from .rings import _Integers, _nonzero_positions, _Ring, _ring_for

# ----------------------------------------------------------------------------- power


def power(a, k: int, *, modulus: int | None = None, length: int | None = None) -> np.ndarray:
    """The polynomial power ``a**k``, optionally reduced mod ``modulus`` and truncated.

    Parameters
    ----------
    a : array_like, 1-D
        Coefficients, lowest degree first.
    k : int
        Exponent, ``k >= 0``.  ``k = 0`` gives ``[1]``.
    modulus : int, optional
        Integer ``a`` only: coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Return only the first ``length`` coefficients (zero padded when the power is shorter);
        every intermediate product is truncated to ``length`` too, so the cost depends on
        ``length``, not on ``k * len(a)``.

    Returns
    -------
    numpy.ndarray
        ``k * (len(a) - 1) + 1`` coefficients (``length`` if given).  Exact integers (int64 when
        every coefficient fits, else Python ints), ``[0, modulus)``, or float64/complex128.

    Raises
    ------
    TypeError, ValueError
        Naming ``a``, ``k``, ``modulus`` or ``length`` and what was expected.

    Notes
    -----
    Left-to-right binary powering (Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed.,
    section 4.6.3): ``floor(log2 k)`` squarings and one multiplication by ``a`` per further set bit
    of ``k``; multiplying by the short ``a`` rather than by another power keeps those products
    unbalanced and cheap.

    Examples
    --------
    >>> from polyconv.algebra import power
    >>> power([1, 1], 4).tolist()
    [1, 4, 6, 4, 1]
    >>> power([1, 1], 10, length=3).tolist()
    [1, 10, 45]
    """
    arr, kind = _sequence(a, "a")
    k = _check_exponent(k)
    m = _check_modulus(modulus, kind, "a holds")
    n = _check_length(length, required=False)
    ring = _ring_for(kind, m)
    if k == 0:
        return ring.finish(ring.one(n or 1))
    x = ring.convert(arr if n is None else arr[:n])
    total = k * (arr.shape[0] - 1) + 1 if n is None else n
    core, shift = _trim(ring, x)
    if core is None or k * shift >= total:
        _check_chain(ring, total, 0, f"power(a, k={k}), all zero")
        return ring.finish(ring.zeros(total))
    room = total - k * shift
    _check_chain(ring, total, _power_bits(ring, core, k, None if n is None else room),
                 f"power(a, k={k}{'' if n is None else f', length={n}'})")
    work = ring.to_work(core)
    powered = _power(ring, work, k, None if n is None else room)
    powered = ring.from_work(powered if powered is not work else ring.to_work(core.copy()))
    return ring.finish(_place(powered, k * shift, total))


def _trim(ring: _Ring, x: np.ndarray) -> tuple[np.ndarray | None, int]:
    """``x = x^shift core``: ``core`` without low- and high-degree zeros (None if all zero)."""
    nonzero = _nonzero_positions(ring, x)
    if nonzero.size == 0:
        return None, 0
    first, last = int(nonzero[0]), int(nonzero[-1])
    return x[first: last + 1], first


def _place(values: np.ndarray, shift: int, total: int) -> np.ndarray:
    """Length ``total``: ``values`` moved up by ``shift`` places, cut or zero padded."""
    if shift == 0 and values.shape[0] == total:
        return values
    out = np.zeros(total, dtype=values.dtype)
    part = values[: total - shift]
    out[shift: shift + part.shape[0]] = part
    return out


def _power(ring: _Ring, x: np.ndarray, k: int, n: int | None) -> np.ndarray:
    acc = x
    for bit in bin(k)[3:]:
        acc = ring.mul_work(acc, acc, length=_cut(n, 2 * acc.shape[0] - 1))
        if bit == "1":
            acc = ring.mul_work(acc, x, length=_cut(n, acc.shape[0] + x.shape[0] - 1))
    return acc


def _cut(n: int | None, full: int) -> int | None:
    """The ``length`` to ask for: ``n`` when it truncates a product of ``full`` terms."""
    return n if n is not None and n < full else None


def _log2_norm1(x: np.ndarray) -> float:
    """``log2 sum |x_i|`` of an integer array (0 for sums up to 1), rounded up slightly."""
    if x.dtype == object:
        total = sum(abs(int(v)) for v in x)
        return math.log2(total) if total > 1 else 0.0
    total = float(np.add.reduce(np.abs(x.astype(np.float64)))) * (1 + 2.0**-40)
    return math.log2(total) if total > 1 else 0.0


def _log2_compositions(j: int, parts: int) -> float:
    """``log2 C(j + parts - 1, j)``: the ways ``j`` splits into ``parts`` ordered terms >= 0."""
    if j <= 0 or parts <= 1:
        return 0.0
    return (math.lgamma(j + parts) - math.lgamma(j + 1) - math.lgamma(parts)) / math.log(2)


def _power_bits(ring: _Ring, core: np.ndarray, k: int, length: int | None) -> float:
    """Bits of the largest coefficient of ``core^k`` (its first ``length``): at most
    ``k log2 ||core||_1`` (each coefficient is bounded by the power of the 1-norm), and for a
    truncated power at most ``k log2 max|core| + log2 C(length - 1 + k - 1, length - 1)`` (the
    terms of coefficient ``j`` are products of ``k`` entries, one per way to split ``j``)."""
    if not isinstance(ring, _Integers):
        return 0.0
    bits = k * _log2_norm1(core)
    if length is not None:
        top = max_abs(core)
        bits = min(bits, k * math.log2(max(top, 1)) + _log2_compositions(length - 1, k))
    return bits + 1


def _product_bits(ring: _Ring, cores: list[np.ndarray], length: int | None) -> float:
    """Bits of the largest coefficient of a product of ``cores`` (as :func:`_power_bits`)."""
    if not isinstance(ring, _Integers):
        return 0.0
    bits = sum(_log2_norm1(c) for c in cores)
    if length is not None:
        tops = sum(math.log2(max(max_abs(c), 1)) for c in cores)
        bits = min(bits, tops + _log2_compositions(length - 1, len(cores)))
    return bits + 1


# ----------------------------------------------------------------------------- product


def product(seqs: Iterable, *, modulus: int | None = None, length: int | None = None) -> np.ndarray:
    """The product of many polynomials, through a balanced product tree.

    Parameters
    ----------
    seqs : iterable of array_like
        The factors, each a non-empty 1-D sequence (a 2-D array is taken row by row).  An empty
        iterable gives ``[1]``.
    modulus : int, optional
        Integer factors only: coefficients reduced to ``[0, modulus)``.
    length : int, optional
        Return only the first ``length`` coefficients (zero padded when the product is shorter);
        factors and every partial product are truncated to ``length``.

    Returns
    -------
    numpy.ndarray
        ``sum(len(s) - 1) + 1`` coefficients (``length`` if given).  Integers give the exact
        product (int64 when every coefficient fits, else Python ints); any float factor makes it
        float64 (complex128 if a factor is complex).

    Raises
    ------
    TypeError, ValueError
        Naming ``seqs`` (``seqs[i]`` for a bad factor), ``modulus`` or ``length``.

    Notes
    -----
    The two shortest factors are multiplied first, and their product goes back into the heap
    (Huffman's merge order): factors of similar size meet, which is what fast multiplication
    needs, and ``n`` factors of total length ``N`` cost ``O(M(N) log n)`` rather than the
    ``O(n M(N))`` of multiplying them in turn.  Product trees: von zur Gathen & Gerhard, *Modern
    Computer Algebra*, 3rd ed., section 10.1.

    Examples
    --------
    >>> from polyconv.algebra import product
    >>> product([[1, 1], [1, -1], [1, 0, 1]]).tolist()
    [1, 0, 0, 0, -1]
    >>> product([]).tolist()
    [1]
    """
    factors, kind = _factors(seqs)
    m = _check_modulus(modulus, kind, "seqs hold")
    n = _check_length(length, required=False)
    ring = _ring_for(kind, m)
    if not factors:
        return ring.finish(ring.one(n or 1))
    total = sum(f.shape[0] - 1 for f in factors) + 1 if n is None else n
    trimmed = [_trim(ring, ring.convert(f if n is None else f[:n])) for f in factors]
    shift = sum(t[1] for t in trimmed)
    if any(core is None for core, _ in trimmed) or shift >= total:
        _check_chain(ring, total, 0, f"product(seqs){'' if n is None else f', length={n}'}, "
                     "all zero")
        return ring.finish(ring.zeros(total))
    room = total - shift
    cores = [core[:room] for core, _ in trimmed]
    _check_chain(ring, total, _product_bits(ring, cores, None if n is None else room),
                 f"product(seqs) of {len(cores)} factors"
                 + ("" if n is None else f" with length={n}"))
    tree = _product_tree(ring, [ring.to_work(c) for c in cores], None if n is None else room)
    return ring.finish(_place(ring.from_work(tree), shift, total))


def _factors(seqs) -> tuple[list[np.ndarray], str]:
    if isinstance(seqs, (str, bytes)) or not isinstance(seqs, Iterable):
        raise TypeError(f"seqs must be an iterable of 1-D sequences (a list of coefficient "
                        f"arrays); got {type(seqs).__name__}")
    factors, kinds = [], []
    for i, s in enumerate(seqs):
        arr, kind = _sequence(s, f"seqs[{i}]",
                              hint=" (seqs is a list of polynomials: product([a]), not product(a))")
        factors.append(arr)
        kinds.append(kind)
    return factors, _combine(kinds)


def _product_tree(ring: _Ring, factors: list[np.ndarray], n: int | None) -> np.ndarray:
    counter = itertools.count()
    heap = [(f.shape[0], next(counter), f) for f in factors]
    heapq.heapify(heap)
    while len(heap) > 1:
        _, _, x = heapq.heappop(heap)
        _, _, y = heapq.heappop(heap)
        z = ring.mul_work(x, y, length=_cut(n, x.shape[0] + y.shape[0] - 1))
        heapq.heappush(heap, (z.shape[0], next(counter), z))
    return heap[0][2]
