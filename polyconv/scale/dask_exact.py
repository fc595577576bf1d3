"""Dask back end, exact products: two long integer sequences multiplied as Dask tasks.

Optional: needs the ``dask`` extra (``dask[array]`` and ``distributed``); dask is imported only
when :func:`exact_product_dask` is called.  Block products run as tasks on the workers (each by
the pipeline through :class:`polyconv.scale.blocks.BlockProducts`: the arguments are checked
once, on the caller's side, one plan per block shape) and are summed exactly on the caller's
side.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from ..numerics.budget import check_allocation, coefficient_bytes
from ..pipeline.inputs import check_count, check_modulus, check_sequence, dtype_kind
from .blocks import BlockProducts
from .dask_common import check_dask_vector, dask_array_module, dask_summary, is_dask_array
from .overlap import Summation, add_into, as_exact, as_output_dtype, exact_summation, max_abs


@dataclass(frozen=True, slots=True)
class _Blocks:
    """How the two operands are cut: block length and the number of blocks of each."""

    length: int
    count_a: int
    count_b: int


def _pair_product(x: np.ndarray, y: np.ndarray, products: BlockProducts,
                  summation: Summation) -> np.ndarray:
    """Exact product of one block of ``a`` with one block of ``b``."""
    return as_exact(products.product(x, y), summation)


def exact_product_dask(a, b, *, modulus: int | None = None, client=None,
                       pieces: int | None = None) -> np.ndarray:
    """Exact product of two long integer sequences, block products run as Dask tasks.

    Both operands are cut into blocks of one common length ``L = ceil(max(n1, n2) / pieces)``;
    every block of ``a`` times every block of ``b`` is one task, computed on a worker by the
    pipeline (exact; one plan per block shape, :class:`polyconv.scale.blocks.BlockProducts`),
    and each task's result is added, exactly, at offset
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
        arrays; an object dask array is classified by its entries in one eager pass, so Python
        floats in it are refused, never truncated).  Dask arrays are cut into the blocks on the
        workers.
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
    dask_array_module()
    x, y = _check_exact_operand(a, "a"), _check_exact_operand(b, "b")
    n1, n2 = x.shape[0], y.shape[0]
    check_modulus(modulus)
    client = _resolve_client(client)
    blocks = _cut(n1, n2, _check_pieces(pieces, client))
    bound = min(n1, n2) * _operand_max_abs(x, "a") * _operand_max_abs(y, "b")
    summation = exact_summation(bound, modulus)
    check_allocation((n1 + n2 - 1) * coefficient_bytes("integer", bound.bit_length() + 1),
                     f"exact_product_dask of a ({n1} coefficients) and b ({n2}), gathered in "
                     "memory")
    a_parts = _operand_blocks(x, blocks.length, client)
    b_parts = _operand_blocks(y, blocks.length, client)
    out = np.zeros(n1 + n2 - 1, dtype=object if summation.wide else np.int64)
    products = BlockProducts(True, modulus, ("a", "b"))
    for (i, j), part in _run_pairs(a_parts, b_parts, products, summation, client):
        add_into(out, (i + j) * blocks.length, part, summation)
    return as_output_dtype(out, summation)


def _check_exact_operand(x, name: str):
    if is_dask_array(x):
        check_dask_vector(x, name)
        kind = dtype_kind(x.dtype, name) or "integer"  # object entries: _operand_max_abs
    else:
        x, kind = check_sequence(x, name)
    _require_integers(x, kind, name)
    return x


def _operand_max_abs(x, name: str) -> int:
    """``max |x_i|``; for a dask array one eager pass over its blocks, which also classifies
    the entries of an object dask array (Python floats are refused by name, not truncated)."""
    if not is_dask_array(x):
        return max_abs(x)
    kind, top = dask_summary(x, name)
    _require_integers(x, kind, name)
    return top


def _require_integers(x, kind: str, name: str) -> None:
    if kind not in ("integer", "bigint"):
        raise TypeError(f"{name} must hold integers (exact product); got dtype {x.dtype} "
                        f"({kind} numbers): for floating point use convolve_dask")


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


def _run_pairs(a_parts: list, b_parts: list, products: BlockProducts, summation: Summation,
               client):
    """Yield ``((i, j), product of block i of a and block j of b)``, as they complete."""
    import dask

    pairs = [(i, j) for i in range(len(a_parts)) for j in range(len(b_parts))]
    if client is None:
        task = dask.delayed(_pair_product, pure=True)
        runner = dask.delayed(products, pure=True)  # one key: its plans are shared by the tasks
        results = dask.compute(*[task(a_parts[i], b_parts[j], runner, summation)
                                 for i, j in pairs])
        yield from zip(pairs, results, strict=True)
        return
    from distributed import as_completed

    runner = client.scatter(products, hash=False, broadcast=True)  # one copy per worker
    futures = {client.submit(_pair_product, a_parts[i], b_parts[j], runner, summation,
                             pure=False): (i, j) for i, j in pairs}
    for future in as_completed(list(futures)):
        part = future.result()  # raises the task's exception, if any
        yield futures.pop(future), part
        future.release()
