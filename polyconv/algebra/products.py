"""Powers and products of many polynomials.

* :func:`power`: left-to-right binary powering (Knuth, TAOCP vol. 2, section 4.6.3), truncating
  every intermediate product to ``length`` when given.
* :func:`product`: a balanced product tree built with a heap, always multiplying the two shortest
  sequences (the Huffman-tree order; von zur Gathen & Gerhard, *Modern Computer Algebra*, 3rd ed.,
  section 10.1 for product trees).  Modulo ``m``, when the compiled kernels are ready (or worth
  loading, :mod:`polyconv.engines.jit_state`), every level of the tree is one batched call of
  :func:`polyconv.engines.ntt_batch.product_mod` instead of one call per product.

Both refuse, before any product is formed, a result whose coefficient bits (bounded by the 1-norm,
or by counting compositions when truncated) would not fit the memory budget.
"""

from __future__ import annotations

import heapq
import itertools
import math
from collections.abc import Iterable

import numpy as np

from ..engines import jit_state as jit
from ..engines import ntt_batch
from ..numerics.limits import max_abs
from ..pipeline.inputs import check_sequences
from . import rings, small_products
from .checks import (
    _check_chain,
    _check_exponent,
    _check_length,
    _check_modulus,
    _combine,
    _sequence,
)
from .power_small import _log2_norm1, power_int64
from .rings import _Integers, _Modular, _nonzero_positions, _Ring, _ring_for

#: Seconds one product costs through :func:`polyconv.convolve` at small sizes (planning,
#: normalisation and shaping; measured 25-40 us on the development machine): what a batched tree
#: saves per product, weighed against loading the kernels
#: (:func:`polyconv.engines.jit_state.load_seconds`).
_PER_CALL_SECONDS = 25e-6

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
        return ring.to_result(ring.one(n or 1))
    fast = power_int64(arr, k) if m is None and n is None and kind == "integer" else None
    if fast is not None:  # short int64 powers: no planning
        return fast
    x = ring.convert(arr if n is None else arr[:n])
    total = k * (arr.shape[0] - 1) + 1 if n is None else n
    core, shift = _trim(ring, x)
    if core is None or k * shift >= total:
        _check_chain(ring, total, 0, f"power(a, k={k}), all zero")
        return ring.to_result(ring.zeros(total))
    room = total - k * shift
    _check_chain(ring, total, _power_bits(ring, core, k, None if n is None else room),
                 f"power(a, k={k}{'' if n is None else f', length={n}'})")
    if isinstance(ring, _Integers) and (d := small_products.power_values(core, k, n)) is not None:
        return ring.to_result(_place(d, k * shift, total))  # pointwise powers of the spectra
    work = ring.to_work(core)
    powered = _power(ring, work, k, None if n is None else room)
    powered = ring.from_work(powered if powered is not work else ring.to_work(core.copy()))
    return ring.to_result(_place(powered, k * shift, total))


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
    stack = _uniform_stack(seqs)
    if stack is not None and modulus is not None:
        m = _check_modulus(modulus, "integer", "seqs hold")
        n = _check_length(length, required=False)
        quick = _batched_stack(_Modular(m), stack, n)
        if quick is not None:
            return quick
    elif stack is not None and _check_length(length, required=False) is None:
        quick = _integer_stack(stack)
        if quick is not None:
            return quick
    factors, kind = _factors(seqs)
    m = _check_modulus(modulus, kind, "seqs hold")
    n = _check_length(length, required=False)
    ring = _ring_for(kind, m)
    if not factors:
        return ring.to_result(ring.one(n or 1))
    total = sum(f.shape[0] - 1 for f in factors) + 1 if n is None else n
    trimmed = [_trim(ring, ring.convert(f if n is None else f[:n])) for f in factors]
    shift = sum(t[1] for t in trimmed)
    if any(core is None for core, _ in trimmed) or shift >= total:
        _check_chain(ring, total, 0, f"product(seqs){'' if n is None else f', length={n}'}, "
                     "all zero")
        return ring.to_result(ring.zeros(total))
    room = total - shift
    cores = [core[:room] for core, _ in trimmed]
    _check_chain(ring, total, _product_bits(ring, cores, None if n is None else room),
                 f"product(seqs) of {len(cores)} factors"
                 + ("" if n is None else f" with length={n}"))
    tree = _product_tree(ring, [ring.to_work(c) for c in cores], None if n is None else room)
    return ring.to_result(_place(ring.from_work(tree), shift, total))


def _factors(seqs) -> tuple[list[np.ndarray], str]:
    factors, kinds = [], []
    given = check_sequences(seqs, "seqs", what="the factors (a list of coefficient arrays)",
                            one="product([a]), not product(a)")
    for i, s in enumerate(given):
        arr, kind = _sequence(s, f"seqs[{i}]",
                              hint=" (seqs is a list of polynomials: product([a]), not product(a))")
        factors.append(arr)
        kinds.append(kind)
    return factors, _combine(kinds)


def _product_tree(ring: _Ring, factors: list[np.ndarray], n: int | None) -> np.ndarray:
    batched = _batched_tree(ring, factors, n)
    if batched is not None:
        return batched
    counter = itertools.count()
    heap = [(f.shape[0], next(counter), f) for f in factors]
    heapq.heapify(heap)
    while len(heap) > 1:
        _, _, x = heapq.heappop(heap)
        _, _, y = heapq.heappop(heap)
        z = ring.mul_work(x, y, length=_cut(n, x.shape[0] + y.shape[0] - 1))
        heapq.heappush(heap, (z.shape[0], next(counter), z))
    return heap[0][2]


def _batched_tree(ring: _Ring, factors, n: int | None) -> np.ndarray | None:
    """The product modulo ``m`` by :func:`polyconv.engines.ntt_batch.product_mod` (one compiled
    call per tree level), or None: not modular, too few factors to pay loading the kernels, the
    kernels unavailable here, or a modulus too wide for the NTT primes."""
    if not isinstance(ring, _Modular) or len(factors) < 3:
        return None
    state = jit.state()
    saved = _PER_CALL_SECONDS * (len(factors) - 1)
    if state == "unavailable" or (state != "compiled" and saved < jit.load_seconds()):
        return None
    try:
        out = ntt_batch.product_mod(factors, ring.modulus, n)
    except (jit.JitUnavailableError, ValueError):  # no kernels here / primes not enough
        return None
    if rings._product_log is not None:  # one record per product, as the heap would log
        rings._product_log.extend([(1, 1, "batched", n)] * (len(factors) - 1))
    return out


def _uniform_stack(seqs) -> np.ndarray | None:
    """The factors as one ``(k, L)`` integer array when they are already numpy integer arrays of
    one length (a list/tuple of 1-D arrays or a 2-D array), so that checking, reducing and
    trimming run once over the stack; None otherwise (the general path checks each factor)."""
    if isinstance(seqs, np.ndarray):
        ok = seqs.ndim == 2 and seqs.dtype.kind in "iu" and seqs.shape[0] >= 3 and seqs.shape[1]
        return seqs if ok else None
    if not isinstance(seqs, (list, tuple)) or len(seqs) < 3:
        return None
    first = seqs[0]
    if not isinstance(first, np.ndarray) or first.ndim != 1 or not first.shape[0]:
        return None
    shape, dtype = first.shape, first.dtype
    if dtype.kind not in "iu" or not all(
            isinstance(f, np.ndarray) and f.shape == shape and f.dtype == dtype for f in seqs):
        return None
    return np.stack(seqs)


def _batched_stack(ring: _Modular, stack: np.ndarray, n: int | None) -> np.ndarray | None:
    """:func:`product` of the rows of ``stack`` modulo ``ring.modulus`` by the batched tree,
    when no row has low- or high-degree zeros to trim (else None: the general path trims)."""
    m = ring.modulus
    if m >= 2**62 or (stack.dtype.kind == "u" and stack.dtype.itemsize == 8):
        return None
    rows = np.mod(stack.astype(np.int64), np.int64(m))
    if n is not None:
        rows = rows[:, :n]
    if not (rows[:, 0].all() and rows[:, -1].all()):
        return None
    total = stack.shape[0] * (stack.shape[1] - 1) + 1 if n is None else n
    out = _batched_tree(ring, rows, n)
    return None if out is None else ring.to_result(_place(out, 0, total))


def _integer_stack(stack: np.ndarray) -> np.ndarray | None:
    """:func:`product` over the integers of the rows of ``stack`` (no row with low- or
    high-degree zeros, else None): the low levels of the tree, while ``||a||_1 ||b||_1 < 2^62``
    bounds every product, as batched int64 calls (:func:`_int64_levels`), the rest by the heap."""
    if stack.dtype.kind == "u" and stack.dtype.itemsize == 8:
        return None
    rows = stack.astype(np.int64)
    if not (rows[:, 0].all() and rows[:, -1].all()):
        return None
    ring = _Integers()
    total = rows.shape[0] * (rows.shape[1] - 1) + 1
    norms = np.abs(rows.astype(np.float64)).sum(axis=1) * (1 + 2.0**-40)
    bits = float(np.log2(np.maximum(norms, 1.0)).sum()) + 1
    _check_chain(ring, total, bits, f"product(seqs) of {rows.shape[0]} factors")
    level = _int64_levels(rows) if jit.state() == "compiled" else list(rows)
    tree = _product_tree(ring, [ring.to_work(r) for r in level], None)
    return ring.to_result(_place(ring.from_work(tree), 0, total))


#: Batched tree levels continue (multi-prime NTT rows, Python ints out) while the 1-norm
#: bound of every product stays below ``2^BATCHED_LEVEL_BITS``; measured (a level of pairs,
#: batched / one Kronecker product per pair): 125 x 9 at 64 bits 1.8 / 17 ms, 62 x 17 at 128
#: bits 2.3 / 20 ms, 31 x 33 at 256 bits 5.4 / 27 ms, 15 x 65 at 512 bits 32 / 39 ms.
BATCHED_LEVEL_BITS = 400


def _int64_levels(rows: np.ndarray) -> list[np.ndarray]:
    """Tree levels of exact products, one :func:`ntt_batch.multiply_rows_exact` call each (int64
    while the 1-norm bound of every product stays below ``2^62``, then Python ints while it
    stays below ``2^BATCHED_LEVEL_BITS``); the partial products left."""
    lengths = np.full(rows.shape[0], rows.shape[1], dtype=np.int64)
    level = rows
    while level.shape[0] > 1:
        pairs = level.shape[0] // 2
        norms = np.abs(level.astype(np.float64)).sum(axis=1) * (1 + 2.0**-40)
        bound = float(np.max(norms[0:2 * pairs:2] * norms[1:2 * pairs:2]))
        if not bound < 2.0**BATCHED_LEVEL_BITS:
            break
        try:
            products = ntt_batch.multiply_rows_exact(
                level[0:2 * pairs:2], level[1:2 * pairs:2], int(bound) + 1,
                as_int64=bound < 2.0**62)
        except ValueError:  # more primes than the table has for this length
            break
        new_lengths = lengths[0:2 * pairs:2] + lengths[1:2 * pairs:2] - 1
        if rings._product_log is not None:
            rings._product_log.extend([(1, 1, "batched", None)] * pairs)
        if level.shape[0] % 2:
            carry = np.zeros((1, products.shape[1]), dtype=products.dtype)
            carry[0, :level.shape[1]] = level[-1]
            products = np.concatenate([products, carry])
            new_lengths = np.append(new_lengths, lengths[-1])
        level, lengths = products, new_lengths
    return [row[:length] for row, length in zip(level, lengths.tolist(), strict=True)]
