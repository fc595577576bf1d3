"""Entry point of the ``polyconv`` console script.

Sub-commands are small modules in this package; this file only parses arguments and dispatches.
Bad input of any kind exits with status 2 and a one-line message naming what is wrong (never a
traceback); Ctrl-C exits with status 130 and leaves no half-written file.  Set the environment
variable ``POLYCONV_DEBUG=1`` to see the traceback of an unexpected internal error.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import signal
import sys
import warnings
from collections.abc import Iterator

from .._atomic import signal_handler
from .errors import INTERRUPTED, USAGE_ERROR, CliError, Interrupted

COMMANDS = ("multiply", "aggregate", "delays", "demo", "bench", "calibrate")
"""Sub-commands, each the module ``polyconv.cli.<name>_cmd`` (imported once signals are
handled, so an interruption while numpy and scipy load is handled too)."""

HANDLED_SIGNALS = tuple(getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP")
                        if hasattr(signal, name))

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
    for name in COMMANDS:
        importlib.import_module(f"{__package__}.{name}_cmd").register(sub)
    return parser


@contextlib.contextmanager
def signals_as_interrupts() -> Iterator[None]:
    """Turn SIGINT, SIGTERM and SIGHUP into :class:`Interrupted` (a KeyboardInterrupt) while the
    block runs, so all three take the path of Ctrl-C: temporary files and folders removed, exit
    status 130.  Only the first signal is raised; later ones are ignored, so the cleanup it
    starts runs to its end.  The previous handlers are restored afterwards (main thread only:
    elsewhere the block simply runs)."""
    seen: list[int] = []

    def interrupt(signum, frame) -> None:
        seen.append(signum)
        if len(seen) == 1:
            raise Interrupted(signum, signal.Signals(signum).name)

    with signal_handler(interrupt, HANDLED_SIGNALS):
        yield


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (0 ok, 2 bad input, 130 interrupted by
    Ctrl-C, SIGTERM or SIGHUP).  No other status is returned, and no traceback is printed
    unless ``POLYCONV_DEBUG`` is set."""
    name = "polyconv"
    try:
        with signals_as_interrupts():
            try:
                parser = build_parser()
                try:
                    args = parser.parse_args(argv)
                except SystemExit as exc:  # --help (0) or a usage error (2): argparse printed it
                    return int(exc.code) if exc.code in (0, USAGE_ERROR) else USAGE_ERROR
                if args.command is None:
                    parser.print_help()
                    return USAGE_ERROR
                name = f"polyconv {args.command}"
                return _run(name, args)
            except KeyboardInterrupt as exc:
                what = exc.name if isinstance(exc, Interrupted) else "Ctrl-C"
                print(f"\n{name}: interrupted ({what}); no output was left half-written",
                      file=sys.stderr)
                return INTERRUPTED
    except KeyboardInterrupt:  # a second signal while the first one's message was printed
        return INTERRUPTED


def _run(name: str, args) -> int:
    """Run the parsed command; every failure becomes one line on stderr and status 2."""
    def show(message, category, filename, lineno, file=None, line=None) -> None:
        print(f"{name}: warning: {message}", file=sys.stderr)

    try:
        with warnings.catch_warnings():
            warnings.showwarning = show
            status = args.run(args)
        return 0 if status in (None, 0) else USAGE_ERROR
    except BrokenPipeError:  # e.g. piped into `head`: stop quietly
        _silence_stdout()
        return 0
    except CliError as exc:
        message = str(exc)
    except RecursionError:
        message = (f"{_input_of(args)}: nested too deeply to be handled (beyond Python's "
                   f"recursion limit of {sys.getrecursionlimit()}); flatten it")
    except (ValueError, TypeError, OverflowError, ArithmeticError) as exc:
        # the library validates its arguments and names the one at fault
        message = str(exc) or type(exc).__name__
    except OSError as exc:
        where = f" ({exc.filename})" if getattr(exc, "filename", None) else ""
        message = f"{exc.strerror or exc}{where}"
    except MemoryError:
        message = ("out of memory; try a coarser grid, smaller inputs or a smaller "
                   "--memory-budget")
    except Exception as exc:  # noqa: BLE001 - last resort: no traceback for users
        if os.environ.get("POLYCONV_DEBUG"):
            raise
        # status 2 like every failure (the command line returns only 0, 2 and 130); the
        # wording tells it apart from bad input
        message = (f"internal error: {type(exc).__name__}: {exc} (set POLYCONV_DEBUG=1 for "
                   "the traceback and please report it)")
    print(f"{name}: error: {message}", file=sys.stderr)
    return USAGE_ERROR


def _input_of(args) -> str:
    """How to name the command's input in a message: its spec or input files."""
    for key in ("spec", "a"):
        value = getattr(args, key, None)
        if value:
            names = [value] + ([args.b] if key == "a" and getattr(args, "b", None) else [])
            return " or ".join(repr(str(v)) for v in names)
    return "an input"


def _silence_stdout() -> None:
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
