"""`ventsource prior-predictive`: prior draws through the model, with and without scrubbing."""
import argparse

from ventsource.cli.shared import _load_prior, announce_compilation
from ventsource.common.errors import InputError


def add_parser(sub):
    pp = sub.add_parser("prior-predictive",
                        help="draw the prior, run the model with and without scrubbing")
    pp.add_argument("--prior", required=True, help="prior file (TOML), see docs/prior-files.md")
    pp.add_argument("-n", type=int, default=20000, help="number of prior draws per model")
    pp.add_argument("--table", metavar="FILE",
                    help="CSV file to write: parameters and ratios of every draw (a README "
                         "FILE.README.txt with the caution is written beside it)")
    pp.add_argument("--out", help=argparse.SUPPRESS)  # a folder elsewhere: refused here, see cmd
    pp.add_argument("--plot", metavar="FILE", help="PNG file of the ratio-ratio plane")
    pp.add_argument("--data", metavar="FILE", help="measurement CSV to overlay on the plot")
    pp.add_argument("--x-ratio", default="H2S/SO2", help="gas ratio on the horizontal axis")
    pp.add_argument("--y-ratio", default="SO2/CO2", help="gas ratio on the vertical axis")
    pp.add_argument("--seed", type=int, default=0, help="seed of the prior draws")
    pp.set_defaults(handler=cmd_prior_predictive)


def cmd_prior_predictive(args):
    from ventsource.workflow.prior_predictive import excluded_note, run_prior_predictive
    if args.out is not None:
        raise InputError("prior-predictive: --out names a folder in the other commands; "
                         "give the CSV file with --table FILE (and the figure with --plot FILE)")
    if args.table is None:
        raise InputError("prior-predictive: give the CSV file to write with --table FILE")
    if args.n < 1:
        raise InputError("-n must be at least 1")
    spec = _load_prior(args.prior)
    announce_compilation()
    table = run_prior_predictive(spec, args.n, args.table, plot_path=args.plot, data_path=args.data,
                                 x_ratio=args.x_ratio, y_ratio=args.y_ratio, seed=args.seed)
    print(excluded_note(table))
    print(f"wrote {args.table}, {args.table}.README.txt" + (f" and {args.plot}" if args.plot else ""))
    from ventsource.workflow.calibration_report import calibration_lines
    print("\n".join(calibration_lines(spec, table)))
    return 0
