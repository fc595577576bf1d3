"""The thread count of numpy's BLAS around one call, by OpenBLAS's own setter.

Small and medium float64 matrix products on a shared machine are fastest and, above all,
predictable on one BLAS thread: measured here with another job on the second core, a
``(135 x 69) @ (69 x 2047)`` product took 12 ms with OpenBLAS's default two threads against 0.6
ms with one (and 0.3 ms with two on a quiet machine), the waiting thread being the cost.  numpy
has no per-call thread setting, so :func:`blas_threads` calls OpenBLAS's
``openblas_set_num_threads`` (under the symbol names numpy's and scipy's wheels export) through
``ctypes`` on the library already loaded in this process, and restores the previous count
afterwards.  Where no such library is found (another BLAS, another platform) it does nothing.
The count is process-wide while set, so a concurrent BLAS call elsewhere runs with it too.
"""

from __future__ import annotations

import ctypes
import threading
from functools import lru_cache

_SYMBOLS = (("scipy_openblas_set_num_threads64_", "scipy_openblas_get_num_threads64_"),
            ("openblas_set_num_threads64_", "openblas_get_num_threads64_"),
            ("openblas_set_num_threads", "openblas_get_num_threads"))
_lock = threading.RLock()


@lru_cache(maxsize=1)
def _setter() -> tuple | None:
    """``(set, get)`` of the OpenBLAS loaded by numpy, or None."""
    import numpy  # noqa: F401 - loads the BLAS whose symbols are looked for

    try:
        with open("/proc/self/maps", encoding="utf-8") as maps:
            paths = sorted({line.split()[-1] for line in maps
                            if "openblas" in line.lower() and line.split()[-1].startswith("/")})
    except OSError:
        return None
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for set_name, get_name in _SYMBOLS:
            if hasattr(lib, set_name) and hasattr(lib, get_name):
                setter, getter = getattr(lib, set_name), getattr(lib, get_name)
                setter.argtypes, setter.restype = [ctypes.c_int], None
                getter.argtypes, getter.restype = [], ctypes.c_int
                return setter, getter
    return None


class blas_threads:  # noqa: N801 - used as a context manager, like a function
    """Run the block with ``count`` OpenBLAS threads (restored afterwards; no-op without
    OpenBLAS).  A class rather than a generator context manager: entering and leaving cost
    ~1 us instead of ~3 us, which short products notice."""

    __slots__ = ("count", "_before", "_held")

    def __init__(self, count: int = 1):
        self.count = count
        self._before = None
        self._held = False

    def __enter__(self) -> None:
        found = _setter()
        if found is None:
            return
        setter, getter = found
        _lock.acquire()
        self._held = True
        try:
            before = getter()
            if before != self.count:
                setter(self.count)
                self._before = before
        except BaseException:
            self._held = False
            _lock.release()
            raise

    def __exit__(self, *exc) -> None:
        if not self._held:
            return
        try:
            if self._before is not None:
                _setter()[0](self._before)
                self._before = None
        finally:
            self._held = False
            _lock.release()
