"""Streaming convolution: signals longer than memory, block by block.

A long 1-D signal ``x`` (length ``n``) is convolved with an in-memory kernel ``k`` (length ``m``)
by overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., section 8.7,
"block convolution"): ``x`` is cut into consecutive blocks, each block product ``x_j * k``
(``m - 1`` entries longer than its block) is computed in memory by
:func:`polyconv.api.convolve`, and the overlapping ``m - 1`` entries are carried forward and
added into the head of the next block's product.  An output entry is final as soon as the block
covering its index has been added, so the memory in use is one block product plus an ``m - 1``
carry, whatever ``n`` is.

Two entry points:

* :func:`convolve_chunks`: an iterable of 1-D chunks of any sizes in, an iterator of output chunks
  out (their concatenation is the full product);
* :func:`convolve_file`: a ``.npy`` file in (read through ``numpy.load(mmap_mode="r")``), a
  ``.npy`` file out, written to a temporary file in the destination's folder and renamed into
  place only when complete (``os.replace``), so a reader never sees a half-written result.

Exact integers: partial sums are exact, and they stay in int64 only while an a-priori bound
proves it (every output, and every partial sum of one, is a sum of at most ``min(n, m)`` products
``x_i k_j``, so ``|c| <= min(n, m) max|x| max|k|``); otherwise Python ints (object arrays).
"""

from __future__ import annotations

import io
import os
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass

import numpy as np

from ._atomic import AtomicFile
from .api import convolve
from .budget import check_allocation, memory_budget
from .inputs import _kind_of, as_number_array

#: Smallest default block (samples): large enough that a block product amortises the fixed cost
#: of one :func:`polyconv.api.convolve` call and of one read and one write, small enough (a few
#: MiB) that a block, its product and the engine's work space stay far below the memory goal.
MIN_BLOCK = 1 << 20

#: Default block length is at least this many kernel lengths (rounded up to a power of two), so
#: the ``m - 1`` overlap recomputed per block costs at most ~1/8 more work.
BLOCK_PER_KERNEL = 8

#: Peak memory of :func:`convolve_file` in float64 blocks (block product, its transform work and
#: the carry; measured: under 200 MiB at the default 2^20-sample block).
FILE_PEAK_BLOCKS = 10

#: Partial sums of exact products stay in int64 while their bound is below this.
INT64_LIMIT = 2**63

ProgressCallback = Callable[[int, int], object]


# ----------------------------------------------------------------------------- exact arithmetic

def max_abs(x: np.ndarray) -> int:
    """``max |x_i|`` as a Python int (0 for an empty array); integer, bool or object arrays."""
    if x.size == 0:
        return 0
    if x.dtype.kind == "b":
        return int(bool(x.any()))
    if x.dtype.kind == "O":
        return int(np.max(np.abs(x)))
    return max(int(x.max()), -int(x.min()))


def dtype_max_abs(dtype: np.dtype) -> int | None:
    """Largest ``|value|`` a fixed-width integer or bool dtype can hold; None for other dtypes."""
    if dtype.kind == "b":
        return 1
    if dtype.kind in "iu":
        info = np.iinfo(dtype)
        return max(int(info.max), -int(info.min))
    return None


def is_integer_dtype(dtype: np.dtype) -> bool:
    """True for bool, fixed-width integer and object (Python int) dtypes."""
    return dtype.kind in "iubO"


@dataclass(frozen=True, slots=True)
class Summation:
    """How overlapping partial sums of block products are added.

    Attributes
    ----------
    exact : bool
        Integer operands: sums are exact (int64 when ``wide`` is False, Python ints otherwise).
    wide : bool
        Add in Python ints (object arrays) because int64 is not proven to hold the sums.
    modulus : int or None
        Reduce every sum to ``[0, modulus)``.
    """

    exact: bool
    wide: bool = False
    modulus: int | None = None

    @property
    def out_dtype(self) -> np.dtype | None:
        """The dtype finished exact outputs are given (None: as the block products come)."""
        if not self.exact:
            return None
        if self.modulus is not None:
            return np.dtype(np.int64) if self.modulus < INT64_LIMIT else np.dtype(object)
        return np.dtype(object) if self.wide else np.dtype(np.int64)


def exact_summation(bound: int, modulus: int | None) -> Summation:
    """The summation for exact products whose partial sums are bounded by ``bound``."""
    if modulus is not None:
        # two residues below modulus add without int64 overflow when modulus <= 2^62
        return Summation(exact=True, wide=modulus > 2**62, modulus=modulus)
    return Summation(exact=True, wide=bound >= INT64_LIMIT)


def add_overlap(y: np.ndarray, carry: np.ndarray, summation: Summation) -> np.ndarray:
    """Add ``carry`` into the head of ``y`` (``len(carry) <= len(y)``); may return a new array."""
    if not summation.exact:
        work = np.result_type(y.dtype, carry.dtype)
        y = y.astype(work, copy=not y.flags.writeable)
        y[: carry.shape[0]] += carry
        return y
    y = as_exact(y, summation)
    carry = as_exact(carry, summation)
    head = y[: carry.shape[0]]
    head += carry
    if summation.modulus is not None:
        if summation.wide:
            head %= summation.modulus
        else:
            head -= np.where(head >= summation.modulus, summation.modulus, 0)
    return y


def as_exact(y: np.ndarray, summation: Summation) -> np.ndarray:
    """``y`` as a writable array in the summation's working type (int64 or Python ints)."""
    if summation.wide:
        if y.dtype == object:
            return y if y.flags.writeable else y.copy()
        return y.astype(object)
    return y.astype(np.int64, copy=not y.flags.writeable or y.dtype != np.int64)


def finish_exact(y: np.ndarray, summation: Summation) -> np.ndarray:
    """Finished outputs in the summation's output dtype (floats are returned unchanged)."""
    dtype = summation.out_dtype
    if dtype is None or y.dtype == dtype:
        return y
    return y.astype(dtype)


# ----------------------------------------------------------------------------- overlap-add core

class OverlapAdd:
    """Overlap-add state: feed consecutive blocks of ``x``, get finished outputs back.

    Parameters
    ----------
    kernel : numpy.ndarray
        The 1-D, non-empty kernel.
    summation : Summation
        How block products and carries are added.
    modulus : int, optional
        Passed to :func:`polyconv.api.convolve` for every block product.

    Notes
    -----
    After blocks totalling ``s`` samples, outputs ``0 .. s - 1`` have been returned and the carry
    holds the partial sums of outputs ``s .. s + m - 2``; :meth:`finish` returns those.
    """

    def __init__(self, kernel: np.ndarray, summation: Summation, modulus: int | None = None):
        self.kernel = kernel
        self.summation = summation
        self.modulus = modulus
        self.carry: np.ndarray | None = None
        self.consumed = 0

    def push(self, block: np.ndarray) -> np.ndarray:
        """Convolve one non-empty block; return its ``len(block)`` finished outputs."""
        y = convolve(block, self.kernel, modulus=self.modulus)
        if self.carry is not None and self.carry.shape[0]:
            y = add_overlap(y, self.carry, self.summation)
        elif self.summation.exact:
            y = as_exact(y, self.summation)
        size = block.shape[0]
        self.carry = y[size:].copy()
        self.consumed += size
        return finish_exact(y[:size], self.summation)

    def widen(self, summation: Summation) -> None:
        """Switch to another summation (exact int64 -> Python ints), converting the carry."""
        self.summation = summation
        if self.carry is not None and summation.exact:
            self.carry = as_exact(self.carry, summation)

    def finish(self) -> np.ndarray:
        """The last ``m - 1`` outputs (empty for a one-tap kernel)."""
        if self.carry is None:
            raise ValueError("no samples were convolved: the signal is empty")
        return finish_exact(self.carry, self.summation)


# ----------------------------------------------------------------------------- validation

def check_kernel(kernel) -> np.ndarray:
    """The kernel as a 1-D, non-empty numeric array (native byte order)."""
    k = as_number_array(kernel, "kernel")
    if k.ndim != 1:
        raise ValueError(f"kernel must be 1-D, got an array of shape {k.shape}")
    if k.shape[0] == 0:
        raise ValueError("kernel is empty: expected at least one coefficient")
    if k.dtype.kind not in "biufcO":
        raise TypeError(f"kernel must hold numbers, got dtype {k.dtype}")
    if k.dtype == object:
        _kind_of(k, "kernel")  # every entry a number, or a TypeError naming the kernel
    return _native(k)


def check_block(block) -> int | None:
    """Validate ``block=``: None or a positive integer."""
    if block is None:
        return None
    if isinstance(block, bool) or not isinstance(block, (int, np.integer)):
        raise TypeError(f"block must be a positive integer or None, got {type(block).__name__}")
    if block < 1:
        raise ValueError(f"block must be a positive integer, got {block}")
    return int(block)


def check_modulus(modulus) -> None:
    """Validate ``modulus=``: None or an integer >= 2."""
    if modulus is None:
        return
    if isinstance(modulus, bool) or not isinstance(modulus, (int, np.integer)):
        raise TypeError(f"modulus must be an integer >= 2 or None, got {type(modulus).__name__}")
    if modulus < 2:
        raise ValueError(f"modulus must be an integer >= 2, got {modulus}")


def default_block(kernel_length: int) -> int:
    """Block length: a power of two >= ``BLOCK_PER_KERNEL * m`` and >= :data:`MIN_BLOCK`."""
    want = max(MIN_BLOCK, BLOCK_PER_KERNEL * kernel_length)
    return 1 << (want - 1).bit_length()


def _native(x: np.ndarray) -> np.ndarray:
    if x.dtype.byteorder not in "=|" and x.dtype.byteorder != _NATIVE_ORDER:
        return x.astype(x.dtype.newbyteorder("="))
    return x


_NATIVE_ORDER = "<" if np.little_endian else ">"


def _probe(x: np.ndarray, kernel: np.ndarray, modulus: int | None) -> np.ndarray:
    """A one-sample product: lets :func:`convolve` reject bad kinds/moduli with its messages."""
    return convolve(x[:1], kernel[:1], modulus=modulus)


# ----------------------------------------------------------------------------- chunks

def convolve_chunks(chunks: Iterable, kernel, *,
                    modulus: int | None = None) -> Iterator[np.ndarray]:
    """Convolve a signal arriving in chunks with a kernel; yield the output in chunks.

    Overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., section 8.7):
    each chunk is convolved with the whole kernel by :func:`polyconv.api.convolve`, and the
    ``m - 1`` entries that overhang the chunk are carried into the next one.  For each non-empty
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

    Yields
    ------
    numpy.ndarray
        Output chunks.  Floats: the dtype :func:`polyconv.api.convolve` gives a chunk.  Exact
        integers: int64 while ``min(s, m) max|x| max|k| < 2^63`` is proven for the ``s`` samples
        seen so far, object arrays of Python ints from the first chunk where it is not (values
        exact either way).  With ``modulus``: int64 when ``modulus < 2^63``.

    Raises
    ------
    ValueError, TypeError
        Bad kernel or modulus; a chunk that is not 1-D or whose kind (integer vs floating point)
        differs from the first chunk's; no samples at all.

    Notes
    -----
    Memory: one chunk's product plus the ``m - 1`` carry.  A chunk much shorter than the kernel
    is correct but slow (each costs a product with the whole kernel): regroup tiny chunks first.

    Examples
    --------
    >>> import numpy as np
    >>> from polyconv.streaming import convolve_chunks
    >>> parts = convolve_chunks([np.array([1, 2]), np.array([3])], [1, 1])
    >>> np.concatenate(list(parts))
    array([1, 3, 5, 3])
    """
    k = check_kernel(kernel)
    m = k.shape[0]
    max_k = max_abs(k) if is_integer_dtype(k.dtype) else 0
    state: OverlapAdd | None = None
    first_exact = None
    max_x = 0
    if chunks is None or isinstance(chunks, (str, bytes)) or not hasattr(chunks, "__iter__"):
        raise TypeError("chunks must be an iterable of 1-D array-likes (a list, a generator, "
                        f"...); got {type(chunks).__name__}")
    for index, chunk in enumerate(chunks):
        x = _check_chunk(chunk, index)
        if x.shape[0] == 0:
            continue
        if state is None:
            first = _probe(x, k, modulus)
            first_exact = is_integer_dtype(first.dtype)
            summation = (exact_summation(0, modulus) if first_exact and modulus is not None
                         else Summation(exact=first_exact))
            state = OverlapAdd(k, summation, modulus)
        _check_same_kind(x, k, first_exact, index)
        if first_exact and modulus is None and not state.summation.wide:
            max_x = max(max_x, max_abs(x))
            seen = state.consumed + x.shape[0]
            if min(seen, m) * max_x * max_k >= INT64_LIMIT:
                state.widen(exact_summation(INT64_LIMIT, None))
        yield state.push(x)
    if state is None:
        raise ValueError("chunks held no samples: the signal is empty")
    tail = state.finish()
    if tail.shape[0]:
        yield tail


def _check_chunk(chunk, index: int) -> np.ndarray:
    if chunk is None:
        raise TypeError(f"chunks[{index}] is None; expected a 1-D array-like of numbers")
    x = as_number_array(chunk, f"chunks[{index}]")
    if x.ndim != 1:
        raise ValueError(f"chunks[{index}] must be 1-D, got shape {x.shape}")
    if x.dtype.kind not in "biufcO":
        raise TypeError(f"chunks[{index}] must hold numbers, got dtype {x.dtype}")
    if x.dtype == object:
        _kind_of(x, f"chunks[{index}]")  # every entry a number (None is not)
    return _native(x)


def _check_same_kind(x: np.ndarray, k: np.ndarray, exact: bool, index: int) -> None:
    now_exact = is_integer_dtype(x.dtype) and is_integer_dtype(k.dtype)
    if x.dtype == object:  # Python ints, or floats in an object array: let convolve decide
        now_exact = is_integer_dtype(_probe(x, k, None).dtype)
    if now_exact != exact:
        was = "integers" if exact else "floating point numbers"
        raise TypeError(f"chunks[{index}] holds {x.dtype} data but earlier chunks held {was}; "
                        "all chunks must be integer or all floating point")


# ----------------------------------------------------------------------------- files

class SourceChangedError(ValueError):
    """The source file was replaced, truncated or rewritten while it was being read."""


class NpySource:
    """A 1-D ``.npy`` file opened once and read block by block from that one open file.

    The header is parsed with ``numpy.lib.format`` (never unpickled); blocks are read with
    ``os.pread`` from the descriptor opened at the start, into fresh arrays (pages read do not
    accumulate in the resident set, as a long-lived memory map's would).  A file renamed over
    the path, truncated, extended or rewritten in place while it is read is detected (device and
    inode of the path, size, modification and change times of the open file, checked before
    every block
    and by :meth:`check_unchanged`) and refused with :class:`SourceChangedError`: the output
    never mixes two files.
    """

    def __init__(self, path):
        self.path = os.fspath(path)
        self.fd, self.dtype, self.length, self.offset = _open_npy(self.path)
        self.identity = _identity(os.fstat(self.fd))

    def close(self) -> None:
        """Close the file (idempotent)."""
        if self.fd is not None:
            os.close(self.fd)
            self.fd = None

    def __enter__(self) -> NpySource:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def check_unchanged(self) -> None:
        """Raise :class:`SourceChangedError` if the file is not the one opened, as it was."""
        now = _identity(os.fstat(self.fd))
        try:
            at_path = os.stat(self.path)
            same_path = (at_path.st_dev, at_path.st_ino) == self.identity[:2]
        except OSError:
            same_path = False
        if now != self.identity or not same_path:
            what = ("was replaced or removed" if not same_path
                    else "changed size or was rewritten")
            raise SourceChangedError(
                f"source {self.path!r} {what} while it was being read: refusing to mix two "
                "files' data into one result (nothing was written); run again once the file "
                "is stable")

    def read(self, start: int, stop: int) -> np.ndarray:
        """Samples ``start .. stop - 1`` as a new in-memory array in native byte order."""
        self.check_unchanged()
        count = stop - start
        out = np.empty(count, dtype=self.dtype)
        view = memoryview(out).cast("B")
        position = self.offset + start * self.dtype.itemsize
        got = 0
        while got < view.nbytes:
            n = _read_at(self.fd, view[got:], position + got)
            if n == 0:
                raise SourceChangedError(
                    f"source {self.path!r} ended after {start + got // self.dtype.itemsize} "
                    f"of the {self.length} samples its header announces (truncated while read?)")
            got += n
        return _native(out)

    def blocks(self, block: int) -> Iterator[np.ndarray]:
        """Consecutive blocks of ``block`` samples (the last may be shorter)."""
        for start in range(0, self.length, block):
            yield self.read(start, min(self.length, start + block))


def _read_at(fd: int, view: memoryview, position: int) -> int:
    """Read into ``view`` from byte ``position`` of ``fd`` (no shared file offset moved)."""
    if hasattr(os, "preadv"):
        return os.preadv(fd, [view], position)
    os.lseek(fd, position, os.SEEK_SET)
    return os.readv(fd, [view])


def _identity(st: os.stat_result) -> tuple[int, int, int, int, int]:
    return (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns, st.st_ctime_ns)


#: The first bytes of a zip archive (a .npz file).
_ZIP_MAGIC = b"PK\x03\x04"


def _open_npy(path: str) -> tuple[int, np.dtype, int, int]:
    """Open ``path`` and parse its ``.npy`` header: ``(fd, dtype, length, data offset)``."""
    if not os.path.exists(path):
        raise FileNotFoundError(f"source {path!r} does not exist")
    if os.path.isdir(path):
        raise ValueError(f"source {path!r} is a directory, expected a .npy file")
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError as exc:
        raise ValueError(f"source {path!r} could not be opened: {exc.strerror}") from None
    try:
        dtype, length, offset = _parse_header(fd, path)
    except BaseException:
        os.close(fd)
        raise
    return fd, dtype, length, offset


def _parse_header(fd: int, path: str) -> tuple[np.dtype, int, int]:
    with os.fdopen(os.dup(fd), "rb") as f:
        lead = f.read(6)
        if lead[:4] == _ZIP_MAGIC:
            raise ValueError(f"source {path!r} is a .npz archive, expected a single-array .npy "
                             "file")
        if lead != b"\x93NUMPY":
            raise ValueError(f"source {path!r} is not a .npy file (it does not start with the "
                             ".npy magic string)")
        f.seek(0)
        try:
            version = np.lib.format.read_magic(f)
            reader = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                      else np.lib.format.read_array_header_2_0)
            shape, fortran, dtype = reader(f)
        except (ValueError, SyntaxError, TypeError, EOFError, OSError) as exc:
            raise ValueError(f"source {path!r} has a damaged .npy header (numpy said: "
                             f"{exc})") from None
        offset = f.tell()
    if dtype.hasobject:
        raise ValueError(f"source {path!r} holds Python objects (a pickled array): refused, "
                        "pickles are never loaded")
    if len(shape) != 1:
        raise ValueError(f"source {path!r} must hold a 1-D array, got shape {shape}")
    if shape[0] == 0:
        raise ValueError(f"source {path!r} holds an empty array")
    if dtype.kind not in "biufc":
        raise TypeError(f"source {path!r} must hold numbers, got dtype {dtype}")
    size = os.fstat(fd).st_size
    need = offset + shape[0] * dtype.itemsize
    if size < need:
        raise ValueError(f"source {path!r} is truncated: its header announces {shape[0]} "
                         f"samples ({need} bytes with the header), the file has {size} bytes")
    del fortran  # one axis: C and Fortran order coincide
    return dtype, shape[0], offset


class AtomicNpyWriter:
    """Write a 1-D ``.npy`` file sequentially; it appears at ``path`` only on :meth:`commit`.

    A :class:`polyconv._atomic.AtomicFile` (temporary file in the destination's folder, renamed
    into place; umask honoured, a replaced file's mode kept; disk-full errors name ``path``)
    after a version 1.0 header written by ``numpy.lib.format``.  Plain sequential writes, not a
    writable memory map: written pages sit in the page cache, not in the process's resident
    set.  :meth:`abort` (also on leaving a ``with`` block without :meth:`commit`, on any
    exception, KeyboardInterrupt and the CLI's SIGTERM/SIGHUP included) removes the temporary.
    """

    def __init__(self, path, dtype: np.dtype, length: int, *, sync: bool = True):
        self.path = os.fspath(path)
        self.dtype = np.dtype(dtype)
        self.length = length
        self.written = 0
        self.out = AtomicFile(self.path, sync=sync)
        self.temp = os.fspath(self.out.temp)
        try:
            header = io.BytesIO()
            np.lib.format.write_array_header_1_0(header, {
                "descr": np.lib.format.dtype_to_descr(self.dtype),
                "fortran_order": False,
                "shape": (length,),
            })
            self.out.write(header.getvalue())
        except BaseException:
            self.abort()
            raise

    def write(self, values: np.ndarray) -> None:
        """Append values (converted to the file's dtype)."""
        data = np.ascontiguousarray(values, dtype=self.dtype)
        if self.written + data.shape[0] > self.length:
            self.abort()
            raise RuntimeError("more values written than the header announced")
        self.out.write(memoryview(data).cast("B"))
        self.written += data.shape[0]

    def commit(self) -> None:
        """Check the length, flush (and fsync), and rename the file into place."""
        if self.written != self.length:
            self.abort()
            raise RuntimeError(f"{self.written} values written, the header announced "
                               f"{self.length}")
        self.out.commit()

    def abort(self) -> None:
        """Close and remove the temporary file (never raises for a missing file)."""
        self.out.abort()

    def __enter__(self) -> AtomicNpyWriter:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        self.abort()  # a no-op after commit


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


def _file_summation(src: NpySource, k: np.ndarray, modulus: int | None,
                    block: int) -> tuple[Summation, np.dtype]:
    """Summation and output dtype; exact products must provably fit a fixed-width .npy dtype."""
    probe = _probe(src.read(0, 1), k, None)
    if not is_integer_dtype(probe.dtype):
        if modulus is not None:
            raise TypeError(f"modulus={modulus!r} needs integer data; source ({src.dtype}) and "
                            f"kernel ({k.dtype}) give floating point")
        return Summation(exact=False), probe.dtype
    check_modulus(modulus)
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
    >>> from polyconv.streaming import convolve_file
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
    k = check_kernel(kernel)
    dest = _check_destination(destination, src.path)
    given = check_block(block)
    size = min(given or default_block(k.shape[0]), src.length)
    if not given:
        # the default block shrinks to fit the memory budget (never below two kernel lengths)
        fits = memory_budget() // (FILE_PEAK_BLOCKS * 8) - k.shape[0]
        size = min(size, max(fits, 2 * k.shape[0], 1))
    check_allocation(FILE_PEAK_BLOCKS * 8 * (size + k.shape[0]),
                     f"block={size}" if given else
                     f"the default block of {size} samples (8 kernel lengths; pass block=)")
    summation, dtype = _file_summation(src, k, modulus, size)
    total = src.length + k.shape[0] - 1
    state = OverlapAdd(k, summation, modulus)
    with AtomicNpyWriter(dest, dtype, total) as writer:
        _report(progress, 0, total)
        for x in src.blocks(size):
            writer.write(state.push(x))
            _report(progress, writer.written, total)
        tail = state.finish()
        if tail.shape[0]:
            writer.write(tail)
            _report(progress, writer.written, total)
        src.check_unchanged()  # the last block's read is checked; a change after it, too
        writer.commit()


def _report(progress: ProgressCallback | None, done: int, total: int) -> None:
    if progress is not None:
        progress(done, total)
