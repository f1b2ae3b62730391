"""`ventsource run`: every row of a measurement file inverted into a run folder."""
import os

from ventsource.cli.series_options import (_budget_gap, _check_series_args, _default_sigma,
                                          _inference_options, _window_option, add_series_options)
from ventsource.cli.shared import _load_prior, announce_compilation, route_warnings
from ventsource.common.errors import InputError


def add_parser(sub):
    rp = sub.add_parser("run", help="invert every row of a measurement file")
    rp.add_argument("data", help="measurement CSV (format: docs/measurements.md)")
    rp.add_argument("--prior", required=True, help="prior file (TOML), see docs/prior-files.md")
    rp.add_argument("--out", required=True, metavar="FOLDER", help="output folder (created)")
    add_series_options(rp)
    rp.add_argument("--corner", nargs="+", default=[], metavar="ID",
                    help="row identifiers to draw corner plots for")
    rp.add_argument("--shift-reference", type=int, default=0, metavar="N",
                    help="simulate N data sets from the prior and invert them, to say how far data "
                         "usually move P(M0) (README.txt, hazard.json; about 1-2 CPU-s each; "
                         "default 0: not run)")
    rp.add_argument("--no-figures", action="store_true", help="tables and netCDF only")
    rp.set_defaults(handler=cmd_run)


def cmd_run(args):
    import ventsource as vs
    from ventsource.common.caution import CAUTION
    _check_series_args(args)
    from ventsource.workflow.shift_reference import checked_count
    checked_count(args.shift_reference, "--shift-reference")
    spec = _load_prior(args.prior)
    options = _inference_options(args)
    series = vs.read_measurements(args.data, default_sigma=_default_sigma(args, spec))  # checks first
    for rid in args.corner:
        if rid not in series.ids:
            raise InputError(f"--corner: '{rid}' is not an id in {args.data}")
    window = _window_option(args)
    route_warnings(args.out)
    announce_compilation()
    vs.run(series, args.prior, args.out, seed=args.seed, workers=args.workers, resume=args.resume,
           window=window, dask_scheduler=args.dask_scheduler, dask_local=args.dask_local,
           oversubscribe=args.oversubscribe, budget_max_gap_days=_budget_gap(args),
           shift_reference=args.shift_reference, **options)
    figs = []
    if not args.no_figures:
        from ventsource.workflow.figures import run_figures
        figs = run_figures(args.out, series, spec, corner_ids=args.corner,
                           title="Gas-ratio inversion, " + ("by windows" if window else "row by row"))
        from ventsource.workflow.report_html import write_report
        write_report(args.out)  # the page again, now with the figures embedded
    print(f"results in {args.out}/: report.html, summary.csv, hazard.json, rows/*.nc"
          + (", " + ", ".join(os.path.relpath(f, args.out) for f in figs) if figs else ""))
    print(f"Caution: {CAUTION}")
    return 0
