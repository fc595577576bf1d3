"""The one way polyconv writes a file or a folder: build it beside the target, then rename.

Every file polyconv writes (CLI outputs, the calibrated cost table, streamed ``.npy`` results)
goes through :class:`AtomicFile`, and every report folder through :func:`replace_folder`:

* the new content is written to a hidden temporary sibling (``.NAME.<hex>.tmp`` for a file,
  ``.NAME.<hex>.part`` for a folder) on the same file system, so the final rename is atomic
  (POSIX ``rename(2)``): a reader sees the old target or the new one, never a mixture;
* a new file gets the mode ``0o666`` less the umask (what ``open()`` would give), a new folder
  ``0o777`` less the umask; a replaced file or folder keeps its mode;
* on any exception, Ctrl-C and the CLI's SIGTERM/SIGHUP handling included (they raise a
  :class:`KeyboardInterrupt`), the temporary is removed and the target is left as it was;
* an :class:`OSError` while writing (a full disk, a file-size limit) is re-raised naming the
  target, not the temporary;
* the renames themselves run in :func:`critical_section`: SIGINT, SIGTERM and SIGHUP arriving
  then are held back until the target is complete, then delivered.

A folder that already exists is exchanged with the new one in one step where the kernel offers it
(Linux ``renameat2(RENAME_EXCHANGE)``); elsewhere the old folder is first renamed aside, inside a
critical section, and renamed back if the second rename fails.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import os
import secrets
import shutil
import signal
import stat
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import BinaryIO

HELD_SIGNALS = tuple(getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP")
                     if hasattr(signal, name))
"""Signals that :func:`critical_section` holds back until the renames are done."""


def current_umask() -> int:
    """The process's file-mode creation mask (read without changing it where Linux allows)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)  # no other way on this system: set and restore at once
    os.umask(mask)
    return mask


def existing_mode(path: str | os.PathLike) -> int | None:
    """Permission bits of ``path`` if it exists (following symlinks), else None."""
    try:
        return stat.S_IMODE(os.stat(path).st_mode)
    except OSError:
        return None


def _temp_name(target: Path, suffix: str) -> Path:
    return target.parent / f".{target.name}.{secrets.token_hex(6)}{suffix}"


def _named(exc: OSError, target: Path) -> OSError:
    """``exc`` re-raised as the same kind of OSError naming ``target`` (not a temporary)."""
    return OSError(exc.errno, f"cannot write {target}: {exc.strerror or exc}; nothing was "
                   "written there (a previous file of that name is unchanged)")


@contextlib.contextmanager
def critical_section() -> Iterator[None]:
    """Hold back SIGINT, SIGTERM and SIGHUP while the block runs; deliver them afterwards.

    Used around the renames that publish a result, so an interruption leaves either the old or
    the new target complete.  Only the main thread can install signal handlers; elsewhere the
    block simply runs.
    """
    pending: list[int] = []

    def hold(signum, frame) -> None:
        pending.append(signum)

    try:
        with signal_handler(hold, HELD_SIGNALS):
            yield
    finally:
        for sig in dict.fromkeys(pending):
            signal.raise_signal(sig)


@contextlib.contextmanager
def signal_handler(handler, signals: tuple = HELD_SIGNALS) -> Iterator[None]:
    """Install ``handler`` for each of ``signals`` while the block runs and restore the
    previous handlers afterwards (shared by :func:`critical_section` and the CLI's
    ``signals_as_interrupts``).  Only the main thread can install signal handlers; elsewhere
    the block simply runs."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {}
    for sig in signals:
        with contextlib.suppress(ValueError, OSError):  # not settable here
            previous[sig] = signal.signal(sig, handler)
    try:
        yield
    finally:
        for sig, old in previous.items():
            signal.signal(sig, old)


class AtomicFile:
    """A binary file that appears at ``path`` only on :meth:`commit`.

    Parameters
    ----------
    path : str or os.PathLike
        The file to create or replace.  Its folder must exist.

    Use as ``with AtomicFile(path) as f: f.write(...)``: leaving the block normally commits,
    an exception (Ctrl-C and the CLI's signal handling included) removes the temporary file.
    :meth:`commit` and :meth:`abort` may also be called explicitly.

    Attributes
    ----------
    target : Path
        The destination.
    temp : Path
        The hidden temporary file in the destination's folder.
    file : BinaryIO
        The open temporary file.
    """

    def __init__(self, path: str | os.PathLike, *, sync: bool = True):
        self.target = Path(os.path.abspath(os.fspath(path)))
        self.sync = sync
        self.done = False
        self.temp = _temp_name(self.target, ".tmp")
        keep = existing_mode(self.target)
        fd = None
        try:
            # signals held while the temporary is created and opened: an interruption between
            # os.open and the cleanup below would leave it behind; delivered on leaving, inside
            # this try, so the except removes it
            with critical_section():
                try:
                    fd = os.open(self.temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)  # umask
                except OSError as exc:
                    raise _named(exc, self.target) from None
                if keep is not None:
                    os.fchmod(fd, keep)
                self.file: BinaryIO = os.fdopen(fd, "wb")
        except BaseException:
            if fd is not None:
                if getattr(self, "file", None) is not None:
                    self.file.close()
                else:
                    os.close(fd)
                self._remove_temp()
            raise

    def write(self, data) -> None:
        """Append bytes (or any buffer)."""
        try:
            self.file.write(data)
        except OSError as exc:
            self.abort()
            raise _named(exc, self.target) from None

    def commit(self) -> Path:
        """Flush, fsync (unless ``sync=False``) and rename the file into place."""
        if self.done:
            raise RuntimeError(f"{self.target}: already committed or aborted")
        try:
            self.file.flush()
            if self.sync:
                os.fsync(self.file.fileno())
            self.file.close()
            with critical_section():
                os.replace(self.temp, self.target)
                self.done = True
        except OSError as exc:
            self.abort()
            raise _named(exc, self.target) from None
        except BaseException:
            self.abort()
            raise
        return self.target

    def abort(self) -> None:
        """Close and remove the temporary file (never raises for a missing file)."""
        if self.done:
            return
        self.done = True
        try:
            self.file.close()
        except OSError:
            pass
        finally:
            self._remove_temp()

    def _remove_temp(self) -> None:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(self.temp)

    def __enter__(self) -> AtomicFile:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None and not self.done:
            self.commit()
        else:
            self.abort()


def write_bytes(path: str | os.PathLike, data: bytes | str) -> Path:
    """Write ``data`` (text is UTF-8 encoded) to ``path`` atomically; see :class:`AtomicFile`."""
    payload = data.encode("utf-8") if isinstance(data, str) else data
    with AtomicFile(path) as out:
        out.write(payload)
    return out.target


# ------------------------------------------------------------------------------- folders


def make_staging_folder(target: str | os.PathLike) -> Path:
    """A fresh hidden sibling folder of ``target`` to build its new content in.

    Its mode is the existing target's, else ``0o777`` less the umask.
    """
    target = Path(os.path.abspath(os.fspath(target)))
    staging = _temp_name(target, ".part")
    os.mkdir(staging, 0o700)
    keep = existing_mode(target)
    os.chmod(staging, keep if keep is not None else 0o777 & ~current_umask())
    return staging


def _link_or_copy(src: str, dst: str) -> None:
    try:
        os.link(src, dst, follow_symlinks=False)
    except OSError:
        shutil.copy2(src, dst, follow_symlinks=False)


def carry_over(old: Path, staging: Path) -> list[str]:
    """Put into ``staging`` every entry of the folder ``old`` that it lacks (files hard-linked,
    else copied; sub-folders copied the same way); returns their names."""
    kept = []
    for entry in sorted(os.listdir(old)):
        src, dst = old / entry, staging / entry
        if os.path.lexists(dst):
            continue
        if src.is_dir() and not src.is_symlink():
            shutil.copytree(src, dst, symlinks=True, copy_function=_link_or_copy)
        else:
            _link_or_copy(str(src), str(dst))
        kept.append(entry)
    return kept


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one step with Linux ``renameat2(RENAME_EXCHANGE)``; False if the
    system or the file system does not offer it."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    renameat2.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                          ctypes.c_uint]
    if renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.EOPNOTSUPP, errno.ENOTSUP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def replace_folder(staging: str | os.PathLike, target: str | os.PathLike) -> None:
    """Publish the complete folder ``staging`` as ``target`` and remove the old one.

    A missing target is created by one rename; an existing one is exchanged with ``staging`` in
    one step (``renameat2``), or else renamed aside and back on failure.  Both ways run inside
    :func:`critical_section`, so at every moment ``target`` is the old folder or the new one,
    complete.  The old content is removed afterwards.
    """
    staging = Path(os.path.abspath(os.fspath(staging)))
    target = Path(os.path.abspath(os.fspath(target)))
    old: Path | None = None
    with critical_section():
        if not os.path.lexists(target):
            try:
                os.rename(staging, target)
                return
            except OSError as exc:
                if exc.errno not in (errno.EEXIST, errno.ENOTEMPTY):
                    raise
        if _exchange(staging, target):
            old = staging
        else:
            old = _temp_name(target, ".old")
            os.rename(target, old)
            try:
                os.rename(staging, target)
            except BaseException:
                os.rename(old, target)
                raise
        shutil.rmtree(old, ignore_errors=True)
