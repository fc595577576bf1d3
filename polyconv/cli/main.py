"""Entry point of the ``polyconv`` console script.

Sub-commands are small modules in this package; this file only parses arguments and dispatches.
Errors in user input exit with status 2 and a one-line message, never a traceback.
"""

from __future__ import annotations

import argparse
import sys

from . import calibrate_cmd, demo_cmd

EPILOG = """examples:
  polyconv demo                 run the bundled demo scenarios
  polyconv calibrate            re-measure this machine's cost model
  polyconv calibrate --quick    a faster, rougher calibration
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="polyconv",
        description="Fast, exact convolution of sequences, polynomials and distributions.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    demo_cmd.register(sub)
    calibrate_cmd.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return int(args.run(args) or 0)
    except KeyboardInterrupt:
        print("polyconv: interrupted; nothing was written half-way", file=sys.stderr)
        return 130
    except (ValueError, TypeError, OSError) as exc:
        print(f"polyconv {args.command}: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
