"""``polyconv multiply``: the product of two coefficient sequences (polynomial multiplication).

Inputs and outputs are ``.npy``, ``.txt``/``.csv`` (numbers separated by commas, spaces or
newlines) or ``.json`` (a list).  Integers of any size are read and written exactly.  The output
goes to ``-o FILE`` (format from its extension, written atomically) or to stdout, one coefficient
per line.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import sys
from pathlib import Path

import numpy as np

from ..numerics import budget
from ..pipeline.execute import convolve_prepared
from ..pipeline.prepare import error_bound
from ..scale import streaming
from .errors import CliError
from .fileio import (
    SEQUENCE_SUFFIXES,
    atomic_write,
    format_values,
    npy_header,
    read_sequence,
    sequence_bytes,
    unlimited_int_digits,
)
from .report import add_command, dumps, plan_dict

EXAMPLE = """examples:
  polyconv multiply a.txt b.txt                    product to stdout, one coefficient per line
  polyconv multiply a.txt b.txt -o c.json          write a JSON list (atomically)
  polyconv multiply a.npy b.npy -o c.npy --explain say which engine ran and why
  polyconv multiply a.txt b.txt --modulus 998244353 --length 1000
  polyconv multiply a.csv b.csv --json             plan and coefficients as JSON
  polyconv multiply signal.npy taps.npy -o out.npy --memory-budget 512
                                                   stream a long .npy in constant memory

input files: .npy (numeric, no pickles), .txt/.csv (numbers separated by commas, spaces or
newlines; '#' starts a comment), .json (a list of numbers).  Integers of any size are exact.
When both inputs and the output are .npy and the longer input is larger than the memory budget,
the product is streamed block by block (constant memory; the output appears only when complete).
"""

#: default --memory-budget in MiB: inputs above it are streamed (when the formats allow)
DEFAULT_BUDGET_MIB = 1024


def register(sub) -> None:
    """Add the ``multiply`` sub-command to ``sub``."""
    p = add_command(
        sub, "multiply",
        help="multiply two coefficient sequences (exact for integers)",
        description=(
            "Convolve two sequences: coefficient i is that of x**i, so the output holds "
            "the coefficients of the product polynomial.  Integer inputs give exact "
            "integers of any size; floats give floating point with the engine's error "
            "bound (--explain)."),
        epilog=EXAMPLE,
    )
    p.add_argument("a", help="first sequence (.npy, .txt, .csv or .json)")
    p.add_argument("b", help="second sequence (.npy, .txt, .csv or .json)")
    p.add_argument("-o", "--output", metavar="OUT", default=None,
                   help="output file; its extension picks the format (default: stdout)")
    p.add_argument("--modulus", metavar="M", default=None,
                   help="reduce the coefficients modulo the integer M >= 2 (integer inputs)")
    p.add_argument("--length", metavar="L", default=None,
                   help="keep only the first L coefficients (a truncated product)")
    p.add_argument("--explain", action="store_true",
                   help="print the plan: engine, certificate, error bound, predicted time "
                   "(to stderr when the product goes to stdout)")
    p.add_argument("--json", action="store_true",
                   help="print a JSON object with the plan (and the coefficients without -o)")
    p.add_argument("--memory-budget", metavar="MIB", default=None,
                   help="stream .npy inputs larger than this many MiB (default "
                   f"{DEFAULT_BUDGET_MIB}; needs .npy inputs and a .npy output) and refuse, "
                   "before starting, a product that would need more (default: polyconv's "
                   "memory budget, POLYCONV_MEMORY_BUDGET)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


def parse_modulus(text: str | None) -> int | None:
    """``--modulus`` as an exact integer >= 2 (digits may be grouped with underscores)."""
    return _whole_number(text, "--modulus", 2, text and text.strip().replace("_", ""))


def parse_length(text: str | None) -> int | None:
    """``--length`` as an integer >= 1."""
    return _whole_number(text, "--length", 1, text and text.strip())


def _whole_number(text: str | None, option: str, lowest: int, digits: str | None) -> int | None:
    """``digits`` (the cleaned ``text``) as an integer ``>= lowest``, or None without ``text``."""
    if text is None:
        return None
    if not re.fullmatch(r"[+-]?[0-9]+", digits):
        raise CliError(f"{option} must be a whole number >= {lowest}; got {text!r}")
    value = int(digits)
    if value < lowest:
        raise CliError(f"{option} must be at least {lowest}; got {value}")
    return value


def parse_memory_budget(text: str | None) -> float | None:
    """``--memory-budget`` as a finite positive number of MiB (None when not given)."""
    if text is None:
        return None
    t = text.strip()
    if not re.fullmatch(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?", t):
        raise CliError(f"--memory-budget must be a positive number of MiB; got {text!r}")
    value = float(t)
    if not (math.isfinite(value) and value > 0 and value * 2**20 >= 1):
        raise CliError(f"--memory-budget must be a finite positive number of MiB; got {text!r}")
    return value


def refuse_overwriting_inputs(output: str | None, inputs: dict[str, str]) -> None:
    """Refuse an output that is one of the input files (same path, link or hard link)."""
    if output is None or not os.path.exists(output):
        return
    out_path = output
    for name, path in inputs.items():
        try:
            same = os.path.samefile(out_path, path)
        except OSError:
            same = False
        if same:
            raise CliError(f"output {output!r} is {name} {path!r}: the result would "
                           "overwrite an input; write it to another file")


def run(args) -> int:
    """Entry point of ``polyconv multiply``."""
    mib = parse_memory_budget(args.memory_budget)
    args.memory_budget = DEFAULT_BUDGET_MIB if mib is None else mib
    with unlimited_int_digits(), budget.using_budget(
            None if mib is None else max(1, int(mib * 2**20))):
        return _run(args)


def _run(args) -> int:
    modulus = parse_modulus(args.modulus)
    length = parse_length(args.length)
    out_path = Path(args.output) if args.output else None
    if out_path is not None:
        suffix = out_path.suffix.lower()
        if suffix not in SEQUENCE_SUFFIXES:
            raise CliError(f"output {args.output!r}: unknown file type {suffix or '(none)'!r}; "
                           f"use one of {', '.join(SEQUENCE_SUFFIXES)}")
        if out_path.is_dir():
            raise CliError(f"output {args.output!r} is a folder; give a file name")
    refuse_overwriting_inputs(args.output, {"input a": args.a, "input b": args.b})
    streamed = _stream_if_large(args, out_path, modulus, length)
    if streamed is not None:
        return streamed
    a = read_sequence(args.a, "input a")
    b = read_sequence(args.b, "input b")
    if modulus is not None and (a.dtype.kind == "f" or b.dtype.kind == "f"):
        which = "a" if a.dtype.kind == "f" else "b"
        raise CliError(f"--modulus needs integer inputs; input {which} holds floating-point "
                       "numbers")
    total = a.size + b.size - 1 if length is None else length
    budget.check_allocation(total * _bytes_per_coefficient(a, b, out_path),
                            f"the product ({total} coefficients"
                            + (f", --length {length})" if length is not None else ")"))
    result, the_plan = convolve_prepared(a, b, modulus=modulus, length=length)  # prepared once
    if not the_plan.exact and (args.json or args.explain):  # the plan to show has its bound
        the_plan = dataclasses.replace(the_plan, error_bound=error_bound(a, b, the_plan))
    if out_path is not None:
        atomic_write(out_path, sequence_bytes(result, out_path.suffix, f"output {args.output!r}"))
    if args.json:
        payload = {"plan": plan_dict(the_plan), "length": int(result.size),
                   "output": str(out_path) if out_path else None}
        if out_path is None:
            payload["coefficients"] = _json_values(result)
        print(dumps(payload))
        return 0
    if out_path is None:
        if args.explain:
            print(str(the_plan), file=sys.stderr)
        sys.stdout.write("\n".join(format_values(result)) + "\n")
    else:
        print(f"polyconv multiply: wrote {result.size} coefficients to {out_path}")
        if args.explain:
            print(str(the_plan))
    return 0


def _bytes_per_coefficient(a: np.ndarray, b: np.ndarray, out_path: Path | None) -> int:
    """Peak bytes per output coefficient (an estimate, counted before anything is allocated):
    the result (8 bytes; Python ints at least 40) and its encoding (``.npy``: another 8 bytes;
    text: the strings, about 100 bytes per value)."""
    each = 40 if a.dtype == object or b.dtype == object else 8
    binary = out_path is not None and out_path.suffix.lower() == ".npy"
    return each + (8 if binary else 100)


def _npy_header(path: str) -> tuple[tuple, np.dtype] | None:
    """Shape and dtype of a .npy file without reading its data (None if not a .npy name; a
    file that is not a readable .npy is reported when it is read)."""
    if not path.lower().endswith(".npy") or not os.path.isfile(path):
        return None
    try:
        return npy_header(path)
    except CliError:
        return None


def _stream_if_large(args, out_path: Path | None, modulus, length) -> int | None:
    """Stream the product with :func:`polyconv.scale.streaming.convolve_file` when the longer
    input is a 1-D .npy above the memory budget and the output is .npy; None when in memory is
    fine."""
    heads = _npy_header(args.a), _npy_header(args.b)
    if None in heads or out_path is None or out_path.suffix.lower() != ".npy":
        return None
    sizes = [math.prod(shape) * dtype.itemsize for shape, dtype in heads]
    if max(sizes) <= args.memory_budget * 2**20 or length is not None:
        return None
    if any(len(shape) != 1 for shape, _ in heads):
        return None
    long_path, short_path = (args.a, args.b) if sizes[0] >= sizes[1] else (args.b, args.a)
    kernel = read_sequence(short_path, "input b" if short_path == args.b else "input a")
    from .progress import Counter

    with Counter("multiply (streaming)", args.quiet) as report:
        streaming.convolve_file(long_path, kernel, out_path, modulus=modulus, progress=report)
    total = sum(shape[0] for shape, _ in heads) - 1
    if args.json:
        print(dumps({"streamed": True, "length": total, "output": str(out_path)}))
    else:
        print(f"polyconv multiply: streamed {total} coefficients to {out_path} "
              f"(input above the {args.memory_budget:g} MiB memory budget)")
    return 0


def _json_values(arr) -> list:
    if arr.dtype.kind == "f":
        return [float(v) for v in arr]
    if arr.dtype.kind == "c":
        return [[float(v.real), float(v.imag)] for v in arr]
    return [int(v) for v in arr]
