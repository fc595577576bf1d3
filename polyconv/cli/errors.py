"""Errors the command line reports as one line and exit status 2 (never a traceback)."""

from __future__ import annotations

USAGE_ERROR = 2
"""Exit status for bad input: a malformed spec, an unreadable file, a bad option value."""

INTERRUPTED = 130
"""Exit status after Ctrl-C (128 + SIGINT, the shell convention), SIGTERM or SIGHUP.

SIGTERM and SIGHUP are handled exactly like Ctrl-C (temporary files removed, no output left
half-written) and exit with this same status, not 128 + their number: the command line promises
only the statuses 0, 2 and 130, and scripts test for 130 to mean "stopped by a signal, nothing
written"."""


class Interrupted(KeyboardInterrupt):
    """SIGINT, SIGTERM or SIGHUP, raised in the main thread like Ctrl-C's KeyboardInterrupt (so
    every cleanup that handles Ctrl-C handles these too)."""

    def __init__(self, signum: int, name: str):
        super().__init__(name)
        self.signum = signum
        self.name = name


class CliError(Exception):
    """A user-facing error: printed as ``polyconv COMMAND: error: MESSAGE``, exit status 2."""


class SpecError(CliError):
    """A problem in a TOML spec, naming the key and, where known, the line.

    Parameters
    ----------
    source : str
        The spec's file name (as the user gave it).
    key : str
        Dotted key at fault, e.g. ``"severity.params.s"`` (empty for file-level problems).
    message : str
        What is wrong and what was expected.
    line : int, optional
        1-based line of the key in the file.
    """

    def __init__(self, source: str, key: str, message: str, line: int | None = None):
        self.source = source
        self.key = key
        self.line = line
        where = source
        if line is not None:
            where += f", line {line}"
        text = f"{where}: key '{key}': {message}" if key else f"{where}: {message}"
        super().__init__(text)
