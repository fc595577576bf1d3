"""The state of the compiled (numba) kernels in this process, and loading them.

The kernels live in ``polyconv/engines/_kernels_*.py`` and are compiled by numba with
``cache=True``; importing them costs seconds the first time (measured on the development machine:
9-14 s of CPU with an empty cache) and well under a second from a warm cache (0.6-0.9 s in a new
process, most of it importing numba).  The planner must know which of these it would pay, so this
module answers, without importing numba:

* ``"compiled"``: the kernels are loaded in this process (nothing to pay);
* ``"cached"``: a warm cache for exactly these kernel sources, this numba and this Python exists
  (a marker file written after the last successful load says so): pay :func:`load_seconds`;
* ``"compile"``: pay the compiler;
* ``"unavailable"``: numba is absent, failed to import or compile here, or ``POLYCONV_JIT=0``;
  the numpy engines run and :func:`reason` says why.

Cache directory: numba writes beside the source (``__pycache__``) when it can, or into
``NUMBA_CACHE_DIR`` when the user set one.  When neither is writable (a read-only install) this
module points numba at a user cache directory (``$POLYCONV_CACHE_DIR``, else
``$XDG_CACHE_HOME/polyconv/numba``, else ``~/.cache/polyconv/numba``) before numba is imported;
when that is not writable either, the kernels are compiled without a cache (every process pays the
compiler).  No import of polyconv ever fails because of numba.
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import json
import os
import sys
import tempfile
import time
from functools import lru_cache
from pathlib import Path

#: Kernel modules, in load order (``polyconv.engines.<name>``).
KERNEL_MODULES = ("_kernels_arith", "_kernels_simd", "_kernels_crt", "_kernels_ntt",
                  "_kernels_batch", "_kernels_stream", "_kernels_small",
                  "_kernels_recur", "_kernels_wide", "_kernels_objects",
                  "_kernels_negacyclic")

_ENGINES_DIR = Path(__file__).resolve().parent
_MARKER = "polyconv-kernels.json"

_loaded: dict = {}          # name -> module once loaded in this process
_failure: list[str] = []    # why the kernels cannot be used here (empty: no known reason)
_timing: dict[str, float] = {}
_cache: dict = {}           # "enabled": bool, "dir": str or None, "why": str


class JitUnavailableError(RuntimeError):
    """The compiled kernels cannot be used in this process (see :func:`reason`)."""


def _writable(directory: Path) -> bool:
    try:
        directory.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=directory).close()
        return True
    except OSError:
        return False


def _user_cache_dir() -> Path:
    if os.environ.get("POLYCONV_CACHE_DIR"):
        return Path(os.environ["POLYCONV_CACHE_DIR"])
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "polyconv" / "numba"


def _subpath(source_dir: Path) -> str:
    """numba's sub-directory for sources in ``source_dir`` under a user-given cache directory
    (``_CacheLocator.get_suitable_cache_subpath``: parent name and SHA-1 of the path)."""
    text = str(source_dir)
    return f"{source_dir.name}_{hashlib.sha1(text.encode()).hexdigest()}"


def _decide_cache() -> dict:
    """Where numba will write the kernels' cache (deciding it once per process)."""
    if _cache:
        return _cache
    user_given = os.environ.get("NUMBA_CACHE_DIR")
    if user_given and _writable(Path(user_given) / _subpath(_ENGINES_DIR)):
        _cache.update(enabled=True, dir=str(Path(user_given) / _subpath(_ENGINES_DIR)),
                      why=f"NUMBA_CACHE_DIR={user_given}")
    elif not user_given and _writable(_ENGINES_DIR / "__pycache__"):
        _cache.update(enabled=True, dir=str(_ENGINES_DIR / "__pycache__"),
                      why="beside the kernel sources")
    else:
        fallback = _user_cache_dir()
        if _writable(fallback / _subpath(_ENGINES_DIR)):
            _point_numba_at(str(fallback))
            _cache.update(enabled=True, dir=str(fallback / _subpath(_ENGINES_DIR)),
                          why=f"user cache directory {fallback} (source tree not writable)")
        else:
            _cache.update(enabled=False, dir=None,
                          why="no writable cache directory: compiled in every process")
    return _cache


def _point_numba_at(directory: str) -> None:
    """Make numba cache into ``directory`` (before its import if possible)."""
    os.environ["NUMBA_CACHE_DIR"] = directory
    if "numba" in sys.modules:  # already imported by someone: its config was read then
        from numba.core import config

        config.CACHE_DIR = directory


def cache_enabled() -> bool:
    """Whether the kernel modules should be compiled with ``cache=True`` (read at their import)."""
    return bool(_decide_cache()["enabled"])


def cache_description() -> str:
    """Where the kernels are cached, in words."""
    return str(_decide_cache()["why"])


@lru_cache(maxsize=1)
def _fingerprint() -> str:
    """Kernel sources, numba and Python versions and the machine: what a warm cache is for."""
    digest = hashlib.sha256()
    for name in KERNEL_MODULES:
        digest.update((_ENGINES_DIR / f"{name}.py").read_bytes())
    digest.update(_numba_version().encode())
    digest.update(sys.version.encode())
    digest.update(os.uname().machine.encode() if hasattr(os, "uname") else b"")
    return digest.hexdigest()


@lru_cache(maxsize=1)
def _numba_version() -> str:
    from importlib import metadata

    try:
        return metadata.version("numba")
    except metadata.PackageNotFoundError:
        return ""


def _marker_path() -> Path | None:
    directory = _decide_cache()["dir"]
    return Path(directory) / _MARKER if directory else None


def _marker_ok() -> bool:
    path = _marker_path()
    if path is None:
        return False
    try:
        return json.loads(path.read_text()).get("fingerprint") == _fingerprint()
    except (OSError, ValueError):
        return False


def _write_marker(seconds: float) -> None:
    path = _marker_path()
    if path is None:
        return
    try:
        tmp = path.with_suffix(f".{os.getpid()}.tmp")
        tmp.write_text(json.dumps({"fingerprint": _fingerprint(), "load_seconds": seconds}))
        os.replace(tmp, path)
    except OSError:
        pass  # a marker is an optimisation of the cost model only


def _disabled_reason() -> str | None:
    if os.environ.get("POLYCONV_JIT", "").strip().lower() in ("0", "off", "no", "false"):
        return "compiled kernels disabled by POLYCONV_JIT=0"
    if _failure:
        return _failure[0]
    return _numba_missing()


@lru_cache(maxsize=1)
def _numba_missing() -> str | None:
    if "numba" in sys.modules and sys.modules["numba"] is None:
        return "numba cannot be imported (blocked)"
    if importlib.util.find_spec("numba") is None:
        return "numba is not installed"
    return None


@lru_cache(maxsize=1)
def _unloaded_state() -> str:
    """``"cached"`` or ``"compile"`` (files are looked at once per process: the planner asks
    on every call)."""
    return "cached" if _marker_ok() else "compile"


def state() -> str:
    """``"compiled"``, ``"cached"``, ``"compile"`` or ``"unavailable"`` (see the module notes)."""
    if len(_loaded) == len(KERNEL_MODULES):
        return "compiled"
    if _disabled_reason() is not None:
        return "unavailable"
    return _unloaded_state()


def reason() -> str:
    """Why :func:`state` is what it is, in one phrase for ``plan()``."""
    s = state()
    if s == "unavailable":
        return _disabled_reason() or "unavailable"
    if s == "compiled":
        how = _timing.get("how", "loaded")
        return f"compiled kernels ready in this process ({how} in {_timing.get('load', 0):.2f} s)"
    if s == "cached":
        return f"compiled kernels loadable from a warm cache ({cache_description()})"
    return f"compiled kernels must be compiled first ({cache_description()})"


def kernels(name: str = "_kernels_ntt"):
    """The kernel module ``polyconv.engines.<name>``, loading (or compiling) all kernels first.

    Raises
    ------
    JitUnavailableError
        If numba is absent, disabled or fails here; the failure is remembered, so the planner
        stops offering the compiled engines in this process.
    """
    if name in _loaded:
        return _loaded[name]
    why = _disabled_reason()
    if why is not None:
        raise JitUnavailableError(why)
    before = state()
    start = time.perf_counter()
    if before == "compile":
        _purge_stale_cache()
    try:
        for module in KERNEL_MODULES:
            _loaded[module] = _import_kernels(module)
    except Exception as exc:  # noqa: BLE001 - numba raises many kinds; all mean "not here"
        _loaded.clear()
        _failure.append(f"numba kernels failed here ({type(exc).__name__}: {exc})"[:300])
        raise JitUnavailableError(_failure[0]) from exc
    seconds = time.perf_counter() - start
    _timing.update(load=seconds, how="loaded from cache" if before == "cached" else "compiled")
    if _decide_cache()["enabled"]:
        _write_marker(seconds)
    return _loaded[name]


def _purge_stale_cache() -> None:
    """Delete numba's cache files of every kernel module when the sources changed.

    numba checks only the stamp of a function's own source file, so a kernel that calls or
    inlines code of another kernel module (``_kernels_batch`` calls ``_kernels_ntt``, which
    inlines ``_kernels_simd`` and ``_kernels_arith``) would otherwise load its old machine code
    after a change there.  Called when the marker's fingerprint (all kernel sources) differs.
    """
    directory = _decide_cache()["dir"]
    if not directory:
        return
    for name in KERNEL_MODULES:
        for path in Path(directory).glob(f"{name}.*.nb[ic]"):
            try:
                path.unlink()
            except OSError:
                pass  # another process may be replacing it: numba then re-checks the stamp


def _import_kernels(module: str):
    full = f"polyconv.engines.{module}"
    _decide_cache()
    try:
        return importlib.import_module(full)
    except RuntimeError as exc:
        if "no locator" not in str(exc):
            raise
        # numba found no cache location after all: compile without a cache
        sys.modules.pop(full, None)
        _cache.update(enabled=False, dir=None, why=f"numba found no cache location ({exc})")
        return importlib.import_module(full)


def load_seconds(table: dict | None = None) -> float:
    """Predicted seconds to make the kernels ready here: 0, a warm-cache load, or a compile."""
    s = state()
    if s == "compiled":
        return 0.0
    if s == "unavailable":
        return float("inf")
    c = (table or {}).get("exact", {}).get("jit", {})
    if s == "cached":
        return float(c.get("load_seconds", 0.9))
    return float(c.get("compile_seconds", 14.0))


def ensure_compiled() -> tuple[str, float]:
    """Compile (or load) every kernel now; returns ``(how, seconds)`` (ahead-of-time use)."""
    kernels()
    return _timing.get("how", "loaded"), _timing.get("load", 0.0)
