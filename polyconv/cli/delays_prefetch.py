"""Reading the samples files of a ``delays`` spec ahead of their use, on one worker thread.

The compiled parser (:mod:`polyconv.cli._parse_kernel`) releases the GIL, so while the worker
parses the next files the main thread bins the previous ones and imports the figure modules
(about 0.4 s of CPU that would otherwise follow the reading): the wall time of a 20-file run
drops by up to the shorter of the two on a machine with a spare core; the CPU time is the same.

The worker only calls :func:`polyconv.cli.sample_files.read_samples` with ``fast_only=True``
after the kernel is loaded in the main thread: no import and no warning happens on the worker.
A file the kernel does not read (small, ``.npy``, unusual numbers, any error) yields None and
the main thread reads it as before, with the same errors and warnings.  Parsed arrays held
ahead are capped at :data:`AHEAD_BYTES`; the worker runs in a copy of the caller's context
(the memory budget is a context variable).
"""

from __future__ import annotations

import contextvars
import os
import threading
from pathlib import Path

import numpy as np

from . import sample_files

AHEAD_BYTES = 128 << 20
"""Most bytes of parsed samples held before the main thread takes them."""

Key = tuple[Path, "str | int | None"]


JOIN_SECONDS = 30.0
"""Longest wait for the worker in :meth:`Prefetch.close` (one file's parse)."""


class Prefetch:
    """Files ``sources`` (``(path, column)`` in the order they will be asked for) parsed ahead
    on a daemon thread; :meth:`take` returns an array or None (read it yourself)."""

    def __init__(self, sources: list[Key], ahead_bytes: int = AHEAD_BYTES) -> None:
        self._order = list(dict.fromkeys(sources))
        self._pending = set(self._order)
        self._done: dict[Key, np.ndarray | None] = {}
        self._held = 0
        self._ahead = ahead_bytes
        self._stop = False
        self._cond = threading.Condition()
        self._thread = None
        if self._order:
            ctx = contextvars.copy_context()
            self._thread = threading.Thread(target=ctx.run, args=(self._run,), daemon=True,
                                            name="polyconv-samples")
            self._thread.start()

    def _run(self) -> None:
        for key in self._order:
            with self._cond:
                while self._held > self._ahead and not self._stop:
                    self._cond.wait()
                if self._stop:
                    return
            try:
                x = sample_files.read_samples(key[0], column=key[1], fast_only=True)
            except BaseException:  # noqa: BLE001 - the main thread reads it and reports
                x = None
            with self._cond:
                self._done[key] = x
                self._held += 0 if x is None else x.nbytes
                self._cond.notify_all()

    def take(self, path: Path, column) -> np.ndarray | None:
        """The parsed samples of ``(path, column)``, or None: not prefetched (or taken
        already), or the kernel did not read it."""
        key = (path, column)
        with self._cond:
            if key not in self._pending:
                return None
            self._pending.discard(key)
            while key not in self._done and self._thread is not None and \
                    self._thread.is_alive() and self._held <= self._ahead:
                self._cond.wait(0.5)  # (worker full of files asked out of order: read it here)
            x = self._done.pop(key, None)
            self._held -= 0 if x is None else x.nbytes
            self._cond.notify_all()
        return x

    def close(self) -> None:
        """Stop reading ahead (what is held is dropped) and wait for the worker to end: it
        finishes at most the file it is parsing, so no thread is left in compiled code while
        the interpreter shuts down (a signal at the end of a run then gave exit -6)."""
        with self._cond:
            self._stop = True
            self._done.clear()
            self._held = 0
            self._cond.notify_all()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(JOIN_SECONDS)


def sources(spec, sections) -> list[Key]:
    """``(path, column)`` of each ``samples_file`` section, resolved as
    :func:`polyconv.cli.delays_eval._file_samples` does (a malformed one is left out: the
    main thread reports it when it gets there)."""
    out = []
    for sec in sections:
        try:
            if not sec.has("samples_file"):
                continue
            path = Path(sec.string("samples_file"))
            column = sec.raw("column", None)
        except Exception:  # noqa: BLE001 - reported by the main thread in spec order
            continue
        if isinstance(column, bool) or not isinstance(column, (str, int, type(None))):
            continue
        out.append((path if path.is_absolute() else spec.doc.base_dir / path, column))
    return out


def start(sources: list[Key]) -> Prefetch:
    """A :class:`Prefetch` of the files the kernel will read (each at least
    ``sample_files.KERNEL_BYTES``), the kernel loaded first in this thread; an empty one when
    there are none, the compiled parser is off (``POLYCONV_JIT=0``) or cannot load."""
    big = []
    for path, column in sources:
        try:
            if path.suffix.lower() != ".npy" and \
                    path.stat().st_size >= sample_files.KERNEL_BYTES:
                big.append((path, column))
        except OSError:
            continue
    if not big or os.environ.get("POLYCONV_JIT", "").strip().lower() in ("0", "off", "no",
                                                                          "false"):
        return Prefetch([])
    try:
        sample_files._kernel()
    except Exception:  # noqa: BLE001 - numba missing or failing: the files are read as before
        return Prefetch([])
    return Prefetch(big)
