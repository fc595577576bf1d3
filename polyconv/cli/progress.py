"""Progress bars on stderr through tqdm, shown only to a person watching.

Bars are off when stderr is not a terminal (pipes, files, CI logs), with ``--quiet``, or when
tqdm is not installed (then work simply runs without a bar).
"""

from __future__ import annotations

import sys
from collections.abc import Iterable, Iterator
from typing import TypeVar

T = TypeVar("T")


def bars_enabled(quiet: bool) -> bool:
    """True when a bar should be drawn: not quiet and stderr is a terminal."""
    if quiet:
        return False
    try:
        return bool(sys.stderr.isatty())
    except (AttributeError, ValueError):
        return False


class Steps:
    """A bar over named steps of one command (``with Steps(4, "aggregate", quiet) as s:``).

    Parameters
    ----------
    total : int
        Number of steps.
    desc : str
        Label before the bar.
    quiet : bool
        Suppress the bar.
    """

    def __init__(self, total: int, desc: str, quiet: bool):
        self._bar = None
        self._begun = False
        if bars_enabled(quiet):
            try:
                from tqdm import tqdm
            except ImportError:  # optional at run time: no bar
                tqdm = None
            if tqdm is not None:
                self._bar = tqdm(total=total, desc=desc, file=sys.stderr, leave=False,
                                 unit="step", dynamic_ncols=True)

    def __enter__(self) -> Steps:
        return self

    def step(self, label: str) -> None:
        """Start the step ``label`` (shown beside the bar); completes the previous one."""
        if self._bar is not None:
            if self._begun:
                self._bar.update(1)
            self._begun = True
            self._bar.set_postfix_str(label, refresh=True)

    def __exit__(self, exc_type, exc, tb) -> None:
        if self._bar is not None:
            if exc_type is None:
                self._bar.update(self._bar.total - self._bar.n)
            self._bar.close()


def track(items: Iterable[T], desc: str, quiet: bool, total: int | None = None) -> Iterator[T]:
    """Iterate with a tqdm bar on stderr when :func:`bars_enabled`, plainly otherwise."""
    if bars_enabled(quiet):
        try:
            from tqdm import tqdm
        except ImportError:
            tqdm = None
        if tqdm is not None:
            yield from tqdm(items, desc=desc, total=total, file=sys.stderr, leave=False,
                            dynamic_ncols=True)
            return
    yield from items


class Counter:
    """A bar over a count of items, fed by a ``callback(done, total)`` (streaming progress).

    ``with Counter("multiply", quiet) as report: convolve_file(..., progress=report)``.
    """

    def __init__(self, desc: str, quiet: bool, unit: str = "sample"):
        self._bar = None
        self._enabled = bars_enabled(quiet)
        self._desc, self._unit = desc, unit

    def __enter__(self) -> Counter:
        return self

    def __call__(self, done: int, total: int) -> None:
        if not self._enabled:
            return
        if self._bar is None:
            try:
                from tqdm import tqdm
            except ImportError:
                self._enabled = False
                return
            self._bar = tqdm(total=total, desc=self._desc, file=sys.stderr, leave=False,
                             unit=self._unit, unit_scale=True, dynamic_ncols=True)
        self._bar.update(done - self._bar.n)

    def __exit__(self, exc_type, exc, tb) -> None:
        if self._bar is not None:
            self._bar.close()
