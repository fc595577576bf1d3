"""Entry point of the ``polyconv`` console script.

Sub-commands are small modules in this package; this file only parses arguments and dispatches.
Bad input of any kind exits with status 2 and a one-line message naming what is wrong (never a
traceback); Ctrl-C exits with status 130 and leaves no half-written file.  Set the environment
variable ``POLYCONV_DEBUG=1`` to see the traceback of an unexpected internal error.
"""

from __future__ import annotations

import atexit
import contextlib
import os
import signal
import sys
import threading
import time
from collections.abc import Iterator

from .errors import INTERRUPTED, USAGE_ERROR, CliError, Interrupted

COMMANDS = ("multiply", "aggregate", "delays", "demo", "bench", "calibrate")
"""Sub-commands, each the module ``polyconv.cli.<name>_cmd`` (imported once signals are
handled, so an interruption while numpy and scipy load is handled too)."""

HANDLED_SIGNALS = tuple(getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP")
                        if hasattr(signal, name))

_SEEN: list[int] = []
"""Signals received by the handler since it was installed (only the first one is raised)."""
_ARMED: list[bool] = []
"""Non-empty while a command runs: the first signal is then raised at once (before, while
this module itself loads, it is only recorded and raised when the command starts)."""
_FINISHED: list[int] = []
"""The exit status once the command has finished (process entry only): a signal arriving
after that, while the interpreter shuts down, ends the process at once with this status."""


def _interrupt(signum, frame) -> None:
    """The handler of SIGINT, SIGTERM and SIGHUP: raise the first one as :class:`Interrupted`
    (the path of Ctrl-C), ignore later ones so the cleanup the first starts runs to its end,
    and after the command has finished exit with its status (nothing is left to clean up)."""
    _SEEN.append(signum)
    if _FINISHED:
        for stream in (sys.stdout, sys.stderr):
            with contextlib.suppress(Exception):
                stream.flush()
        os._exit(_FINISHED[-1])
    if len(_SEEN) == 1 and _ARMED:
        raise Interrupted(signum, signal.Signals(signum).name)


def _raise_early_signal() -> None:
    """Raise a signal that arrived before the command started (while the module loaded)."""
    if _SEEN:
        raise Interrupted(_SEEN[0], signal.Signals(_SEEN[0]).name)


def _install_handlers() -> dict:
    """Install :func:`_interrupt` for the handled signals (main thread only); return the
    handlers it replaced."""
    previous = {}
    if threading.current_thread() is threading.main_thread():
        for sig in HANDLED_SIGNALS:
            with contextlib.suppress(ValueError, OSError):
                previous[sig] = signal.signal(sig, _interrupt)
    return previous


if __name__ == "__main__":  # ``python -m polyconv.cli.main``: handled before anything loads
    _install_handlers()

EPILOG = """examples:
  polyconv multiply a.txt b.txt -o c.txt --explain   exact product of two coefficient files
  polyconv aggregate claims.toml -o claims-report    aggregate loss distribution
  polyconv delays pipeline.toml -o pipeline-report   end-to-end delay of a network of stages
  polyconv demo                                      all of it on invented scenarios
  polyconv bench                                     quick speed ratios against numpy/scipy/flint
  polyconv calibrate --quick                         re-measure this machine's cost model

'polyconv COMMAND --help' shows each command's options and an example.
"""


def build_parser():
    """The argument parser (an ``argparse.ArgumentParser``) with every sub-command
    registered."""
    import argparse
    import importlib

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
def signals_as_interrupts(keep: bool = False) -> Iterator[None]:
    """Turn SIGINT, SIGTERM and SIGHUP into :class:`Interrupted` (a KeyboardInterrupt) while the
    block runs, so all three take the path of Ctrl-C: temporary files and folders removed, exit
    status 130.  Only the first signal is raised; later ones are ignored, so the cleanup it
    starts runs to its end.  The previous handlers are restored afterwards unless ``keep``
    (the process entry keeps them through the interpreter's shut-down; main thread only:
    elsewhere the block simply runs)."""
    if not keep:
        _SEEN.clear()  # a call from Python: earlier signals are not this command's
    _FINISHED.clear()
    previous = _install_handlers()
    hook = sys.unraisablehook
    sys.unraisablehook = _redeliver_unraisable
    _ARMED.append(True)
    try:
        yield
    finally:
        _ARMED.clear()
        if sys.unraisablehook is _redeliver_unraisable:
            sys.unraisablehook = hook
        if not keep:
            for sig, handler in previous.items():
                signal.signal(sig, handler)


def _redeliver_unraisable(unraisable) -> None:
    """``sys.unraisablehook`` while a command runs: an :class:`Interrupted` raised inside a
    finaliser (``__del__``, a weakref callback) cannot propagate, and Python would print it as
    "Exception ignored" with a traceback and carry on, losing the interruption.  Deliver the
    signal again instead: the handler raises it in the command's own code."""
    exc = unraisable.exc_value
    if not isinstance(exc, Interrupted):
        sys.__unraisablehook__(unraisable)
        return

    def send() -> None:  # from a helper thread, once this hook has returned: sending from the
        time.sleep(0.01)  # hook itself would run the handler (and raise) inside the hook
        _SEEN.clear()
        os.kill(os.getpid(), exc.signum)

    threading.Thread(target=send, name="polyconv-redeliver", daemon=True).start()


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (0 ok, 2 bad input, 130 interrupted by
    Ctrl-C, SIGTERM or SIGHUP).  No other status is returned, and no traceback is printed
    unless ``POLYCONV_DEBUG`` is set.

    Without ``argv`` this is the process entry (the ``polyconv`` script, ``python -m
    polyconv.cli.main``): the signal handlers are installed before anything heavy is imported
    and stay installed after the command: a signal while the interpreter shuts down ends it
    at once with the status already decided, and from the last exit hook on the signals are
    ignored (:func:`_ignore_signals`), never the default action that would kill the finished
    process.  With ``argv`` (a call from Python) the previous handlers are restored on
    return."""
    entry = argv is None
    if entry:  # registered first, so it runs last of the exit hooks
        atexit.register(_ignore_signals)
    name = "polyconv"
    status = INTERRUPTED
    try:
        with signals_as_interrupts(keep=entry):
            try:
                status = _parse_and_run(argv)
            except KeyboardInterrupt as exc:
                what = exc.name if isinstance(exc, Interrupted) else "Ctrl-C"
                command = getattr(exc, "command", None) or name
                print(f"\n{command}: interrupted ({what}); no output was left half-written",
                      file=sys.stderr)
                status = INTERRUPTED
    except KeyboardInterrupt:  # a second signal while the first one's message was printed
        status = INTERRUPTED
    if entry:
        _FINISHED.append(status)
    return status


def _ignore_signals() -> None:
    """The last exit hook of the process entry: ignore the handled signals from here on.  The
    interpreter resets Python-level handlers to the default action when it finalises (but
    leaves ignored signals ignored); a signal in that last stretch would kill the process
    after its work was done (seen as exit -1, -2 or -15)."""
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(Exception):
            stream.flush()
    if threading.current_thread() is threading.main_thread():
        for sig in HANDLED_SIGNALS:
            with contextlib.suppress(ValueError, OSError):
                signal.signal(sig, signal.SIG_IGN)


def _parse_and_run(argv: list[str] | None) -> int:
    """Parse the arguments and run the command (an interruption names the command)."""
    name = "polyconv"
    try:
        _raise_early_signal()
        try:
            parser = build_parser()
        except Exception as exc:  # noqa: BLE001 - a sub-command (numpy, scipy) failed to load
            _raise_if_signalled(exc)
            if os.environ.get("POLYCONV_DEBUG"):
                raise
            print(f"polyconv: error: cannot load the command line: {type(exc).__name__}: "
                  f"{exc}".rstrip(), file=sys.stderr)
            return USAGE_ERROR
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
        exc.command = name
        raise


def _raise_if_signalled(exc: BaseException) -> None:
    """Re-raise as :class:`Interrupted` an error that a signal caused: the handler raised inside
    code that turned the interruption into another exception (numpy's import, for one, reports
    any failure while its extension modules load as an ImportError)."""
    if _SEEN and not isinstance(exc, (KeyboardInterrupt, SystemExit)):
        raise Interrupted(_SEEN[0], signal.Signals(_SEEN[0]).name) from exc


def _run(name: str, args) -> int:
    """Run the parsed command; every failure becomes one line on stderr and status 2."""
    import warnings

    def show(message, category, filename, lineno, file=None, line=None) -> None:
        print(f"{name}: warning: {message}", file=sys.stderr)

    try:
        with warnings.catch_warnings():
            warnings.showwarning = show
            try:
                status = args.run(args)
            except Exception as exc:  # noqa: BLE001 - only to tell a signal's doing apart
                _raise_if_signalled(exc)
                raise
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
