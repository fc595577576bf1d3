"""Streaming convolution: signals longer than memory, block by block.

A long 1-D signal ``x`` (length ``n``) is convolved with an in-memory kernel ``k`` (length ``m``)
by overlap-add (:class:`polyconv.scale.overlap.OverlapAdd`; Oppenheim & Schafer, *Discrete-Time
Signal Processing*, 3rd ed., section 8.7), so the memory in use is one block product plus an
``m - 1`` carry, whatever ``n`` is.

Two entry points:

* :func:`convolve_chunks`: an iterable of 1-D chunks of any sizes in, an iterator of output chunks
  out (their concatenation is the full product);
* :func:`convolve_file`: a ``.npy`` file in (read block by block, :class:`~polyconv.scale.npyio.
  NpySource`), a ``.npy`` file out, written to a temporary file in the destination's folder and
  renamed into place only when complete (:class:`~polyconv.scale.npyio.NpyWriter`), so a reader
  never sees a half-written result.

Exact integers are summed exactly (:class:`polyconv.scale.overlap.Summation`): int64 while the
bound ``min(n, m) max|x| max|k| < 2^63`` proves it, Python ints beyond.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Iterator

import numpy as np

from ..numerics.budget import check_allocation, memory_budget
from ..pipeline.inputs import (
    check_count,
    check_modulus,
    check_sequence,
    check_sequences,
    combine_kinds,
    dtype_kind,
)
from ..pipeline.shaping import float_work_dtype
from .blocks import KernelProducts
from .npyio import NpySource, NpyWriter, native
from .overlap import (
    INT64_LIMIT,
    OverlapAdd,
    Summation,
    dtype_max_abs,
    exact_summation,
    max_abs,
)

#: Smallest default block (samples): large enough that a block amortises the fixed cost of one
#: block product (:mod:`polyconv.scale.blocks`) and of one read and one write, small enough (a few
#: MiB) that a block, its product and the engine's work space stay far below the memory goal.
MIN_BLOCK = 1 << 20

#: Default block length is at least this many kernel lengths (rounded up to a power of two), so
#: the ``m - 1`` overlap recomputed per block costs at most ~1/8 more work.
BLOCK_PER_KERNEL = 8

#: Peak memory of :func:`convolve_file` in float64 blocks (block product, its transform work and
#: the carry; measured: under 200 MiB at the default 2^20-sample block).
FILE_PEAK_BLOCKS = 10

ProgressCallback = Callable[[int, int], object]


# ----------------------------------------------------------------------------- validation

def check_kernel(kernel) -> tuple[np.ndarray, str]:
    """The kernel as a 1-D, non-empty numeric array (native byte order) and its kind."""
    k, kind = check_sequence(kernel, "kernel", unit="coefficient")
    return native(k), kind


def default_block(kernel_length: int) -> int:
    """Block length: a power of two >= ``BLOCK_PER_KERNEL * m`` and >= :data:`MIN_BLOCK`."""
    want = max(MIN_BLOCK, BLOCK_PER_KERNEL * kernel_length)
    return 1 << (want - 1).bit_length()


def _is_exact(kind: str) -> bool:
    """Whether a product of this kind (:mod:`polyconv.pipeline.inputs`) is computed exactly."""
    return kind in ("integer", "bigint")


# ----------------------------------------------------------------------------- chunks

def convolve_chunks(chunks: Iterable, kernel, *,
                    modulus: int | None = None) -> Iterator[np.ndarray]:
    """Convolve a signal arriving in chunks with a kernel; yield the output in chunks.

    Overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., section 8.7):
    each chunk is convolved with the whole kernel (the arguments checked once, one plan per chunk
    length: :class:`polyconv.scale.blocks.KernelProducts`), and the ``m - 1`` entries that
    overhang the chunk are carried into the next one.  For each non-empty
    input chunk one output chunk of the same length is yielded; after the last, one more chunk
    of ``m - 1`` entries (none when ``m == 1``).  Concatenated, they are
    ``convolve(concatenate(chunks), kernel, mode="full", modulus=modulus)``.

    Parameters
    ----------
    chunks : iterable of array_like
        Consecutive 1-D pieces of the signal, of any sizes (empty ones are skipped).  All integer
        or all floating point.
    kernel : array_like
        1-D, non-empty, in memory.
    modulus : int, optional
        Integer data only: every output reduced to ``[0, modulus)``.

    Returns
    -------
    iterator of numpy.ndarray
        Output chunks, computed as they are asked for.  Floats: the dtype
        :func:`polyconv.convolve` gives a chunk.  Exact integers: int64 while
        ``min(s, m) max|x| max|k| < 2^63`` is proven for the ``s`` samples seen so far, object
        arrays of Python ints from the first chunk where it is not (values exact either way).
        With ``modulus``: int64 when ``modulus < 2^63``.

    Raises
    ------
    ValueError, TypeError
        At the call: ``chunks`` that is not an iterable of chunks (None, a number, a string, a
        set or dict, a 1-D array: pass ``[x]`` for one chunk), a bad kernel or modulus.  While
        iterating: a chunk that is not 1-D or whose kind (integer vs floating point) differs from
        the first chunk's; no samples at all.

    Notes
    -----
    Memory: one chunk's product plus the ``m - 1`` carry.  A chunk much shorter than the kernel
    is correct but slow (each costs a product with the whole kernel): regroup tiny chunks first.

    Examples
    --------
    >>> import numpy as np
    >>> from polyconv.scale import convolve_chunks
    >>> parts = convolve_chunks([np.array([1, 2]), np.array([3])], [1, 1])
    >>> np.concatenate(list(parts))
    array([1, 3, 5, 3])
    """
    pieces = check_sequences(chunks, "chunks", what="consecutive pieces of the signal (a list, "
                             "a generator, ...)", one="pass [x] for a single chunk")
    k, kernel_kind = check_kernel(kernel)
    check_modulus(modulus)
    return _chunk_products(pieces, k, kernel_kind, modulus)


def _chunk_products(chunks: Iterator, k: np.ndarray, kernel_kind: str,
                    modulus: int | None) -> Iterator[np.ndarray]:
    """The output chunks of :func:`convolve_chunks` (arguments checked)."""
    m = k.shape[0]
    state: OverlapAdd | None = None
    first_exact = None
    max_x = 0
    for index, chunk in enumerate(chunks):
        x, kind = _check_chunk(chunk, index)
        if x.shape[0] == 0:
            continue
        kind = combine_kinds(kind, kernel_kind)
        if state is None:
            check_modulus(modulus, kind, f"chunks[{index}] and kernel hold")
            first_exact = _is_exact(kind)
            summation = (exact_summation(0, modulus) if first_exact and modulus is not None
                         else Summation(exact=first_exact))
            state = OverlapAdd(KernelProducts(k, first_exact, modulus, "chunks"), summation)
        _check_same_kind(x, _is_exact(kind), first_exact, index)
        # (the name only matters in the refusals of object chunks)
        block = state.products.operand(x, name=f"chunks[{index}]" if x.dtype == object else None)
        if first_exact and modulus is None and not state.summation.wide:
            max_x = max(max_x, block.max_abs)
            seen = state.consumed + x.shape[0]
            if min(seen, m) * max_x * state.products.kernel.max_abs >= INT64_LIMIT:
                state.widen(exact_summation(INT64_LIMIT, None))
        yield state.push(block)
    if state is None:
        raise ValueError("chunks held no samples: the signal is empty")
    tail = state.flush_carry()
    if tail.shape[0]:
        yield tail


def _check_chunk(chunk, index: int) -> tuple[np.ndarray, str]:
    x, kind = check_sequence(chunk, f"chunks[{index}]", what="a piece of the signal",
                             allow_empty=True)
    return native(x), kind


def _check_same_kind(x: np.ndarray, now_exact: bool, exact: bool, index: int) -> None:
    if now_exact != exact:
        was = "integers" if exact else "floating point numbers"
        raise TypeError(f"chunks[{index}] holds {x.dtype} data but earlier chunks held {was}; "
                        "all chunks must be integer or all floating point")


def _check_destination(destination, source: str) -> str:
    try:
        dest = os.fspath(destination)
    except TypeError:
        raise TypeError(f"destination must be a path, got {type(destination).__name__}") from None
    if os.path.isdir(dest):
        raise ValueError(f"destination {dest!r} is a directory, expected a file path")
    folder = os.path.dirname(os.path.abspath(dest))
    if not os.path.isdir(folder):
        raise FileNotFoundError(f"destination folder {folder!r} does not exist")
    same = os.path.realpath(dest) == os.path.realpath(source)
    if not same and os.path.exists(dest):
        same = os.path.samefile(dest, source)
    if same:
        raise ValueError(f"destination {dest!r} is the source file: write the result elsewhere")
    return dest


def _file_summation(src: NpySource, k: np.ndarray, kernel_kind: str, modulus: int | None,
                    block: int) -> tuple[Summation, np.dtype]:
    """Summation and output dtype; exact products must provably fit a fixed-width .npy dtype.

    The kinds come from the dtypes (:mod:`polyconv.pipeline.inputs`); no product is computed."""
    source = src.dtype.newbyteorder("=")
    kind = combine_kinds(dtype_kind(source, "source"), kernel_kind)
    check_modulus(modulus, kind, f"source ({src.dtype}) and kernel ({k.dtype}) hold")
    if not _is_exact(kind):
        return Summation(exact=False), float_work_dtype(source, k.dtype, kind)
    if modulus is not None:
        if modulus >= INT64_LIMIT:
            raise ValueError(f"modulus={modulus} is >= 2^63: residues do not fit the int64 .npy "
                             "output; use convolve_chunks (object chunks) instead")
        return exact_summation(0, modulus), np.dtype(np.int64)
    bound = _file_bound(src, k, block)
    if bound >= INT64_LIMIT:
        raise ValueError(
            f"the product of source and kernel is not proven to fit in int64 (bound "
            f"min(n, m) max|x| max|k| = {bound} >= 2^63), and an object .npy cannot be written "
            "in constant memory: pass modulus=, or use convolve_chunks, which yields exact "
            "object chunks")
    return exact_summation(bound, None), np.dtype(np.int64)


def _file_bound(src: NpySource, k: np.ndarray, block: int) -> int:
    """``min(n, m) max|x| max|k|``, from the source dtype's range if that suffices, else from
    one pass over the data."""
    factor = min(src.length, k.shape[0]) * max_abs(k)
    by_dtype = dtype_max_abs(src.dtype)
    if by_dtype is not None and factor * by_dtype < INT64_LIMIT:
        return factor * by_dtype
    max_x = 0
    for x in src.blocks(block):
        max_x = max(max_x, max_abs(x))
    return factor * max_x


def convolve_file(source, kernel, destination, *, modulus: int | None = None,
                  block: int | None = None, progress: ProgressCallback | None = None) -> None:
    """Convolve a 1-D signal stored in a ``.npy`` file with a kernel; write the result to a file.

    Mode "full": ``destination`` receives ``n + m - 1`` values, equal to
    ``polyconv.convolve(numpy.load(source), kernel, modulus=modulus)`` (bit for bit for
    integers; to floating-point rounding for floats, since block products round differently).
    Overlap-add over blocks (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
    section 8.7), in memory independent of ``n``.

    Parameters
    ----------
    source : str or os.PathLike
        A ``.npy`` file holding a non-empty 1-D numeric array (read through
        ``numpy.load(mmap_mode="r")``; any byte order).
    kernel : array_like
        1-D, non-empty, in memory.
    destination : str or os.PathLike
        The ``.npy`` file to write (replaced if it exists; never the source).  It appears only
        when complete: data go to a temporary file in the same folder, renamed into place at
        the end; on any error or KeyboardInterrupt the temporary file is removed.
    modulus : int, optional
        Integer data only: outputs reduced to ``[0, modulus)``; ``modulus < 2^63`` required
        (the output is int64).
    block : int, optional
        Samples per block.  Default: the power of two at least ``8 m`` and at least ``2^20``.
    progress : callable, optional
        Called as ``progress(done, total)`` with output samples written so far and
        ``total = n + m - 1``: once with ``done = 0``, then after every block.  An exception
        it raises aborts the run (nothing is left behind).

    Raises
    ------
    FileNotFoundError
        ``source`` or the destination's folder does not exist.
    ValueError, TypeError
        Bad source, kernel, destination, block or modulus, naming the argument.  Exact integer
        data whose product cannot be proven to fit in int64 (bound ``min(n, m) max|x| max|k|
        >= 2^63``, taken from the source dtype's range or, if that is too coarse, from one
        pass over the data): an object ``.npy`` cannot be streamed, so this raises ValueError
        rather than write one; use ``modulus=`` or :func:`convolve_chunks`.

    Notes
    -----
    Output dtype: as :func:`polyconv.api.convolve` for the data's kinds (float32 x float32
    stays float32); exact integers give int64.  Peak memory is about ten times one block of
    float64 plus the kernel (measured: under 200 MiB at the default block length).

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> from polyconv.scale import convolve_file
    >>> folder = tempfile.mkdtemp()
    >>> src, dst = os.path.join(folder, "x.npy"), os.path.join(folder, "y.npy")
    >>> np.save(src, np.arange(5))
    >>> convolve_file(src, [1, 1], dst)
    >>> np.load(dst)
    array([0, 1, 3, 5, 7, 4])
    """
    with NpySource(source) as src:
        _convolve_open_file(src, kernel, destination, modulus, block, progress)


def _convolve_open_file(src: NpySource, kernel, destination, modulus, block, progress) -> None:
    k, kernel_kind = check_kernel(kernel)
    dest = _check_destination(destination, src.path)
    given = check_count(block, "block", optional=True, role="samples per block")
    size = min(given or default_block(k.shape[0]), src.length)
    if not given:
        # the default block shrinks to fit the memory budget (never below two kernel lengths)
        fits = memory_budget() // (FILE_PEAK_BLOCKS * 8) - k.shape[0]
        size = min(size, max(fits, 2 * k.shape[0], 1))
    check_allocation(FILE_PEAK_BLOCKS * 8 * (size + k.shape[0]),
                     f"block={size}" if given else
                     f"the default block of {size} samples (8 kernel lengths; pass block=)")
    summation, dtype = _file_summation(src, k, kernel_kind, modulus, size)
    total = src.length + k.shape[0] - 1
    state = OverlapAdd(KernelProducts(k, summation.exact, modulus, "source"), summation)
    with NpyWriter(dest, dtype, total) as writer:
        _report(progress, 0, total)
        for x in src.blocks(size):
            writer.write(state.push(x))
            _report(progress, writer.written, total)
        tail = state.flush_carry()
        if tail.shape[0]:
            writer.write(tail)
            _report(progress, writer.written, total)
        src.check_unchanged()  # the last block's read is checked; a change after it, too
        writer.commit()


def _report(progress: ProgressCallback | None, done: int, total: int) -> None:
    if progress is not None:
        progress(done, total)
