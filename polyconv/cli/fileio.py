"""Files in and out: coefficient sequences, atomic writes and report folders.

Atomicity (chosen here, stated in the README; the mechanics are in :mod:`polyconv._atomic`):

* a single output file is written to a temporary file in the same folder and moved into place
  with :func:`os.replace`, so a reader sees the old file or the new one, never a half-written one;
* a report folder is built complete in a temporary sibling folder (:class:`ReportFolder`) and
  then takes the target's place in one step; files of an existing folder that this run does not
  produce are carried over into the new one.  On any error, Ctrl-C, SIGTERM or SIGHUP the
  temporary folder is removed and the old folder is untouched.
* new files and folders honour the umask; a replaced file or folder keeps its mode.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import re
import shutil
import sys
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from .. import _atomic
from ..numerics import budget
from .errors import CliError

SEQUENCE_SUFFIXES = (".npy", ".txt", ".csv", ".json")

_INT = re.compile(r"^[+-]?[0-9]+$")
_FLOAT = re.compile(r"^[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?$")


@contextlib.contextmanager
def unlimited_int_digits() -> Iterator[None]:
    """Lift Python's limit on int <-> str conversion (4300 digits) for exact big integers."""
    get = getattr(sys, "get_int_max_str_digits", None)
    if get is None:  # pragma: no cover - Python < 3.10.7
        yield
        return
    old = get()
    sys.set_int_max_str_digits(0)
    try:
        yield
    finally:
        sys.set_int_max_str_digits(old)


# ----------------------------------------------------------------------------------- reading


def read_sequence(path: str | Path, name: str = "input") -> np.ndarray:
    """Read a 1-D sequence of coefficients.

    Parameters
    ----------
    path : str or Path
        ``.npy`` (a numeric 1-D array, no pickles), ``.txt``/``.csv`` (numbers separated by
        commas, spaces or newlines; ``#`` starts a comment), or ``.json`` (a list of numbers).
        Integers of any size are read exactly; a file with any float gives floats.
    name : str
        How to call this input in error messages.

    Returns
    -------
    numpy.ndarray
        int64 when every entry is an integer that fits, an object array of Python ints for
        larger integers, float64 otherwise.

    Raises
    ------
    CliError
        Missing file, unknown extension, empty file, non-numeric entries.
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in SEQUENCE_SUFFIXES:
        raise CliError(f"{name} {str(path)!r}: unknown file type {suffix or '(none)'!r}; "
                       f"use one of {', '.join(SEQUENCE_SUFFIXES)}")
    if not p.exists():
        raise CliError(f"{name} {str(path)!r}: no such file")
    if p.is_dir():
        raise CliError(f"{name} {str(path)!r}: is a folder, expected a file")
    try:
        if suffix == ".npy":
            return _read_npy(p, name)
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise CliError(f"{name} {str(path)!r}: not a UTF-8 text file") from None
    except OSError as exc:
        raise CliError(f"{name} {str(path)!r}: cannot read: {exc.strerror or exc}") from None
    if suffix == ".json":
        values = _json_values(text, f"{name} {str(path)!r}")
    else:
        values = _text_values(text, f"{name} {str(path)!r}")
    if not values:
        raise CliError(f"{name} {str(path)!r}: holds no numbers")
    return to_array(values)


NPY_MAGIC = b"\x93NUMPY"
ZIP_MAGIC = b"PK\x03\x04"


def npy_header(path: str | Path, name: str = "input") -> tuple[tuple[int, ...], np.dtype]:
    """Shape and dtype from a ``.npy`` file's header, without reading its data.

    Raises
    ------
    CliError
        Naming the file: not a ``.npy`` file at all (random bytes), a ``.npz`` archive renamed,
        a corrupt or unreadable header.
    """
    what = f"{name} {str(path)!r}"
    try:
        with open(path, "rb") as fh:
            start = fh.read(len(NPY_MAGIC))
            if start[:4] == ZIP_MAGIC:
                raise CliError(f"{what}: is a .npz archive (zip), not a .npy array; save one "
                               "array with numpy.save")
            if start != NPY_MAGIC:
                raise CliError(f"{what}: not a .npy file (it does not start with the .npy "
                               "magic bytes)")
            fh.seek(0)
            version = np.lib.format.read_magic(fh)
            if version == (1, 0):
                shape, fortran, dtype = np.lib.format.read_array_header_1_0(fh)
            elif version == (2, 0):
                shape, fortran, dtype = np.lib.format.read_array_header_2_0(fh)
            else:
                raise CliError(f"{what}: .npy format version {version} is not supported")
    except OSError as exc:
        raise CliError(f"{what}: cannot read: {exc.strerror or exc}") from None
    except Exception as exc:  # noqa: BLE001 - numpy's header parser raises many kinds
        detail = " ".join(str(exc).split())[:60]
        raise CliError(f"{what}: the .npy header is corrupt ({detail}...)") from None
    return tuple(int(n) for n in shape), np.dtype(dtype)


def _read_npy(p: Path, name: str) -> np.ndarray:
    what = f"{name} {str(p)!r}"
    shape, dtype = npy_header(p, name)
    if dtype.hasobject:
        raise CliError(f"{what}: .npy with Python objects (pickles) is refused; "
                       "write big integers to a .txt, .csv or .json file")
    if dtype.kind not in "biuf":
        raise CliError(f"{what}: holds {dtype} data; expected integers or floats")
    if len(shape) != 1:
        raise CliError(f"{what}: expected a 1-D array; got shape {shape}")
    if shape[0] == 0:
        raise CliError(f"{what}: holds no numbers")
    budget.check_allocation(shape[0] * max(dtype.itemsize, 8), f"{what} ({shape[0]} values)")
    try:
        arr = np.load(p, allow_pickle=False)
    except (OSError, ValueError, EOFError) as exc:
        detail = " ".join(str(exc).split())[:60]
        raise CliError(f"{what}: not a readable .npy file ({detail})") from None
    if arr.dtype.kind == "b":
        arr = arr.astype(np.int64)
    _refuse_non_finite(arr, what)
    return arr


def _refuse_non_finite(arr: np.ndarray, what: str) -> None:
    if arr.dtype.kind == "f":
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise CliError(f"{what}: entry [{int(bad[0])}] is {float(arr[bad[0]])!r}; inputs "
                           "must be finite numbers")


def _text_values(text: str, what: str) -> list:
    values: list = []
    for number, line in enumerate(text.splitlines(), start=1):
        line = line.split("#", 1)[0]
        for token in re.split(r"[,\s;]+", line.strip()):
            if token:
                values.append(_parse_token(token, f"{what}, line {number}"))
    return values


def _parse_token(token: str, where: str) -> int | float:
    t = token.replace("_", "") if "_" in token and _INT.match(token.replace("_", "")) else token
    if _INT.match(t):
        return int(t)
    if not _FLOAT.match(t):
        raise CliError(f"{where}: {token!r} is not a number")
    return _finite(float(t), token, where)


def _finite(x: float, token: str, where: str) -> float:
    if not math.isfinite(x):
        raise CliError(f"{where}: {token!r} is beyond the floating-point range (about "
                       "1.8e308); inputs must be finite numbers")
    return x


def _json_values(text: str, what: str) -> list:
    def constant(token: str):
        raise CliError(f"{what}: {token} is not a number (not valid JSON, and inputs must be "
                       "finite numbers)")

    try:
        data = json.loads(text, parse_constant=constant,
                          parse_float=lambda token: _finite(float(token), token, what))
    except json.JSONDecodeError as exc:
        raise CliError(f"{what}: not valid JSON: {exc.msg} (line {exc.lineno}, column "
                       f"{exc.colno})") from None
    except RecursionError:
        raise CliError(f"{what}: nested too deeply; expected a flat JSON list of "
                       "numbers") from None
    if not isinstance(data, list):
        raise CliError(f"{what}: expected a JSON list of numbers; got {type(data).__name__}")
    for i, v in enumerate(data):
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise CliError(f"{what}: entry [{i}] is {_short_json(v)}, not a number")
    return data


def _short_json(v) -> str:
    try:
        return json.dumps(v)[:40]
    except (RecursionError, ValueError):
        return "a nested value"


def to_array(values: list) -> np.ndarray:
    """Numbers to an array: int64 if all are integers that fit, Python ints if larger, else
    float64."""
    if all(isinstance(v, int) for v in values):
        if all(-(2**63) <= v < 2**63 for v in values):
            return np.array(values, dtype=np.int64)
        out = np.empty(len(values), dtype=object)
        out[:] = values
        return out
    try:
        return np.array([float(v) for v in values], dtype=float)
    except OverflowError:
        raise CliError("an integer is too large to mix with floating-point entries; "
                       "give all entries as integers for exact arithmetic") from None


# ----------------------------------------------------------------------------------- writing


def format_values(arr: np.ndarray) -> list[str]:
    """Each coefficient as text that reads back exactly (``repr`` of floats, ints in full)."""
    if arr.dtype.kind == "f":
        return [repr(float(v)) for v in arr]
    if arr.dtype.kind == "c":
        return [repr(complex(v)) for v in arr]
    return [str(int(v)) for v in arr]


def sequence_bytes(arr: np.ndarray, suffix: str, what: str = "output") -> bytes:
    """Encode a result for a file with this suffix (``.npy``, ``.txt``, ``.csv``, ``.json``);
    ``what`` names the file in messages."""
    suffix = suffix.lower()
    if suffix == ".npy":
        if arr.dtype == object:
            ints = [int(v) for v in arr]
            if ints and not all(-(2**63) <= v < 2**63 for v in ints):
                raise CliError(f"{what}: the result has integers beyond 64 bits, which .npy "
                               "cannot hold without pickles; write it to .txt, .csv or .json "
                               "instead")
            arr = np.array(ints, dtype=np.int64)
        buf = io.BytesIO()
        np.save(buf, arr, allow_pickle=False)
        return buf.getvalue()
    if suffix == ".json":
        if arr.dtype.kind == "f":
            if not np.all(np.isfinite(arr)):
                raise CliError(f"{what}: the result holds nan or inf, which JSON cannot "
                               "represent; "
                               "write it to .txt, .csv or .npy instead")
            return (json.dumps([float(v) for v in arr]) + "\n").encode()
        if arr.dtype.kind == "c":
            raise CliError(f"{what}: complex results cannot be written as JSON; use .npy")
        return (json.dumps([int(v) for v in arr]) + "\n").encode()
    if suffix in (".txt", ".csv"):
        return ("\n".join(format_values(arr)) + "\n").encode()
    raise CliError(f"output: unknown file type {suffix or '(none)'!r}; use one of "
                   f"{', '.join(SEQUENCE_SUFFIXES)}")


def atomic_write(path: str | Path, data: bytes | str) -> Path:
    """Write ``data`` to ``path`` atomically with :func:`polyconv._atomic.write_bytes`
    (temporary sibling, then rename; umask honoured, an existing file's mode kept; the temporary
    is removed on any error, Ctrl-C, SIGTERM or SIGHUP)."""
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise CliError(f"output {str(path)!r}: folder {str(folder)!r} does not exist")
    return _atomic.write_bytes(p, data)


class ReportFolder:
    """Build a folder of outputs in a temporary sibling, then swap it into place.

    Use as a context manager; files are added with :meth:`write_text`, :meth:`write_bytes` or by
    writing to :meth:`path`.  Leaving the block normally commits: files of an existing folder
    that this run does not produce are carried over (hard links) into the new folder, which
    then replaces the old one in one step (:func:`polyconv._atomic.replace_folder`).  An
    exception (Ctrl-C, SIGTERM and SIGHUP included) removes the temporary folder and leaves the
    target as it was.  At every moment the target is the old folder or the new one, complete.

    Parameters
    ----------
    target : str or Path
        The folder to create or replace.
    """

    def __init__(self, target: str | Path):
        self.target = Path(target)
        self.staging: Path | None = None
        self.files: list[str] = []
        self.kept: list[str] = []

    def __enter__(self) -> ReportFolder:
        parent = self.target.parent if str(self.target.parent) else Path(".")
        if self.target.exists() and not self.target.is_dir():
            raise CliError(f"output {str(self.target)!r} exists and is not a folder")
        if not parent.is_dir():
            raise CliError(f"output {str(self.target)!r}: folder {str(parent)!r} does not exist")
        try:
            self.staging = _atomic.make_staging_folder(self.target)
        except OSError as exc:
            raise CliError(f"output {str(self.target)!r}: cannot create files in "
                           f"{str(parent)!r}: {exc.strerror or exc}") from None
        return self

    def path(self, name: str) -> Path:
        """Where to write the file ``name`` (inside the staging folder); records it."""
        assert self.staging is not None
        if name not in self.files:
            self.files.append(name)
        return self.staging / name

    def existing(self, name: str) -> Path | None:
        """The file ``name`` of the folder being replaced, if there is one."""
        old = self.target / name
        return old if old.is_file() else None

    def write_text(self, name: str, text: str) -> None:
        """Add a UTF-8 text file."""
        self.path(name).write_text(text, encoding="utf-8")

    def write_bytes(self, name: str, data: bytes) -> None:
        """Add a binary file."""
        self.path(name).write_bytes(data)

    def __exit__(self, exc_type, exc, tb) -> None:
        assert self.staging is not None
        try:
            if exc_type is None:
                self._commit()
        finally:
            if self.staging.exists():
                shutil.rmtree(self.staging, ignore_errors=True)

    def _commit(self) -> None:
        assert self.staging is not None
        self.files = [name for name in self.files if (self.staging / name).exists()]
        if self.target.is_dir():
            for name in self.files:  # a replaced file keeps its mode
                mode = _atomic.existing_mode(self.target / name)
                if mode is not None:
                    (self.staging / name).chmod(mode)
            self.kept = _atomic.carry_over(self.target, self.staging)
        _atomic.replace_folder(self.staging, self.target)
