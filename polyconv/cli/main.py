"""Entry point of the ``polyconv`` console script.

Sub-commands are small modules in this package; this file only parses arguments and dispatches.
Bad input of any kind exits with status 2 and a one-line message naming what is wrong (never a
traceback); Ctrl-C exits with status 130 and leaves no half-written file.  Set the environment
variable ``POLYCONV_DEBUG=1`` to see the traceback of an unexpected internal error.
"""

from __future__ import annotations

import argparse
import os
import sys

from . import (
    aggregate_cmd,
    bench_cmd,
    calibrate_cmd,
    delays_cmd,
    demo_cmd,
    multiply_cmd,
)
from .errors import INTERRUPTED, USAGE_ERROR, CliError

EPILOG = """examples:
  polyconv multiply a.txt b.txt -o c.txt --explain   exact product of two coefficient files
  polyconv aggregate claims.toml -o claims-report    aggregate loss distribution
  polyconv delays pipeline.toml -o pipeline-report   end-to-end delay of a network of stages
  polyconv demo                                      all of it on invented scenarios
  polyconv bench                                     quick speed ratios against numpy/scipy/flint
  polyconv calibrate --quick                         re-measure this machine's cost model

'polyconv COMMAND --help' shows each command's options and an example.
"""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every sub-command registered."""
    parser = argparse.ArgumentParser(
        prog="polyconv",
        description="Fast, exact convolution of sequences, polynomials and distributions.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in (multiply_cmd, aggregate_cmd, delays_cmd, demo_cmd, bench_cmd, calibrate_cmd):
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (0 ok, 2 bad input, 130 interrupted)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help (0) or a usage error (2): argparse printed the message
        return int(exc.code) if isinstance(exc.code, int) else USAGE_ERROR
    if args.command is None:
        parser.print_help()
        return USAGE_ERROR
    name = f"polyconv {args.command}"
    try:
        return int(args.run(args) or 0)
    except KeyboardInterrupt:
        print(f"\n{name}: interrupted; no output was left half-written", file=sys.stderr)
        return INTERRUPTED
    except BrokenPipeError:  # e.g. piped into `head`: stop quietly
        _silence_stdout()
        return 0
    except CliError as exc:
        print(f"{name}: error: {exc}", file=sys.stderr)
        return USAGE_ERROR
    except (ValueError, TypeError, OverflowError) as exc:
        # the library validates its arguments and names the one at fault
        print(f"{name}: error: {exc}", file=sys.stderr)
        return USAGE_ERROR
    except OSError as exc:
        where = f" ({exc.filename})" if getattr(exc, "filename", None) else ""
        print(f"{name}: error: {exc.strerror or exc}{where}", file=sys.stderr)
        return USAGE_ERROR
    except MemoryError:
        print(f"{name}: error: out of memory; try a coarser grid or smaller inputs",
              file=sys.stderr)
        return USAGE_ERROR
    except Exception as exc:  # noqa: BLE001 - last resort: no traceback for users
        if os.environ.get("POLYCONV_DEBUG"):
            raise
        print(f"{name}: internal error: {type(exc).__name__}: {exc} (set POLYCONV_DEBUG=1 "
              "for the traceback and please report it)", file=sys.stderr)
        return 1


def _silence_stdout() -> None:
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
