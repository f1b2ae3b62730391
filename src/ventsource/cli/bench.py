"""`ventsource bench`: speed benchmarks as ratios to a reference in the same run."""


def add_parser(sub):
    bp = sub.add_parser("bench", help="speed benchmarks, as ratios to a reference in the same run")
    bp.add_argument("--quick", action="store_true", help="smaller batches (for a smoke test)")
    bp.add_argument("--only", choices=["speciation", "forward", "inference", "window", "watch", "emcee", "series", "ratios", "reader"], action="append",
                    help="run only the named benchmark sections")
    bp.set_defaults(handler=cmd_bench)


def cmd_bench(args):
    from ventsource.bench.speed import run_benchmarks
    run_benchmarks(quick=args.quick, only=args.only)
    return 0
