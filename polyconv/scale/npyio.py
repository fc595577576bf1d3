""".npy files read block by block and written sequentially, atomically.

:class:`NpySource` reads a 1-D ``.npy`` file from one open descriptor and refuses a file that
changes while it is read; :class:`NpyWriter` is a :class:`polyconv._atomic.AtomicFile` (the one
temp-file-then-rename writer of the package) that writes a ``.npy`` header and then the values.
The format is numpy's own (``numpy.lib.format``, NEP 1); pickled (object) arrays are never loaded.
"""

from __future__ import annotations

import io
import os
from collections.abc import Iterator

import numpy as np

from .._atomic import AtomicFile

__all__ = ["SourceChangedError", "NpySource", "NpyWriter", "native"]


def native(x: np.ndarray) -> np.ndarray:
    """``x`` in native byte order (a converted copy only when it is not)."""
    if x.dtype.byteorder not in "=|" and x.dtype.byteorder != _NATIVE_ORDER:
        return x.astype(x.dtype.newbyteorder("="))
    return x


_NATIVE_ORDER = "<" if np.little_endian else ">"


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
        return native(out)

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
        except Exception as exc:  # noqa: BLE001 - numpy's parser raises many (TokenError too)
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


class NpyWriter(AtomicFile):
    """Write a 1-D ``.npy`` file sequentially; it appears at ``path`` only on :meth:`commit`.

    An :class:`polyconv._atomic.AtomicFile` (temporary file in the destination's folder, renamed
    into place; umask honoured, a replaced file's mode kept; disk-full errors name ``path``)
    that starts with a version 1.0 header written by ``numpy.lib.format``.  Plain sequential
    writes, not a writable memory map: written pages sit in the page cache, not in the process's
    resident set.  Leaving a ``with`` block by an exception (KeyboardInterrupt and the CLI's
    SIGTERM/SIGHUP included), or :meth:`abort`, removes the temporary; :meth:`commit` refuses
    (and removes it) unless exactly ``length`` values were written.
    """

    def __init__(self, path, dtype: np.dtype, length: int, *, sync: bool = True):
        super().__init__(path, sync=sync)
        try:  # from here on the temporary exists: any exception (a signal too) removes it
            self.dtype = np.dtype(dtype)
            self.length = length
            self.written = 0
            header = io.BytesIO()
            np.lib.format.write_array_header_1_0(header, {
                "descr": np.lib.format.dtype_to_descr(self.dtype),
                "fortran_order": False,
                "shape": (length,),
            })
            super().write(header.getvalue())
        except BaseException:
            self.abort()
            raise

    def write(self, values: np.ndarray) -> None:
        """Append values (converted to the file's dtype)."""
        data = np.ascontiguousarray(values, dtype=self.dtype)
        if self.written + data.shape[0] > self.length:
            self.abort()
            raise RuntimeError("more values written than the header announced")
        super().write(memoryview(data).cast("B"))
        self.written += data.shape[0]

    def commit(self):
        """Check the length, flush (and fsync), and rename the file into place."""
        if self.written != self.length:
            self.abort()
            raise RuntimeError(f"{self.written} values written, the header announced "
                               f"{self.length}")
        return super().commit()
