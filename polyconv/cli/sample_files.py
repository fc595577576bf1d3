"""Reading measured samples from files: a CSV column, a ``.npy`` array, plain text.

Measured latencies come as millions of decimal numbers.  Large files are parsed by a compiled
kernel (:mod:`polyconv.cli._parse_kernel`, exact fast-path conversion); small ones, and
anything the kernel does not take, by ``numpy.loadtxt`` (whose error names the bad line) or
``numpy.fromstring`` for plain text.  A whole-array numpy parser was tried and was no faster
than numpy 2's ``loadtxt`` (0.8-1.0 s vs 0.6-0.8 s per 10^6 values, busy machine); a
vectorised digit parser (16-byte windows ending at each newline, digits combined as 8-byte
words) was exact but took 0.23-0.30 s per 10^6-row file against 0.02 s of CPU for the kernel,
so the kernel's one-time load (about 0.5 s of CPU with numba's BLAS probe deferred, see
:func:`_kernel`) pays for itself from the third file on.
"""

from __future__ import annotations

import importlib.util
import os
import sys
from pathlib import Path

import numpy as np

from ..numerics.budget import check_allocation

KERNEL_BYTES = 8 << 20
"""Files at least this large are parsed by the compiled kernel (importing numba costs about a
second once per process; numpy.loadtxt costs about as much per 10^6 values)."""


_BLAS_PROBE = "scipy.linalg.cython_blas"
KERNEL_MODULE = "polyconv.cli._parse_kernel"


def _kernel():
    """The module :mod:`polyconv.cli._parse_kernel`, loaded (numba cache) and run once on a
    tiny buffer.

    Loading a cached numba function sets up numba's CPU target, whose ``numba.np.arraymath``
    probes for BLAS by importing ``scipy.linalg`` (0.2-0.3 s of CPU, about a third of the
    load, for a kernel that does no linear algebra).  The probe is deferred: while the kernel
    loads, that one module is marked absent in ``sys.modules`` (its import fails at once), then
    the mark is removed and numba's flag is set back to "BLAS available" when scipy is
    installed, so a kernel compiled later in this process that needs BLAS imports it then, as
    numba's own ``ensure_blas`` does for ``np.dot``.
    """
    if KERNEL_MODULE in sys.modules:
        return sys.modules[KERNEL_MODULE]
    from ..engines import jit_state
    jit_state.cache_enabled()  # points numba at a writable cache before it is imported
    blocked = _BLAS_PROBE not in sys.modules and "numba.np.arraymath" not in sys.modules
    if blocked:
        sys.modules[_BLAS_PROBE] = None  # type: ignore[assignment]
    try:
        from . import _parse_kernel as kernel
        kernel.parse_numbers(np.frombuffer(b"1\n", dtype=np.uint8), -1, 0, np.empty(2))
    finally:
        if blocked and sys.modules.get(_BLAS_PROBE, 0) is None:
            del sys.modules[_BLAS_PROBE]
            arraymath = sys.modules.get("numba.np.arraymath")
            if arraymath is not None and getattr(arraymath, "_HAVE_BLAS", True) is False \
                    and importlib.util.find_spec("scipy") is not None:
                arraymath._HAVE_BLAS = True
    return kernel


def kernel_parse(buf: np.ndarray, delimiter: int | None, index: int, ncols: int):
    """The compiled parser's values (:mod:`polyconv.cli._parse_kernel`), or None: file small,
    numba absent or disabled (``POLYCONV_JIT=0``), or a number it does not take (fall back)."""
    if buf.size < KERNEL_BYTES and KERNEL_MODULE not in sys.modules:
        return None
    if os.environ.get("POLYCONV_JIT", "").strip().lower() in ("0", "off", "no", "false"):
        return None
    try:
        kernel = _kernel()
    except Exception:  # noqa: BLE001 - numba missing or failing here: numpy.loadtxt instead
        return None
    # at most one number per two bytes ("1\n"): an upper bound without a counting pass; the
    # untouched pages are never committed, and resize shrinks the block in place (realloc)
    out = np.empty(buf.size // 2 + 1)
    count, status = kernel.parse_numbers(buf, -1 if delimiter is None else delimiter, index,
                                         out)
    if status != kernel.OK or count == 0:
        return None
    out.resize((count,), refcheck=False)
    return out



class SampleFileError(ValueError):
    """A samples file that cannot be read (message names the file and what is wrong)."""


def read_samples(path: str | Path, *, column: str | int | None = None,
                 fast_only: bool = False) -> np.ndarray | None:
    """The samples in ``path`` as a float array.

    Parameters
    ----------
    path : str or Path
        ``.npy`` (a 1-D array, or 2-D with ``column`` an index), ``.csv`` (comma-separated,
        first line a header when it is not numeric; ``column`` a header name or a 0-based
        index, default 0) or anything else as plain text (numbers separated by white space).
    column : str or int, optional
        Which column of a CSV file or 2-D array.
    fast_only : bool
        Only the compiled kernel, already loaded in this process: None when it does not read
        the file (then nothing is imported and no warning is issued, so a worker thread can
        call it; :mod:`polyconv.cli.delays_prefetch`).

    Raises
    ------
    SampleFileError
        Unreadable file, unknown column, or values that are not numbers.
    """
    p = Path(path)
    try:
        size = p.stat().st_size
    except OSError as exc:
        raise SampleFileError(f"cannot read samples file {str(p)!r}: {exc.strerror}") from None
    check_allocation(24 * size + (1 << 20), f"reading samples file {p.name}")
    if fast_only and (p.suffix.lower() == ".npy" or KERNEL_MODULE not in sys.modules):
        return None
    if p.suffix.lower() == ".npy":
        return _npy(p, column)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise SampleFileError(f"cannot read samples file {str(p)!r}: {exc.strerror}") from None
    if p.suffix.lower() == ".csv":
        return _csv(p, raw, column, fast_only)
    if column is not None:
        raise SampleFileError(f"{p.name}: 'column' applies to CSV files and 2-D .npy arrays")
    fast = kernel_parse(np.frombuffer(raw, dtype=np.uint8), None, 0, 1)
    if fast is not None or fast_only:
        return fast
    import warnings
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:  # white-space separated numbers, any number per line
            return np.fromstring(raw.decode("utf-8", "replace"), sep=" ")
        except (DeprecationWarning, ValueError):
            raise SampleFileError(f"{p.name}: not a list of numbers separated by white space "
                                  "(a value that is not a number)") from None


def _npy(p: Path, column) -> np.ndarray:
    try:
        arr = np.load(p, allow_pickle=False)
    except (OSError, ValueError) as exc:
        raise SampleFileError(f"cannot read {p.name} as a .npy array: {exc}") from None
    if arr.dtype.kind not in "iuf":
        raise SampleFileError(f"{p.name}: the array holds {arr.dtype}, not numbers")
    if arr.ndim == 2:
        if not isinstance(column, int) or not 0 <= column < arr.shape[1]:
            raise SampleFileError(f"{p.name} is a 2-D array of {arr.shape[1]} columns: give "
                                  "'column' as a 0-based index")
        arr = arr[:, column]
    elif arr.ndim != 1 or column not in (None, 0):
        raise SampleFileError(f"{p.name}: expected a 1-D array (or 2-D with 'column'); got "
                              f"shape {arr.shape}")
    return arr.astype(float, copy=False)


def _csv(p: Path, raw: bytes, column, fast_only: bool = False) -> np.ndarray | None:
    nl = raw.find(b"\n")
    first = raw[: nl if nl >= 0 else len(raw)].decode("utf-8", "replace").strip()
    names = [c.strip().strip('"') for c in first.split(",")]
    header = not all(_is_number(c) for c in names)
    if column is None:
        index = 0
    elif isinstance(column, int):
        index = column
    elif header and column in names:
        index = names.index(column)
    else:
        shown = ", ".join(names) if header else "none (the file has no header line)"
        raise SampleFileError(f"{p.name} has no column {column!r}; its columns: {shown}")
    if not 0 <= index < len(names):
        raise SampleFileError(f"{p.name} has {len(names)} columns; column {column!r} is "
                              "out of range")
    start = nl + 1 if header and nl >= 0 else 0
    body = np.frombuffer(raw, dtype=np.uint8)[start:]
    fast = kernel_parse(body, ord(","), index, len(names))
    if fast is not None or fast_only:
        return fast
    return _loadtxt(p, ord(","), index, skip=1 if header else 0)


def _is_number(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False


def _loadtxt(p: Path, delimiter: int | None, index: int, skip: int = 0) -> np.ndarray:
    try:
        with p.open("rb") as fh:
            out = np.loadtxt(fh, delimiter=None if delimiter is None else chr(delimiter),
                             skiprows=skip, usecols=None if delimiter is None else index,
                             ndmin=1, dtype=float)
    except ValueError as exc:
        raise SampleFileError(f"{p.name}: {exc}") from None
    return out.ravel()
