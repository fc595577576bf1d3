"""Reading TOML specs with errors that name the key and its line.

:func:`load_spec` parses a file with :mod:`tomllib` (a syntax error is reported with tomllib's own
line and column); :class:`Section` then hands out typed values, raising :class:`SpecError` with
the dotted key, the line where that key is written (found by :func:`key_lines`, a light scan of the
file's table headers and ``key =`` lines) and what was expected.  Unknown keys are refused too, so
a typo such as ``deductable`` is caught instead of silently ignored.
"""

from __future__ import annotations

import math
import re
import sys
from pathlib import Path
from typing import Any

from .errors import SpecError

try:
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10: the same parser, as tomli
    import tomli as tomllib

_MISSING = object()

_HEADER = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^\s*((?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*')"
                  r"(?:\s*\.\s*(?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*'))*)\s*=")


def _split_dotted(text: str) -> list[str]:
    parts = re.findall(r"\"[^\"]*\"|'[^']*'|[^.\s]+", text)
    return [p[1:-1] if p[:1] in "\"'" else p for p in parts]


def key_lines(text: str) -> dict[tuple[str, ...], int]:
    """Map each dotted key path written in a TOML text to its 1-based line (best effort).

    Table headers ``[a.b]`` and ``key = value`` lines are recognised; keys inside inline tables
    and multi-line values are not (their enclosing key's line is used instead).
    """
    out: dict[tuple[str, ...], int] = {}
    table: tuple[str, ...] = ()
    in_multiline = False
    for number, line in enumerate(text.splitlines(), start=1):
        if in_multiline:
            if line.count('"""') % 2 == 1 or line.count("'''") % 2 == 1:
                in_multiline = False
            continue
        header = _HEADER.match(line)
        if header:
            table = tuple(_split_dotted(header.group(1)))
            out.setdefault(table, number)
            continue
        key = _KEY.match(line)
        if key:
            path = table + tuple(_split_dotted(key.group(1)))
            out.setdefault(path, number)
            if line.count('"""') % 2 == 1 or line.count("'''") % 2 == 1:
                in_multiline = True
    return out


class SpecDoc:
    """A parsed spec: the data, the file name for messages and the key-to-line map."""

    def __init__(self, data: dict, source: str, text: str):
        self.data = data
        self.source = source
        self.lines = key_lines(text)
        self.base_dir = Path(source).resolve().parent if source != "<string>" else Path.cwd()

    def line_of(self, path: tuple[str, ...]) -> int | None:
        """Line of the longest written prefix of ``path`` (list indices skipped)."""
        names = tuple(p for p in path if isinstance(p, str))
        while names:
            if names in self.lines:
                return self.lines[names]
            names = names[:-1]
        return None

    def error(self, path: tuple, message: str) -> SpecError:
        """A :class:`SpecError` for the key at ``path``."""
        return SpecError(self.source, _dotted(path), message, self.line_of(path))

    def root(self) -> Section:
        """The whole document as a :class:`Section`."""
        return Section(self.data, (), self)


def _dotted(path: tuple) -> str:
    out = ""
    for p in path:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + p
    return out


def load_spec(path: str | Path) -> SpecDoc:
    """Read and parse a TOML spec file.

    Raises
    ------
    SpecError
        When the file is missing, unreadable, not UTF-8 or not valid TOML (tomllib's message
        carries the line and column).
    """
    p = Path(path)
    source = str(path)
    if not p.exists():
        raise SpecError(source, "", "no such file")
    if p.is_dir():
        raise SpecError(source, "", "is a folder, expected a .toml file")
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise SpecError(source, "", "not a UTF-8 text file (expected TOML)") from None
    except OSError as exc:
        raise SpecError(source, "", f"cannot read: {exc.strerror or exc}") from None
    return parse_spec(text, source)


def parse_spec(text: str, source: str = "<string>") -> SpecDoc:
    """Parse TOML text into a :class:`SpecDoc` (see :func:`load_spec`)."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(source, "", f"not valid TOML: {exc}") from None
    except RecursionError:
        raise SpecError(source, "", "nested too deeply to be read (tables or arrays inside "
                        f"one another beyond Python's recursion limit of "
                        f"{sys.getrecursionlimit()}); flatten it") from None
    doc = SpecDoc(data, source, text)
    doc.base_dir = Path(source).resolve().parent if source != "<string>" else Path.cwd()
    return doc


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


class Section:
    """A table of a spec with typed, validated accessors.

    Every accessor raises :class:`SpecError` naming the full dotted key when the value is
    missing (and required), of the wrong type or out of range.
    """

    def __init__(self, data: dict, path: tuple, doc: SpecDoc):
        self.data = data
        self.path = path
        self.doc = doc

    # -- basics ------------------------------------------------------------------------------
    def error(self, key: str | None, message: str) -> SpecError:
        """A :class:`SpecError` for ``key`` of this table (the table itself when None)."""
        return self.doc.error(self.path + ((key,) if key is not None else ()), message)

    def has(self, key: str) -> bool:
        """Whether ``key`` is present."""
        return key in self.data

    def keys(self) -> list[str]:
        """The keys present, in file order."""
        return list(self.data)

    def check_keys(self, allowed: set[str] | list[str] | tuple[str, ...]) -> None:
        """Refuse keys not in ``allowed`` (catches typos)."""
        for key in self.data:
            if key not in allowed:
                options = ", ".join(sorted(allowed))
                raise self.error(key, f"unknown key; expected one of: {options}")

    def _get(self, key: str, default: Any) -> Any:
        if key in self.data:
            return self.data[key]
        if default is _MISSING:
            raise self.error(key, "is required but missing")
        return default

    # -- typed getters -----------------------------------------------------------------------
    def string(self, key: str, default: Any = _MISSING, choices: tuple[str, ...] | None = None
               ) -> str:
        """A string value, optionally one of ``choices``."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, str):
            raise self.error(key, f"must be a string; got {_show(v)}")
        if choices is not None and v not in choices:
            raise self.error(key, f"must be one of {', '.join(map(repr, choices))}; got {v!r}")
        return v

    def number(self, key: str, default: Any = _MISSING, *, positive: bool = False,
               minimum: float | None = None, maximum: float | None = None,
               below: float | None = None) -> float:
        """A finite real number, with optional bounds."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        return check_number(v, lambda msg: self.error(key, msg), positive=positive,
                            minimum=minimum, maximum=maximum, below=below)

    def lattice_step(self, key: str, default: Any = _MISSING) -> float:
        """A lattice step: positive and at least the smallest normal double, as the library
        requires (:func:`polyconv.dist.from_law.check_step_value`)."""
        return self.number(key, default, positive=True, minimum=sys.float_info.min)

    def integer(self, key: str, default: Any = _MISSING, *, minimum: int | None = None,
                maximum: int | None = None) -> int:
        """An integer value (``2.0`` is refused: write ``2``)."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, int) or isinstance(v, bool):
            raise self.error(key, f"must be a whole number; got {_show(v)}")
        if minimum is not None and v < minimum:
            raise self.error(key, f"must be at least {minimum}; got {v}")
        if maximum is not None and v > maximum:
            raise self.error(key, f"must be at most {maximum}; got {v}")
        return v

    def numbers(self, key: str, default: Any = _MISSING, *, positive: bool = False,
                minimum: float | None = None, maximum: float | None = None,
                below: float | None = None, nonempty: bool = True) -> list[float]:
        """A list of finite real numbers."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, list):
            raise self.error(key, f"must be a list of numbers; got {_show(v)}")
        if nonempty and not v:
            raise self.error(key, "must not be empty")
        out = []
        for i, item in enumerate(v):
            out.append(check_number(item, lambda msg, i=i: self.doc.error(
                self.path + (key, i), msg), positive=positive, minimum=minimum,
                maximum=maximum, below=below))
        return out

    def numbers_like(self, key: str, values: list, **checks: Any) -> list[float]:
        """:meth:`numbers` at ``key`` with one entry per entry of ``values`` (the list read at
        ``'values'``)."""
        out = self.numbers(key, **checks)
        if len(out) != len(values):
            raise self.error(key, f"has {len(out)} entries but 'values' has {len(values)}")
        return out

    def strings(self, key: str, default: Any = _MISSING) -> list[str]:
        """A non-empty list of strings."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, list) or not v:
            raise self.error(key, f"must be a non-empty list of names; got {_show(v)}")
        for i, item in enumerate(v):
            if not isinstance(item, str):
                raise self.doc.error(self.path + (key, i), f"must be a name (string); got "
                                     f"{_show(item)}")
        return list(v)

    def table(self, key: str, default: Any = _MISSING) -> Section:
        """A sub-table as a :class:`Section` (an empty one when absent and ``default={}``)."""
        v = self._get(key, default)
        if not isinstance(v, dict):
            raise self.error(key, f"must be a table; got {_show(v)}")
        return Section(v, self.path + (key,), self.doc)

    def raw(self, key: str, default: Any = _MISSING) -> Any:
        """The value as parsed, unchecked."""
        return self._get(key, default)


def check_number(v: Any, fail, *, positive: bool = False, minimum: float | None = None,
                 maximum: float | None = None, below: float | None = None) -> float:
    """Validate a finite real number; ``fail(message)`` builds the exception to raise."""
    if not _is_number(v):
        raise fail(f"must be a number; got {_show(v)}")
    x = float(v)
    if not math.isfinite(x):
        raise fail(f"must be finite; got {v!r}")
    if positive and not x > 0:
        raise fail(f"must be positive; got {v!r}")
    if minimum is not None and x < minimum:
        raise fail(f"must be at least {minimum:g}; got {v!r}")
    if maximum is not None and x > maximum:
        raise fail(f"must be at most {maximum:g}; got {v!r}")
    if below is not None and not x < below:
        raise fail(f"must be below {below:g}; got {v!r}")
    return x


def _show(v: Any) -> str:
    if isinstance(v, str):
        return f"the string {v!r}"
    if isinstance(v, bool):
        return f"the boolean {str(v).lower()}"
    if isinstance(v, dict):
        return "a table"
    if isinstance(v, list):
        return "a list"
    return repr(v)
