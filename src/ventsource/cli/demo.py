"""`ventsource demo`: a synthetic series at the fictional Mount Kerrow, inverted."""
import os

from ventsource.cli.shared import announce_compilation, route_warnings
from ventsource.common.errors import InputError


def add_parser(sub):
    dp = sub.add_parser("demo", help="synthetic series at the fictional Mount Kerrow, inverted",
                        description="Make a synthetic series at the fictional volcano Mount Kerrow "
                                    "with known truth, invert it by windows and row by row, and "
                                    "draw every figure.")
    dp.add_argument("--out", default="demo-output", metavar="FOLDER", help="output folder (created)")
    dp.add_argument("--rows", type=int, default=60, help="number of synthetic measurements")
    dp.add_argument("--workers", type=int, default=2, help="local worker processes")
    dp.add_argument("--resume", action="store_true", help="keep finished rows, invert the rest")
    dp.set_defaults(handler=cmd_demo)


def cmd_demo(args):
    import time
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.demo import run_demo
    if args.rows < 2:
        raise InputError("--rows must be at least 2")
    if args.workers < 1:
        raise InputError("--workers must be at least 1")
    t0 = time.monotonic()
    route_warnings(args.out)
    announce_compilation()
    out = run_demo(args.out, n_rows=args.rows, workers=args.workers, resume=args.resume)
    print(f"demo finished in {time.monotonic() - t0:.0f} s; outputs in {os.path.abspath(args.out)}/:")
    print(f"  measurements.csv (synthetic data), truth.csv (true parameters), summary.csv, "
          f"hazard.json, rows/*.nc")
    for f in out["figures"]:
        print(f"  {os.path.relpath(f, args.out)}")
    print(f"Caution: {CAUTION}")
    return 0
