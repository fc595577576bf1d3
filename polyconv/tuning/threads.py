"""Threads polyconv may use (``POLYCONV_THREADS``, else the usable CPU count), read once."""

from __future__ import annotations

import os


def configured_threads() -> int:
    """Threads polyconv may use: ``POLYCONV_THREADS`` if set, else the usable CPU count."""
    env = os.environ.get("POLYCONV_THREADS")
    if env:
        try:
            return max(1, int(env))
        except ValueError:
            pass
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


#: Threads the planners allow (read once, at import).
THREADS = configured_threads()
