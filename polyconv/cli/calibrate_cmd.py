"""``polyconv calibrate``: re-measure the cost model on this machine."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from ..tuning import calibrate, costs

EXAMPLE = """example:
  polyconv calibrate --quick
  polyconv calibrate --output my-costs.json   (then: export POLYCONV_COSTS=my-costs.json)
"""


def register(sub) -> None:
    p = sub.add_parser(
        "calibrate",
        help="measure this machine and store the cost model's constants",
        description="Time every engine on this machine, fit the cost model and save it to a "
        "per-user file that polyconv then prefers over its shipped defaults.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--quick", action="store_true", help="fewer sizes, about ten seconds")
    p.add_argument("--output", type=Path, default=None,
                   help=f"where to write (default: {costs.user_cost_path()})")
    p.add_argument("--show", action="store_true", help="print the table in force and exit")
    p.add_argument("--quiet", action="store_true", help="no progress messages")
    p.add_argument("--json", action="store_true", help="print the written table as JSON")
    p.add_argument("--kernels", action="store_true",
                   help="only compile (or load from cache) the numba kernels, then exit")
    p.set_defaults(run=run)


def run(args) -> int:
    if args.show:
        print(f"# cost table from: {costs.cost_source()}")
        print(json.dumps(costs.load_costs(), indent=2, sort_keys=True))
        return 0

    if args.kernels:
        return compile_kernels()

    def progress(msg: str) -> None:
        if not args.quiet:
            print(f"  measuring: {msg}", file=sys.stderr)

    table = calibrate.measure(quick=args.quick, progress=progress)
    path = costs.save_user_costs(table, args.output)
    if args.json:
        print(json.dumps({"path": str(path), "costs": table}, indent=2, sort_keys=True))
    else:
        print(f"polyconv calibrate: wrote {path}")
        if args.output is not None and args.output.resolve() != costs.user_cost_path().resolve():
            print(f"  (set POLYCONV_COSTS={path} to use it)")
    return 0


def compile_kernels() -> int:
    """Compile the compiled engines' kernels ahead of time (``--kernels``)."""
    from ..engines import jit_state as jit

    try:
        how, seconds = jit.ensure_compiled()
    except jit.JitUnavailableError as exc:
        print(f"polyconv calibrate: compiled kernels unavailable: {exc}", file=sys.stderr)
        return 1
    print(f"polyconv calibrate: kernels {how} in {seconds:.2f} s ({jit.cache_description()})")
    return 0
