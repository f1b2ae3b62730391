"""`ventsource compare`: the same data under several prior files."""
import os

from ventsource.cli.series_options import (_check_series_args, _default_sigma, _inference_options,
                                          _window_option, add_series_options)
from ventsource.cli.shared import _load_prior, announce_compilation, route_warnings
from ventsource.common.errors import InputError


def add_parser(sub):
    cp = sub.add_parser("compare", help="the same data under several prior files")
    cp.add_argument("data", help="measurement CSV (format: docs/measurements.md)")
    cp.add_argument("--prior", required=True, action="append",
                    help="prior file (TOML); repeat the option for two or more")
    cp.add_argument("--out", required=True, metavar="FOLDER", help="output folder (created)")
    add_series_options(cp)
    cp.set_defaults(handler=cmd_compare)


def cmd_compare(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.compare import run_compare
    from ventsource import read_measurements
    _check_series_args(args)
    if args.min_segment_rows is not None or args.change_prior is not None:  # not passed on by compare
        raise InputError("--min-segment-rows and --change-prior apply to ventsource run; compare's "
                         "--window auto uses the defaults (4 rows, geometric:0.5)")
    if len(args.prior) < 2:
        raise InputError("compare: give at least two --prior files")
    specs = [_load_prior(p) for p in args.prior]
    names = [s.name for s in specs]
    if len(set(names)) != len(names):
        raise InputError(f"compare: prior files share a name ({', '.join(names)}); "
                         "each needs its own metadata.name")
    series = {path: read_measurements(args.data, default_sigma=_default_sigma(args, spec))
              for path, spec in zip(args.prior, specs)}
    route_warnings(args.out)
    announce_compilation()
    out = run_compare(series, args.prior, args.out, seed=args.seed, workers=args.workers,
                      resume=args.resume, options=_inference_options(args),
                      dask_scheduler=args.dask_scheduler, dask_local=args.dask_local,
                      window=_window_option(args), oversubscribe=args.oversubscribe)
    print(f"comparison in {args.out}/: {', '.join(os.path.relpath(p, args.out) for p in out)}")
    print(f"Caution: {CAUTION}")
    return 0
