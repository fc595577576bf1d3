"""The cost model's measured constants, kept as data.

Defaults ship in ``polyconv/data/costs.json``.  ``polyconv calibrate`` re-measures the current
machine and writes a per-user file (never into the installed package); when that file exists the
library prefers it.  Its location is, in order of preference:

1. the environment variable ``POLYCONV_COSTS`` (a path to a JSON file);
2. ``$XDG_CONFIG_HOME/polyconv/costs.json``;
3. ``~/.config/polyconv/costs.json``.

The file holds plain numbers; see :func:`polyconv.tuning.calibrate.measure` for how each is
measured.
"""

from __future__ import annotations

import json
import os
import warnings
from importlib import resources
from pathlib import Path

from .. import _atomic

_cache: dict | None = None
_cache_source: str | None = None
#: bumped whenever the table in force is (re)loaded, so plan caches keyed on it go stale
generation = 0

REQUIRED_KEYS = ("direct", "direct_batch", "fft", "overlap_add", "threads", "exact")


def user_cost_path() -> Path:
    """Where ``polyconv calibrate`` writes and the library looks for this machine's costs."""
    explicit = os.environ.get("POLYCONV_COSTS")
    if explicit:
        return Path(explicit).expanduser()
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "polyconv" / "costs.json"


def default_costs() -> dict:
    """The constants shipped with the package."""
    text = resources.files("polyconv").joinpath("data/costs.json").read_text(encoding="utf-8")
    return json.loads(text)


def _valid(table: object) -> bool:
    return isinstance(table, dict) and all(k in table for k in REQUIRED_KEYS)


#: Keys of the shipped table a calibrated file may lack (the planner has a fallback for each).
OPTIONAL_KEYS = frozenset({("exact", "direct_float"), ("exact", "limbs_mod_wide"), ("machine",),
                           ("version",),
                           # the compiled engine's sections: absent where the kernels cannot run
                           # (numba missing, POLYCONV_JIT=0); readers fall back to the defaults
                           ("exact", "jit"), ("exact", "ntt_compiled"),
                           ("exact", "ntt_batch"), ("exact", "ntt_wide"),
                           # the fused circular product's constants: absent where the FFT
                           # library has none (scipy's pocketfft) and in older files
                           ("fft", "fused_overhead"), ("fft", "fused_rate_by_log2n"),
                           # the negacyclic real product's rates (ducc0 only, N = 2^13..2^21)
                           ("fft", "negacyclic_rate_by_log2n"),
                           ("overlap_add", "fused_overhead"), ("overlap_add", "fused_per_point"),
                           ("overlap_add", "fused_per_sample_large")})
#: Tables keyed by size (log2 of a length or bit count): any keys, at least one numeric entry.
_SIZE_TABLES = frozenset({"rate_by_log2n", "fused_rate_by_log2n", "negacyclic_rate_by_log2n",
                          "mul_rate_by_log2bits"})


def table_problem(table: object, reference: dict | None = None, where: tuple = ()) -> str | None:
    """What is wrong with a cost table, compared key by key with the shipped one (None: fine).

    Every key of the shipped table must be present (save :data:`OPTIONAL_KEYS`) with the same
    shape: a section is a JSON object, a constant a finite non-negative number (not a boolean).
    """
    reference = default_costs() if reference is None else reference
    name = ".".join(where) or "the file"
    if not isinstance(table, dict):
        return f"{name} must be a JSON object, got {type(table).__name__}"
    for key, want in reference.items():
        path = where + (key,)
        label = ".".join(path)
        if key not in table:
            if path in OPTIONAL_KEYS:
                continue
            return f"the key {label!r} is missing"
        got = table[key]
        if key in _SIZE_TABLES:
            if not isinstance(got, dict) or not got or not all(
                    _is_constant(v) and _is_int_text(k) for k, v in got.items()):
                return (f"{label!r} must map sizes (integer strings) to non-negative numbers, "
                        f"got {got!r:.60}")
        elif isinstance(want, dict):
            if path in OPTIONAL_KEYS and isinstance(got, dict):
                # an optional section is checked only for the constants it holds
                want = {k: v for k, v in want.items() if k in got}
            problem = table_problem(got, want, path)
            if problem:
                return problem
        elif isinstance(want, (int, float)) and not isinstance(want, bool):
            if not _is_constant(got):
                return f"{label!r} must be a non-negative number, got {got!r:.60}"
    return None


def _is_constant(v) -> bool:
    return (isinstance(v, (int, float)) and not isinstance(v, bool)
            and v == v and 0 <= v < float("inf"))


def _is_int_text(k: str) -> bool:
    return k.lstrip("-").isdigit() and k.isascii()


def load_costs(refresh: bool = False) -> dict:
    """The cost table in force: the user's calibrated file if present and readable, else defaults.

    The result is cached; ``refresh=True`` re-reads the files.  A user file that is not JSON is
    skipped with a RuntimeWarning naming it (the shipped defaults are used); one that is JSON
    but lacks a key or holds a wrong type raises.

    Raises
    ------
    ValueError
        Naming the user file and the key at fault.
    """
    global _cache, _cache_source, generation
    if _cache is not None and not refresh:
        return _cache
    table, source = None, "defaults shipped with polyconv"
    path = user_cost_path()
    if path.is_file():
        try:
            candidate = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, RecursionError) as exc:
            warnings.warn(f"cost file {str(path)!r} could not be read as JSON ({exc}); using the "
                          "defaults shipped with polyconv", RuntimeWarning, stacklevel=2)
            candidate = None
        if candidate is not None:
            problem = table_problem(candidate)
            if problem:
                raise ValueError(f"cost file {str(path)!r} is not a valid cost table: {problem}; "
                                 "re-run `polyconv calibrate`, or remove the file (or unset "
                                 "POLYCONV_COSTS) to use the shipped defaults")
            table, source = candidate, str(path)
    if table is None:
        table = default_costs()
    _cache, _cache_source = table, source
    generation += 1
    return table


def cost_source() -> str:
    """Where the cost table in force came from (a path, or the shipped defaults)."""
    load_costs()
    return _cache_source or ""


def save_user_costs(table: dict, path: Path | None = None) -> Path:
    """Write ``table`` atomically (:func:`polyconv._atomic.write_bytes`: temporary file, then
    rename; umask honoured, an existing file's mode kept) and make it the table in force."""
    if not _valid(table):
        raise ValueError(f"a cost table needs the keys {REQUIRED_KEYS}")
    problem = table_problem(table)
    if problem:
        raise ValueError(f"cost table not saved: {problem}")
    path = Path(path) if path is not None else user_cost_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    _atomic.write_bytes(path, json.dumps(table, indent=2, sort_keys=True) + "\n")
    load_costs(refresh=True)
    return path
