"""The cost model's measured constants, kept as data.

Defaults ship in ``polyconv/data/costs.json``.  ``polyconv calibrate`` re-measures the current
machine and writes a per-user file (never into the installed package); when that file exists the
library prefers it.  Its location is, in order of preference:

1. the environment variable ``POLYCONV_COSTS`` (a path to a JSON file);
2. ``$XDG_CONFIG_HOME/polyconv/costs.json``;
3. ``~/.config/polyconv/costs.json``.

The file holds plain numbers; see :func:`polyconv.calibrate.measure` for how each is measured.
"""

from __future__ import annotations

import json
import math
import os
import warnings
from importlib import resources
from pathlib import Path

from . import _atomic

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


def table_problem(table: object, reference: dict | None = None, where: str = "") -> str | None:
    """What is wrong with a cost table (None if nothing): the key missing or of the wrong type.

    Every key of the shipped table must be present, holding a table where the shipped one has
    a table and a finite number >= 0 where it has a number; a table keyed by sizes (``"10"``,
    ``"11"``, ...: measured rates) may hold other sizes, but at least one.
    """
    if reference is None:
        if not isinstance(table, dict) or not all(k in table for k in REQUIRED_KEYS):
            return f"a cost table needs the keys {REQUIRED_KEYS}"
        reference = default_costs()
    if isinstance(reference, dict):
        if not isinstance(table, dict):
            return f"key {where!r} must be a table, got {type(table).__name__}"
        if reference and all(k.isdigit() for k in reference):  # measured sizes
            if not table or not all(isinstance(k, str) and k.isdigit() for k in table):
                return f"key {where!r} must map sizes (whole numbers) to numbers"
            pairs = [(k, table[k]) for k in table]
            refs = dict.fromkeys(table, next(iter(reference.values())))
        else:
            missing = [k for k in reference if k not in table]
            if missing:
                return f"key {'.'.join(filter(None, (where, missing[0])))!r} is missing"
            pairs, refs = [(k, table[k]) for k in reference], reference
        for key, value in pairs:
            problem = table_problem(value, refs[key], ".".join(filter(None, (where, key))))
            if problem:
                return problem
        return None
    if isinstance(reference, bool) or not isinstance(reference, (int, float)):
        return None  # a non-numeric setting: taken as it is
    if isinstance(table, bool) or not isinstance(table, (int, float)) \
            or not math.isfinite(table) or table < 0:
        return f"key {where!r} must be a finite number >= 0, got {json.dumps(table)[:40]}"
    return None


def load_costs(refresh: bool = False) -> dict:
    """The cost table in force: the user's calibrated file if present and readable, else defaults.

    The result is cached; ``refresh=True`` re-reads the files.
    """
    global _cache, _cache_source, generation
    if _cache is not None and not refresh:
        return _cache
    table, source = None, "defaults shipped with polyconv"
    path = user_cost_path()
    if path.is_file():
        try:
            candidate = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, RecursionError):
            candidate = None
        problem = table_problem(candidate) if candidate is not None else "not valid JSON"
        if problem is None:
            table, source = candidate, str(path)
        else:
            warnings.warn(f"cost file {path} ignored ({problem}); using the costs shipped with "
                          "polyconv (re-run `polyconv calibrate` to rewrite it)", stacklevel=2)
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
    problem = table_problem(table)
    if problem is not None:
        raise ValueError(f"cost table not saved: {problem}")
    path = Path(path) if path is not None else user_cost_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    _atomic.write_bytes(path, json.dumps(table, indent=2, sort_keys=True) + "\n")
    load_costs(refresh=True)
    return path
