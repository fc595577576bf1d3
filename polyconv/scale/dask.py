"""Dask back end: long signals and huge exact products across processes or a cluster.

Optional: needs the ``dask`` extra (``dask[array]`` and ``distributed``).  Dask is imported only
when one of these functions is called, so polyconv works without it.

* :func:`convolve_dask`: a long 1-D dask array convolved with an in-memory kernel, lazily, as a
  dask array (block-wise overlap-add, Oppenheim & Schafer, *Discrete-Time Signal Processing*,
  3rd ed., section 8.7).
* :func:`exact_product_dask`: the exact product of two long integer sequences, its block
  products run as tasks on the workers and summed exactly on the caller's side.

Every block product is computed by :func:`polyconv.api.convolve` on a worker, so each task gets
whichever engine the planner picks for its size.
"""

from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass

import numpy as np

from ..numerics.budget import check_allocation, coefficient_bytes
from ..pipeline.execute import convolve
from ..pipeline.inputs import (
    check_count,
    check_mode,
    check_modulus,
    check_sequence,
    check_vector_shape,
    combine_kinds,
    dtype_kind,
)
from ..pipeline.shaping import float_work_dtype
from .overlap import (
    INT64_LIMIT,
    Summation,
    add_into,
    add_overlap,
    as_exact,
    as_output_dtype,
    dtype_max_abs,
    exact_summation,
    max_abs,
)
from .streaming import check_kernel

_INSTALL_HINT = "polyconv's Dask back end needs the optional extra: pip install 'polyconv[dask]'"


def _dask_array_module():
    """``dask.array``, or ImportError with the install hint."""
    try:
        import dask.array as da
    except ImportError:  # pragma: no cover - depends on the environment
        raise ImportError(_INSTALL_HINT) from None
    return da


def is_dask_array(x) -> bool:
    """True when ``x`` is a dask array; never imports dask (no dask loaded: no dask array)."""
    da = sys.modules.get("dask.array")
    return da is not None and isinstance(x, da.Array)


# ----------------------------------------------------------------------------- tasks (workers)

def _block_product(x: np.ndarray, k: np.ndarray, modulus: int | None,
                   summation: Summation) -> np.ndarray:
    """Full product of one block with the kernel, in the summation's working type."""
    y = convolve(x, k, modulus=modulus)
    return as_exact(y, summation) if summation.exact else y


def _tail(y: np.ndarray, size: int) -> np.ndarray:
    """The ``m - 1`` entries of a block product that overhang its ``size``-sample block."""
    return y[size:].copy()


def _stitch(y: np.ndarray, carry: np.ndarray | None, size: int | None,
            summation: Summation) -> np.ndarray:
    """Output block: the block product's first ``size`` entries (all if None) plus the carry."""
    head = y if size is None else y[:size]
    if carry is not None and carry.shape[0]:
        head = add_overlap(head.copy(), carry, summation)
    return as_output_dtype(head, summation)


def _block_max_abs(x: np.ndarray) -> np.ndarray:
    return np.array([max_abs(x)], dtype=object)


def _pair_product(x: np.ndarray, y: np.ndarray, modulus: int | None,
                  summation: Summation) -> np.ndarray:
    """Exact product of one block of ``a`` with one block of ``b``."""
    return as_exact(convolve(x, y, modulus=modulus), summation)


# ----------------------------------------------------------------------------- convolve_dask

def convolve_dask(a, b, *, mode: str = "full", modulus: int | None = None):
    """Convolve a long 1-D dask array with an in-memory kernel; a lazy dask array.

    Each chunk of ``a`` is convolved with the whole kernel by :func:`polyconv.api.convolve`
    (``map_blocks``; the kernel enters the graph once, as one ``dask.delayed`` key, so a
    distributed scheduler ships it to each worker once), giving ``chunk + m - 1`` entries; the
    ``m - 1`` entries overhanging a chunk are cut off where they were computed and added into
    the head of the next chunk's product (overlap-add, Oppenheim & Schafer, *Discrete-Time
    Signal Processing*, 3rd ed., section 8.7).  Only those ``m - 1`` entries move between
    tasks.

    Parameters
    ----------
    a : dask.array.Array
        1-D, non-empty, known length: the long operand.  Chunks shorter than ``m - 1`` (but
        the last) are merged by a rechunk first.
    b : array_like or dask.array.Array
        The 1-D, non-empty kernel.  A dask array is computed first: it must fit in memory.
    mode : {"full", "same", "valid"}
        As :func:`polyconv.api.convolve` (numpy.convolve's meaning).
    modulus : int, optional
        Integer data only: entries reduced to ``[0, modulus)``.

    Returns
    -------
    dask.array.Array
        Lazy; ``.compute()`` equals ``polyconv.convolve(a.compute(), b, mode=mode,
        modulus=modulus)`` (bit for bit for integers; to rounding for floats).  Output chunks
        follow ``a``'s chunks (the last one ``m - 1`` longer in mode "full").

    Raises
    ------
    ImportError
        Dask is not installed.
    ValueError, TypeError
        Bad arguments, naming them.

    Notes
    -----
    Exact integers: the result is int64 when ``min(n, m) max|a| max|b| < 2^63`` is proven,
    else an object array of Python ints.  ``max|a|`` is taken from ``a``'s dtype range when
    that proves it, otherwise from one eager reduction pass over ``a`` (the dtype of a dask
    array must be known before it is computed).  With ``modulus``: int64 when
    ``modulus < 2^63``.

    Examples
    --------
    >>> import dask.array as da, numpy as np
    >>> from polyconv.scale import convolve_dask
    >>> x = da.from_array(np.arange(6), chunks=2)
    >>> convolve_dask(x, [1, 1]).compute()
    array([0, 1, 3, 5, 7, 9, 5])
    """
    da = _dask_array_module()
    x = _check_long_operand(a, da)
    k, kernel_kind = check_kernel(b.compute() if is_dask_array(b) else b)
    check_mode(mode)
    m = k.shape[0]
    summation, dtype = _dask_summation(x, k, kernel_kind, modulus, da)
    x = _merge_short_chunks(x, m)
    full = _overlap_add_graph(x, k, modulus, summation, dtype, da)
    return _select_mode(full, x.shape[0], m, mode)


def _check_long_operand(a, da):
    if not isinstance(a, da.Array):
        raise TypeError(f"a must be a 1-D dask array; got {type(a).__name__} (for in-memory "
                        "arrays use polyconv.convolve)")
    _check_dask_vector(a, "a")
    dtype_kind(a.dtype, "a")
    return a


def _check_dask_vector(x, name: str) -> None:
    check_vector_shape(x, name, what="a dask array of numbers")
    if math.isnan(x.shape[0]):
        raise ValueError(f"{name} has unknown chunk sizes; call {name}.compute_chunk_sizes() "
                         "first")


def _dask_summation(x, k: np.ndarray, kernel_kind: str, modulus: int | None,
                    da) -> tuple[Summation, np.dtype]:
    """Summation and output dtype, from the kinds of the dtypes (no product is computed; the
    entries of an object dask array are taken for Python ints, as its tasks will check)."""
    kind = combine_kinds(dtype_kind(x.dtype, "a") or "bigint", kernel_kind)
    check_modulus(modulus, kind)
    if kind not in ("integer", "bigint"):
        return Summation(exact=False), float_work_dtype(x.dtype, k.dtype, kind)
    if modulus is not None:
        summation = exact_summation(0, modulus)
        return summation, summation.out_dtype
    factor = min(x.shape[0], k.shape[0]) * max_abs(k)
    by_dtype = dtype_max_abs(x.dtype)
    if by_dtype is None or factor * by_dtype >= INT64_LIMIT:
        by_dtype = _dask_max_abs(x, da)
    summation = exact_summation(factor * by_dtype, None)
    return summation, summation.out_dtype


def _dask_max_abs(x, da) -> int:
    """``max |x_i|`` of a dask array as a Python int (one reduction pass)."""
    per_block = x.map_blocks(_block_max_abs, chunks=((1,) * x.numblocks[0],), dtype=object)
    return max(int(v) for v in per_block.compute())


def _merge_short_chunks(x, m: int):
    """Rechunk so that every chunk but the last holds at least ``m - 1`` samples."""
    chunks = x.chunks[0]
    if all(c >= m - 1 for c in chunks[:-1]):
        return x
    return x.rechunk(max(m - 1, max(chunks)))


def _overlap_add_graph(x, k: np.ndarray, modulus: int | None, summation: Summation,
                       dtype: np.dtype, da):
    """The full product as a dask array: block products, then carries added block to block."""
    import dask

    m = k.shape[0]
    sizes = x.chunks[0]
    work = np.dtype(object) if summation.exact and summation.wide else dtype
    kernel = dask.delayed(k, pure=True)
    products = x.map_blocks(_block_product, kernel, modulus, summation,
                            chunks=(tuple(c + m - 1 for c in sizes),), dtype=work,
                            meta=np.empty((0,), dtype=work))
    blocks = products.to_delayed().ravel()
    tail = dask.delayed(_tail, pure=True)
    stitch = dask.delayed(_stitch, pure=True)
    pieces = []
    carry = None
    last = len(sizes) - 1
    for i, (y, size) in enumerate(zip(blocks, sizes, strict=True)):
        out = stitch(y, carry, None if i == last else size, summation)
        length = size + (m - 1 if i == last else 0)
        pieces.append(da.from_delayed(out, shape=(length,), dtype=dtype,
                                      meta=np.empty((0,), dtype=dtype)))
        carry = tail(y, size)
    return da.concatenate(pieces)


def _select_mode(full, n: int, m: int, mode: str):
    if mode == "full":
        return full
    if mode == "same":
        start, length = (min(n, m) - 1) // 2, max(n, m)
    else:
        start, length = min(n, m) - 1, max(n, m) - min(n, m) + 1
    return full[start: start + length]


# ----------------------------------------------------------------------------- exact products

@dataclass(frozen=True, slots=True)
class _Blocks:
    """How the two operands are cut: block length and the number of blocks of each."""

    length: int
    count_a: int
    count_b: int


def exact_product_dask(a, b, *, modulus: int | None = None, client=None,
                       pieces: int | None = None) -> np.ndarray:
    """Exact product of two long integer sequences, block products run as Dask tasks.

    Both operands are cut into blocks of one common length ``L = ceil(max(n1, n2) / pieces)``;
    every block of ``a`` times every block of ``b`` is one task, computed on a worker by
    :func:`polyconv.api.convolve` (exact), and each task's result is added, exactly, at offset
    ``i L + j L`` of the result on the caller's side as soon as it arrives.

    Why this scheme: it is exact with no extra bound analysis (a partial sum of an output is
    a sum of some of its terms, so the product's own bound covers it), it works unchanged for
    ``modulus``, its tasks all have the same size (even load), and it needs nothing from the
    engines but :func:`polyconv.api.convolve`.  Its price: with an engine quasi-linear in the
    length, ``p x p`` block products of length ``n/p`` cost about ``p`` times one product of
    length ``n``, so the gain over one machine is bounded (with a quadratic engine the split
    costs nothing).  A multi-modular scheme (one NTT prime per task, CRT at the end) does no
    redundant work but offers only as many tasks as primes (2-3 for 16-bit data), and one
    prime's NTT in numpy took ~2x longer here than the whole GMP Kronecker product.

    Parameters
    ----------
    a, b : array_like or dask.array.Array
        1-D, non-empty integer sequences (fixed-width integers, bool, or Python ints in object
        arrays).  Dask arrays are cut into the blocks on the workers.
    modulus : int, optional
        Return the product reduced to ``[0, modulus)``.
    client : distributed.Client, optional
        The cluster to run on; default: the current default client if one exists, else
        dask's local scheduler.
    pieces : int, optional
        Blocks per operand (the longer one; the shorter gets as many blocks of the same length
        as it needs).  Default: the smallest ``p`` with ``p^2 >=`` the number of worker
        threads, so that there are at least as many tasks as threads.

    Returns
    -------
    numpy.ndarray
        The ``n1 + n2 - 1`` exact coefficients: int64 when ``min(n1, n2) max|a| max|b| <
        2^63`` (with ``modulus``: when ``modulus < 2^63``), else an object array of Python
        ints.  Equal, bit for bit, to ``polyconv.convolve(a, b, modulus=modulus)``.

    Raises
    ------
    ImportError
        Dask is not installed.
    ValueError, TypeError
        Bad arguments (floating point data, empty or non-1-D operands, bad ``pieces``).
    """
    _dask_array_module()
    x, y = _check_exact_operand(a, "a"), _check_exact_operand(b, "b")
    n1, n2 = x.shape[0], y.shape[0]
    check_modulus(modulus)
    client = _resolve_client(client)
    blocks = _cut(n1, n2, _check_pieces(pieces, client))
    bound = min(n1, n2) * _operand_max_abs(x) * _operand_max_abs(y)
    summation = exact_summation(bound, modulus)
    check_allocation((n1 + n2 - 1) * coefficient_bytes("integer", bound.bit_length() + 1),
                     f"exact_product_dask of a ({n1} coefficients) and b ({n2}), gathered in "
                     "memory")
    a_parts = _operand_blocks(x, blocks.length, client)
    b_parts = _operand_blocks(y, blocks.length, client)
    out = np.zeros(n1 + n2 - 1, dtype=object if summation.wide else np.int64)
    for (i, j), part in _run_pairs(a_parts, b_parts, modulus, summation, client):
        add_into(out, (i + j) * blocks.length, part, summation)
    return as_output_dtype(out, summation)


def _check_exact_operand(x, name: str):
    if is_dask_array(x):
        _check_dask_vector(x, name)
        kind = dtype_kind(x.dtype, name) or "integer"  # object entries: checked by the tasks
    else:
        x, kind = check_sequence(x, name)
    if kind not in ("integer", "bigint"):
        raise TypeError(f"{name} must hold integers (exact product); got dtype {x.dtype} "
                        f"({kind} numbers): for floating point use convolve_dask")
    return x


def _check_pieces(pieces, client) -> int:
    if pieces is None:
        return max(1, math.isqrt(_worker_threads(client) - 1) + 1)
    return check_count(pieces, "pieces", role="blocks per operand")


def _worker_threads(client) -> int:
    if client is not None:
        return max(1, sum(client.nthreads().values()))
    return max(1, os.cpu_count() or 1)


def _cut(n1: int, n2: int, pieces: int) -> _Blocks:
    length = -(-max(n1, n2) // pieces)
    return _Blocks(length, -(-n1 // length), -(-n2 // length))


def _resolve_client(client):
    if client is not None:
        try:
            from distributed import Client
        except ImportError:  # pragma: no cover - dask without distributed
            raise ValueError("client= needs the distributed package (pip install "
                             "distributed)") from None
        if not isinstance(client, Client):
            raise TypeError("client must be a distributed.Client or None, got "
                            f"{type(client).__name__}")
        return client
    try:
        from distributed import default_client
    except ImportError:  # pragma: no cover - dask without distributed
        return None
    try:
        return default_client()
    except ValueError:  # no client running: dask's local scheduler
        return None


def _operand_max_abs(x) -> int:
    if is_dask_array(x):
        return _dask_max_abs(x, _dask_array_module())
    return max_abs(x)


def _operand_blocks(x, length: int, client) -> list:
    """The operand's blocks: futures (client), delayed objects (local) or dask blocks."""
    import dask

    if is_dask_array(x):
        parts = list(x.rechunk(length).to_delayed().ravel())
        return client.compute(parts) if client is not None else parts
    arrays = [x[s: s + length] for s in range(0, x.shape[0], length)]
    if client is not None:
        return client.scatter(arrays, hash=False)
    return [dask.delayed(v, pure=True) for v in arrays]


def _run_pairs(a_parts: list, b_parts: list, modulus: int | None, summation: Summation,
               client):
    """Yield ``((i, j), product of block i of a and block j of b)``, as they complete."""
    import dask

    pairs = [(i, j) for i in range(len(a_parts)) for j in range(len(b_parts))]
    if client is None:
        task = dask.delayed(_pair_product, pure=True)
        results = dask.compute(*[task(a_parts[i], b_parts[j], modulus, summation)
                                 for i, j in pairs])
        yield from zip(pairs, results, strict=True)
        return
    from distributed import as_completed

    futures = {client.submit(_pair_product, a_parts[i], b_parts[j], modulus, summation,
                             pure=False): (i, j) for i, j in pairs}
    for future in as_completed(list(futures)):
        part = future.result()  # raises the task's exception, if any
        yield futures.pop(future), part
        future.release()
