"""Dask back end, lazy overlap-add: a long 1-D dask array convolved with an in-memory kernel.

Optional: needs the ``dask`` extra (``dask[array]`` and ``distributed``); dask is imported only
when :func:`convolve_dask` is called (:mod:`polyconv.scale.dask_common`).  The result is a dask
array built by block-wise overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*,
3rd ed., section 8.7); every block product is computed on a worker by the pipeline through
:class:`polyconv.scale.blocks.KernelProducts` (the arguments are checked once, on the caller's
side; one plan per block length), so each task gets whichever engine the planner picks for its
size.

The exact product of two long integer sequences as Dask tasks, :func:`exact_product_dask`, lives
in :mod:`polyconv.scale.dask_exact` and is re-exported here.
"""

from __future__ import annotations

import numpy as np

from ..pipeline.inputs import check_mode, check_modulus, combine_kinds, dtype_kind
from ..pipeline.plan import mode_window
from ..pipeline.shaping import float_work_dtype
from .blocks import KernelProducts
from .dask_common import check_dask_vector, dask_array_module, dask_summary, is_dask_array
from .dask_exact import exact_product_dask
from .overlap import (
    INT64_LIMIT,
    Summation,
    add_overlap,
    as_exact,
    as_output_dtype,
    dtype_max_abs,
    exact_summation,
    max_abs,
)
from .streaming import check_kernel

__all__ = ["convolve_dask", "exact_product_dask", "is_dask_array"]

# ----------------------------------------------------------------------------- tasks (workers)

def _block_product(x: np.ndarray, products: KernelProducts,
                   summation: Summation) -> np.ndarray:
    """Full product of one block with the kernel, in the summation's working type."""
    y = products(x)
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


# ----------------------------------------------------------------------------- convolve_dask

def convolve_dask(a, b, *, mode: str = "full", modulus: int | None = None):
    """Convolve a long 1-D dask array with an in-memory kernel; a lazy dask array.

    Each chunk of ``a`` is convolved with the whole kernel (``map_blocks``; the kernel enters
    the graph once, with the block plans, as one ``dask.delayed`` key of
    :class:`polyconv.scale.blocks.KernelProducts`, so a distributed scheduler ships it to each
    worker once), giving ``chunk + m - 1`` entries; the
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
    An object ``a`` is classified by its entries (one eager pass over its blocks): Python ints
    give an exact product, Python floats a floating point one (float64), as in
    :func:`polyconv.api.convolve`.  Exact integers: the result is int64 when
    ``min(n, m) max|a| max|b| < 2^63`` is proven, else an object array of Python ints.
    ``max|a|`` is taken from ``a``'s dtype range when that proves it, otherwise from one eager
    reduction pass over ``a`` (the dtype of a dask array must be known before it is computed).
    With ``modulus``: int64 when ``modulus < 2^63``.

    Examples
    --------
    >>> import dask.array as da, numpy as np
    >>> from polyconv.scale import convolve_dask
    >>> x = da.from_array(np.arange(6), chunks=2)
    >>> convolve_dask(x, [1, 1]).compute()
    array([0, 1, 3, 5, 7, 9, 5])
    """
    da = dask_array_module()
    x = _check_long_operand(a, da)
    k, kernel_kind = check_kernel(b.compute() if is_dask_array(b) else b)
    check_mode(mode)
    m = k.shape[0]
    kind_a, top = dtype_kind(x.dtype, "a"), None
    if kind_a is None:  # object entries decide (Python floats must not be taken for ints)
        kind_a, top = dask_summary(x, "a")
    summation, dtype = _dask_summation(x, k, combine_kinds(kind_a, kernel_kind), modulus, top)
    x = _merge_short_chunks(x, m)
    products = KernelProducts(k, summation.exact, modulus, "a")
    full = _overlap_add_graph(x, products, summation, dtype, da)
    return _select_mode(full, x.shape[0], m, mode)


def _check_long_operand(a, da):
    if not isinstance(a, da.Array):
        raise TypeError(f"a must be a 1-D dask array; got {type(a).__name__} (for in-memory "
                        "arrays use polyconv.convolve)")
    check_dask_vector(a, "a")
    dtype_kind(a.dtype, "a")
    return a


def _dask_summation(x, k: np.ndarray, kind: str, modulus: int | None,
                    top: int | None) -> tuple[Summation, np.dtype]:
    """Summation and output dtype of the products of kind ``kind`` (``top``: ``max |a_i|`` when
    known already); no product is computed."""
    check_modulus(modulus, kind)
    if kind not in ("integer", "bigint"):
        return Summation(exact=False), float_work_dtype(x.dtype, k.dtype, kind)
    if modulus is not None:
        summation = exact_summation(0, modulus)
        return summation, summation.out_dtype
    factor = min(x.shape[0], k.shape[0]) * max_abs(k)
    by_dtype = dtype_max_abs(x.dtype)
    if by_dtype is None or factor * by_dtype >= INT64_LIMIT:
        by_dtype = top if top is not None else dask_summary(x, "a")[1]
    summation = exact_summation(factor * by_dtype, None)
    return summation, summation.out_dtype


def _merge_short_chunks(x, m: int):
    """Rechunk so that every chunk but the last holds at least ``m - 1`` samples."""
    chunks = x.chunks[0]
    if all(c >= m - 1 for c in chunks[:-1]):
        return x
    return x.rechunk(max(m - 1, max(chunks)))


def _overlap_add_graph(x, products: KernelProducts, summation: Summation, dtype: np.dtype, da):
    """The full product as a dask array: block products, then carries added block to block."""
    import dask

    m = products.kernel.shape[0]
    sizes = x.chunks[0]
    work = np.dtype(object) if summation.exact and summation.wide else dtype
    runner = dask.delayed(products, pure=True)
    products = x.map_blocks(_block_product, runner, summation,
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
    """The entries of the lazy full product a mode returns (:func:`polyconv.pipeline.plan.
    mode_window`, numpy.convolve's definitions)."""
    if mode == "full":
        return full
    start, stop = mode_window(mode, n, m)
    return full[start:stop]
