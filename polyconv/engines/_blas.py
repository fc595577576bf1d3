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

import contextlib
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


@contextlib.contextmanager
def blas_threads(count: int = 1):
    """Run the block with ``count`` OpenBLAS threads (restored afterwards; no-op without
    OpenBLAS)."""
    found = _setter()
    if found is None:
        yield
        return
    setter, getter = found
    with _lock:
        before = getter()
        if before != count:
            setter(count)
        try:
            yield
        finally:
            if before != count:
                setter(before)
