"""Command line: `ventsource <command> ...`.

Every user error is printed as one line on stderr with exit status 2.
"""
import argparse
import json
import math
import os
import sys

from ventsource import __version__
from ventsource.common.errors import InputError

EXIT_USAGE = 2


class _HelpFormatter(argparse.ArgumentDefaultsHelpFormatter):
    """Shows '(default: X)' where a default is used as is; None and flags say nothing."""

    def _get_help_string(self, action):
        text = action.help or ""
        d = action.default
        if d is None or d is False or d is argparse.SUPPRESS or d == [] or "default" in text \
                or isinstance(action, argparse._VersionAction):
            return text
        return text + " (default: %(default)s)"


class _Parser(argparse.ArgumentParser):
    def __init__(self, *args, **kwargs):
        kwargs.setdefault("formatter_class", _HelpFormatter)
        super().__init__(*args, **kwargs)

    def error(self, message):  # one line instead of argparse's usage block
        raise InputError(f"{self.prog}: {message}")


def _number(name):
    def parse(text):
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} '{text}' is not a number") from None
        if not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"{name} '{text}' is not finite")
        return value
    return parse


def _check_range(label, value, bounds, unit=""):
    lo, hi = bounds
    if not lo <= value <= hi:
        raise InputError(f"{label} {value:g}{unit} is outside the supported range "
                         f"{lo:g} to {hi:g}{unit}")


def build_parser():
    parser = _Parser(prog="ventsource",
                     description="Bayesian inversion of volcanic gas ratios.")
    parser.add_argument("--version", action="version", version=f"ventsource {__version__}")
    sub = parser.add_subparsers(dest="command", parser_class=_Parser)
    _add_speciate_parser(sub)
    _add_forward_parser(sub)
    _add_prior_predictive_parser(sub)
    _add_series_parsers(sub)
    _add_demo_priors_bench_parsers(sub)
    from ventsource.cli import ratios_command
    ratios_command.add_parser(sub)
    return parser


def _add_speciate_parser(sub):
    sp = sub.add_parser("speciate", help="equilibrium C-O-H-S gas at fixed T, P and fO2")
    sp.add_argument("--temperature-c", type=_number("--temperature-c"), required=True,
                    help="temperature in degrees Celsius")
    sp.add_argument("--pressure-bar", type=_number("--pressure-bar"), required=True,
                    help="total pressure in bar")
    redox = sp.add_mutually_exclusive_group(required=True)
    redox.add_argument("--dfmq", type=_number("--dfmq"), help="log fO2 offset from FMQ")
    redox.add_argument("--dnno", type=_number("--dnno"), help="log fO2 offset from NNO")
    redox.add_argument("--log-fo2", type=_number("--log-fo2"), help="absolute log10 fO2 (bar)")
    sp.add_argument("--bulk", required=True,
                    help="molar parent-gas composition, e.g. H2O=90,CO2=8,SO2=2")
    sp.add_argument("--eos", choices=["real", "ideal"], default="real",
                    help="gas equation of state: real (fugacity coefficients) or ideal")
    sp.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    sp.set_defaults(handler=cmd_speciate)


def _add_forward_parser(sub):
    fp = sub.add_parser("forward", help="run the forward model for one set of parameters")
    fp.add_argument("--prior", required=True, help="prior file (TOML) or shipped prior name (see `ventsource priors`)")
    fp.add_argument("--set", nargs="+", action="extend", default=[], metavar="NAME=VALUE",
                    help="parameter values, e.g. pressure_bar=200 temperature_c=1100; each name once")
    fp.add_argument("--ratios", default="SO2/CO2,H2S/SO2,H2O/CO2,CO2/ST,H2/H2O,CO/CO2",
                    help="comma-separated gas ratios to print (molar)")
    fp.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    fp.set_defaults(handler=cmd_forward)


def _add_prior_predictive_parser(sub):
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


def _add_series_parsers(sub):
    """`run` and `compare`: the commands that invert a measurement file."""
    rp = sub.add_parser("run", help="invert every row of a measurement file")
    rp.add_argument("data", help="measurement CSV (format: docs/measurements.md)")
    rp.add_argument("--prior", required=True, help="prior file (TOML), see docs/prior-files.md")
    rp.add_argument("--out", required=True, metavar="FOLDER", help="output folder (created)")
    _series_options(rp)
    rp.add_argument("--corner", nargs="+", default=[], metavar="ID",
                    help="row identifiers to draw corner plots for")
    rp.add_argument("--no-figures", action="store_true", help="tables and netCDF only")
    rp.set_defaults(handler=cmd_run)

    cp = sub.add_parser("compare", help="the same data under several prior files")
    cp.add_argument("data", help="measurement CSV (format: docs/measurements.md)")
    cp.add_argument("--prior", required=True, action="append",
                    help="prior file (TOML); repeat the option for two or more")
    cp.add_argument("--out", required=True, metavar="FOLDER", help="output folder (created)")
    _series_options(cp)
    cp.set_defaults(handler=cmd_compare)


def _add_demo_priors_bench_parsers(sub):
    dp = sub.add_parser("demo", help="synthetic series at the fictional Mount Kerrow, inverted",
                        description="Make a synthetic series at the fictional volcano Mount Kerrow "
                                    "with known truth, invert it by windows and row by row, and "
                                    "draw every figure.")
    dp.add_argument("--out", default="demo-output", metavar="FOLDER", help="output folder (created)")
    dp.add_argument("--rows", type=int, default=60, help="number of synthetic measurements")
    dp.add_argument("--workers", type=int, default=2, help="local worker processes")
    dp.add_argument("--resume", action="store_true", help="keep finished rows, invert the rest")
    dp.set_defaults(handler=cmd_demo)

    lp = sub.add_parser("priors", help="list the shipped prior files (usable by name: --prior NAME)")
    lp.set_defaults(handler=cmd_priors)

    bp = sub.add_parser("bench", help="speed benchmarks, as ratios to a reference in the same run")
    bp.add_argument("--quick", action="store_true", help="smaller batches (for a smoke test)")
    bp.add_argument("--only", choices=["speciation", "forward", "inference", "window", "emcee", "series", "ratios", "reader"], action="append",
                    help="run only the named benchmark sections")
    bp.set_defaults(handler=cmd_bench)


def cmd_speciate(args):
    import numpy as np

    from ventsource.chemistry import buffers
    from ventsource.common import limits
    from ventsource.chemistry.bulk_gas import element_totals, parse_bulk
    from ventsource.chemistry.species import SPECIES
    from ventsource.chemistry.speciation import speciate, STATUS_OK

    _check_range("--temperature-c", args.temperature_c, limits.TEMPERATURE_C, " C")
    announce_compilation()
    _check_range("--pressure-bar", args.pressure_bar, limits.PRESSURE_BAR, " bar")
    t_k = args.temperature_c + 273.15
    p = args.pressure_bar
    if args.dfmq is not None:
        dfmq = args.dfmq
    elif args.dnno is not None:
        dfmq = float(buffers.dfmq_from_dnno(args.dnno, t_k, p))
    else:
        dfmq = float(buffers.dfmq_from_log10_fo2(args.log_fo2, t_k, p))
    _check_range("redox offset dFMQ", dfmq, limits.DFMQ)
    amounts = parse_bulk(args.bulk)
    h, c, s = element_totals(amounts)
    log_fo2 = float(buffers.log10_fo2_from_dfmq(dfmq, t_k, p))
    result = speciate(np.array([t_k]), np.array([p]), np.array([log_fo2]), h, c, s, eos=args.eos)
    if result.status[0] != STATUS_OK:
        raise InputError("speciation did not converge for this state; please report it with "
                         "the command line you used")
    x = result.mole_fractions[0]
    phi = result.fugacity_coefficients[0]
    out = {
        "temperature_c": args.temperature_c,
        "pressure_bar": p,
        "dfmq": dfmq,
        "dnno": float(buffers.dnno_from_dfmq(dfmq, t_k, p)),
        "log_fO2": log_fo2,
        "eos": args.eos,
        "bulk": amounts,
        "species": {name: float(x[i]) for i, name in enumerate(SPECIES)},
        "fugacity_coefficients": {name: float(phi[i]) for i, name in enumerate(SPECIES)},
        "fugacities_bar": {name: float(x[i] * phi[i] * p) for i, name in enumerate(SPECIES)},
        "iterations": int(result.iterations[0]),
    }
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    print(f"Gas at {args.temperature_c:g} C, {p:g} bar, dFMQ {dfmq:+.2f} "
          f"(log fO2 {log_fo2:.3f}, dNNO {out['dnno']:+.2f}), {args.eos} gas")
    print(f"{'species':<8}{'mole fraction':>16}{'mol %':>10}{'phi':>10}{'fugacity bar':>15}")
    for i in np.argsort(-x):
        name = SPECIES[i]
        print(f"{name:<8}{x[i]:>16.6e}{100 * x[i]:>10.4f}{phi[i]:>10.4f}{x[i] * phi[i] * p:>15.6e}")
    print(f"H2S/SO2 {x[SPECIES.index('H2S')] / x[SPECIES.index('SO2')]:.4g}   "
          f"SO2/CO2 {x[SPECIES.index('SO2')] / x[SPECIES.index('CO2')]:.4g}   "
          f"H2O/CO2 {x[SPECIES.index('H2O')] / x[SPECIES.index('CO2')]:.4g}")
    return 0


def _load_prior(path):
    from ventsource.inference.priors import PriorFileError, load_prior_file
    try:
        return load_prior_file(path)
    except PriorFileError as exc:
        raise InputError(str(exc)) from None


def cmd_forward(args):
    import numpy as np

    from ventsource.forward.model import ForwardModel

    spec = _load_prior(args.prior)
    announce_compilation()
    values = _set_values(args, spec)
    theta = _forward_theta(args, spec, values)
    ratio_names = tuple(r.strip() for r in args.ratios.split(",") if r.strip())
    model = ForwardModel(spec, ratio_names)
    state = model.state(np.array([theta]))
    status = int(state["status"][0])
    label = {0: "gas", 1: "no gas: the magma is undersaturated at this pressure",
             2: "solver failure", 3: "zero prior mass: D_S x S >= 1 (the first gas would be more "
             "than all the sulfur)"}[status]
    out = _forward_summary(args, spec, theta, state, ratio_names, label)
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    _print_forward(args, out, label, status, state["gas"][0])
    return 0


def _set_values(args, spec):
    """--set NAME=VALUE items -> {name: value}, each a known parameter in its physical range."""
    from ventsource.forward.model import UNITS
    from ventsource.inference.priors import PHYSICAL_LIMITS
    values = {}
    for item in args.set:
        if "=" not in item:
            raise InputError(f"--set: '{item}' is not NAME=VALUE")
        name, text = item.split("=", 1)
        if name in values:
            raise InputError(f"--set: {name} is given twice; give each parameter once")
        if name not in spec.parameter_names:
            raise InputError(f"--set: unknown parameter '{name}' for {args.prior} "
                             f"(parameters: {', '.join(spec.parameter_names)})")
        try:
            value = float(text)
        except ValueError:
            raise InputError(f"--set: {name} value '{text}' is not a number") from None
        lo, hi, lo_open, hi_open = PHYSICAL_LIMITS[name]
        if not math.isfinite(value) or value < lo or value > hi or (lo_open and value == lo) \
                or (hi_open and value == hi):
            raise InputError(f"--set: {name}={text} is unphysical or outside the supported range "
                             f"{lo:g} to {hi:g} ({UNITS.get(name, '')})")
        values[name] = value
    return values


def _forward_theta(args, spec, values):
    """Full parameter vector: the --set values, else the prior's fixed values."""
    fixed = getattr(spec, "fixed_values", {}) or {}
    theta = []
    for name in spec.parameter_names:
        if name in values:
            theta.append(values[name])
        elif name in fixed:
            theta.append(float(fixed[name]))
        else:
            raise InputError(f"--set: missing {name}; every free parameter of {args.prior} needs a "
                             f"value ({', '.join(n for n in spec.free_names if n not in values)})")
    return theta


def _forward_summary(args, spec, theta, state, ratio_names, label):
    """The `forward` command's JSON object (NaN and inf as null)."""
    from ventsource.chemistry.species import SPECIES
    gas = state["gas"][0]
    return {
        "prior": args.prior,
        "parameters": dict(zip(spec.parameter_names, theta)),
        "status": label,
        "saturation_pressure_bar": _finite_or_none(state["saturation_pressure_bar"][0]),
        "open_path_started_at_cap": bool(state["closed_above_cap"][0]),
        "gas_wt_fraction": float(state["gas_wt_fraction"][0]),
        "gas": {n: _finite_or_none(gas[i]) for i, n in enumerate(SPECIES)},
        "magmatic_gas": {n: _finite_or_none(state["magmatic_gas"][0][i]) for i, n in enumerate(SPECIES)},
        "melt": {"h2o_wt": float(state["melt_h2o_wt"][0]), "co2_ppm": float(state["melt_co2_ppm"][0]),
                 "s_ppm": float(state["melt_s_ppm"][0])},
        "ratios": {r: _finite_or_none(state["ratios"][0][k]) for k, r in enumerate(ratio_names)},
        "models": dict(spec.models),
        **_redox_summary(spec, theta, state),
    }


def _redox_summary(spec, theta, state):
    """dFMQ at P, the sulfur phase, and the melt's redox path (workflow/redox_path.py)."""
    from ventsource.forward.model import ForwardModel
    from ventsource.workflow.redox_path import PHASE_NAMES, redox_path
    d = state["dfmq_at_pressure"][0]
    return {"dfmq_at_pressure": _finite_or_none(d),
            "sulfur_phase": PHASE_NAMES.get(int(state["sulfur_phase"][0]), "none"),
            "redox_path": redox_path(ForwardModel(spec), theta, float(state["saturation_pressure_bar"][0]))}


def _print_forward(args, out, label, status, gas):
    from ventsource.chemistry.species import SPECIES
    print(f"Forward model, prior {args.prior}")
    print("  " + ", ".join(f"{k}={v:g}" for k, v in out["parameters"].items()))
    print(f"  status: {label}")
    psat = out["saturation_pressure_bar"]
    print(f"  saturation pressure: {psat:.1f} bar" if psat is not None else
          "  saturation pressure: above the model's 20 kbar search cap")
    if out["open_path_started_at_cap"]:
        print("  open-system path started at the 20 kbar cap (gas deeper than the cap stays with its magma)")
    if status == 0:
        print(f"  gas mass fraction: {out['gas_wt_fraction']:.4g}")
        print(f"  melt: H2O {out['melt']['h2o_wt']:.3f} wt%, CO2 {out['melt']['co2_ppm']:.1f} ppm, "
              f"S {out['melt']['s_ppm']:.1f} ppm")
        print("  gas after scrubbing (mol %): " + ", ".join(
            f"{n} {100 * gas[i]:.4g}" for i, n in enumerate(SPECIES) if gas[i] > 1e-6))
        print("  ratios: " + ", ".join(f"{r} {v:.4g}" for r, v in out["ratios"].items()))
        print(f"  melt dFMQ at this pressure: {out['dfmq_at_pressure']:+.3f} "
              f"(redox {out['models'].get('redox', 'buffered')}); sulfur phase: {out['sulfur_phase']}")
    print("  redox path (P bar: dFMQ, Fe3+/Fe): " + "; ".join(
        f"{q['pressure_bar']:.4g}: {q['dfmq']:+.2f}, {q['fe3_fraction']:.3f}" for q in out["redox_path"]))


def _finite_or_none(value):
    value = float(value)
    return value if math.isfinite(value) else None


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
    table = run_prior_predictive(spec, args.n, args.table, plot_path=args.plot,
                                 data_path=args.data, x_ratio=args.x_ratio, y_ratio=args.y_ratio,
                                 seed=args.seed)
    print(excluded_note(table))
    print(f"wrote {args.table}, {args.table}.README.txt" + (f" and {args.plot}" if args.plot else ""))
    return 0


COMPILE_NOTICE = "compiling the model's kernels (first run only, about 30 s)"


def kernel_cache_empty():
    """True when numba has no cached kernels (*.nbi) beside the kernel modules or in
    NUMBA_CACHE_DIR: the first call then compiles."""
    import glob
    import ventsource
    root = os.path.dirname(ventsource.__file__)
    places = [os.path.join(root, sub, "__pycache__", "*.nbi") for sub in ("chemistry", "magma")]
    if any(glob.glob(p) for p in places):
        return False
    # numba falls back to a per-user cache when the package folder is read-only
    for extra in (os.environ.get("NUMBA_CACHE_DIR"), os.path.expanduser("~/.cache/numba")):
        for path in glob.glob(os.path.join(extra or "/nonexistent", "**", "*.nbi"), recursive=True):
            if "ventsource" in path:
                return False
    return True


def announce_compilation(stream=None):
    """Say once on stderr why the first call waits."""
    if kernel_cache_empty():
        print(COMPILE_NOTICE, file=stream or sys.stderr, flush=True)


def route_warnings(out_dir):
    """Library warnings go to OUT/warnings.log instead of the progress lines."""
    import warnings
    path = os.path.join(out_dir, "warnings.log")

    def to_file(message, category, filename, lineno, file=None, line=None):
        # the folder is made (after its checks) by the run itself; nothing is created here
        try:
            with open(path, "a") as fh:
                fh.write(warnings.formatwarning(message, category, filename, lineno, line))
        except OSError:
            pass
    warnings.showwarning = to_file


def _series_options(p):
    p.add_argument("--workers", type=int, default=1,
                   help="local worker processes (capped at the rows to invert and the cores)")
    p.add_argument("--oversubscribe", action="store_true", help="allow more --workers than cores")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--dask-scheduler", metavar="ADDRESS",
                       help="run on a dask.distributed scheduler, e.g. tcp://10.0.0.5:8786")
    where.add_argument("--dask-local", action="store_true",
                       help="run on a local dask.distributed cluster of --workers processes")
    p.add_argument("--resume", action="store_true", help="keep finished rows, invert the rest")
    p.add_argument("--seed", type=int, default=0,
                   help="run seed; each row's seed derives from it and the row id")
    p.add_argument("--window", default=None, metavar="SPAN|1|column",
                   help="rows that share one magma source: a time span such as 30d, 12h or 2w "
                        "(consecutive windows from the first row), 'column' (the file's window "
                        "column), or 1 (every row alone); default: the file's window column if "
                        "it has one, else 1")
    p.add_argument("--engine", choices=["smc", "emcee"], default=None,
                   help="sampling engine for row-by-row inversion (default: smc)")
    p.add_argument("--budget-max-gap", type=float, default=None, metavar="DAYS",
                   help="sulfur budget (files with flux columns): longest interval between "
                        "measurements that the cumulative retained sulfur bridges (default 30)")
    p.add_argument("--sigma", action="append", default=None, metavar="[RATIO=]VALUE",
                   help="default relative 1-sigma: a number for every ratio and/or RATIO=VALUE "
                        "per column, repeatable (else the prior file's likelihood.relative_sigma)")
    p.add_argument("--target-ess", type=float, default=None,
                   help="emcee engine only: effective sample size it aims for (default 1000)")
    p.add_argument("--max-steps", type=int, default=None,
                   help="emcee engine only: cap on MCMC steps per model (default 20000)")
    p.add_argument("--infer-option", action="append", default=[], metavar="NAME=VALUE",
                   help="any other option of ventsource.infer, e.g. n_proposal=5000 (repeatable)")


def _inference_options(args):
    opts = {}
    if args.target_ess is not None:
        if not args.target_ess > 0:
            raise InputError("--target-ess must be positive")
        opts["target_ess"] = float(args.target_ess)
    if args.max_steps is not None:
        if args.max_steps < 1:
            raise InputError("--max-steps must be at least 1")
        opts["max_steps"] = int(args.max_steps)
    from ventsource.inference.one_measurement import _DEFAULTS
    for item in args.infer_option:
        name, sep, text = item.partition("=")
        if not sep or name not in _DEFAULTS:
            raise InputError(f"--infer-option '{item}': expected NAME=VALUE with NAME one of "
                             f"{', '.join(sorted(_DEFAULTS))}")
        try:
            value = json.loads(text)
        except ValueError:
            value = text
        opts[name] = value
    if getattr(args, "engine", None):
        opts["engine"] = args.engine
    from ventsource.inference.option_rules import OptionError, check_option
    for name, value in opts.items():  # type and range of every option, before anything runs
        try:
            opts[name] = check_option(name, value, _DEFAULTS)
        except OptionError as exc:
            raise InputError(f"--infer-{exc}") from None
    return opts


def _window_option(args):
    from ventsource.workflow.windows import parse_window_option
    return parse_window_option(args.window) if args.window is not None else None


def _check_series_args(args):
    if args.workers < 1:
        raise InputError("--workers must be at least 1")


def _default_sigma(args, spec):
    """--sigma items -> float or {ratio: sigma, "*": fallback} for read_measurements."""
    fallback = float(spec.likelihood.get("relative_sigma", 0.15))
    if not args.sigma:
        return fallback
    out = {"*": fallback}
    for item in args.sigma:
        name, sep, text = item.rpartition("=")
        try:
            value = float(text)
        except ValueError:
            raise InputError(f"--sigma '{item}': '{text}' is not a number") from None
        if not (math.isfinite(value) and 0 < value <= 5):
            raise InputError(f"--sigma '{item}': a relative 1-sigma must be in (0, 5]")
        out[name.strip() if sep else "*"] = value
    return out


def cmd_run(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.measurements import read_measurements
    from ventsource.workflow.series import run_series
    _check_series_args(args)
    spec = _load_prior(args.prior)
    options = _inference_options(args)
    series = read_measurements(args.data, default_sigma=_default_sigma(args, spec))  # checks first
    for rid in args.corner:
        if rid not in series.ids:
            raise InputError(f"--corner: '{rid}' is not an id in {args.data}")
    window = _window_option(args)
    route_warnings(args.out)
    announce_compilation()
    run_series(series, args.prior, args.out, seed=args.seed, workers=args.workers,
               resume=args.resume, options=options, dask_scheduler=args.dask_scheduler,
               dask_local=args.dask_local, window=window, oversubscribe=args.oversubscribe,
               budget_max_gap_days=_budget_gap(args))
    figs = []
    if not args.no_figures:
        from ventsource.workflow.figures import run_figures
        figs = run_figures(args.out, series, spec, corner_ids=args.corner,
                           title="Gas-ratio inversion, " + ("by windows" if window else "row by row"))
    print(f"results in {args.out}/: summary.csv, hazard.json, rows/*.nc"
          + (", " + ", ".join(os.path.relpath(f, args.out) for f in figs) if figs else ""))
    print(f"Caution: {CAUTION}")
    return 0


def _budget_gap(args):
    gap = getattr(args, "budget_max_gap", None)
    if gap is not None and not gap > 0:
        raise InputError(f"--budget-max-gap {gap:g}: give a positive number of days")
    return gap


def cmd_compare(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.compare import run_compare
    from ventsource.workflow.measurements import read_measurements
    _check_series_args(args)
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


def cmd_priors(args):
    from ventsource.inference.priors.shipped import shipped_prior_descriptions
    entries = shipped_prior_descriptions()
    if not entries:
        raise InputError("no shipped prior files found in this installation")
    width = max(len(name) for name, _ in entries)
    for name, text in entries:
        print(f"{name:<{width}}  {text}")
    return 0


def _resolve_prior_args(args):
    """--prior NAME of a shipped prior -> its path, wherever a prior file path is accepted."""
    from ventsource.inference.priors.shipped import resolve_prior
    prior = getattr(args, "prior", None)
    if isinstance(prior, list):
        args.prior = [resolve_prior(p) for p in prior]
    elif prior is not None:
        args.prior = resolve_prior(prior)


def cmd_bench(args):
    from ventsource.bench.speed import run_benchmarks
    run_benchmarks(quick=args.quick, only=args.only)
    return 0


def main(argv=None):
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "handler", None):
            parser.print_help()
            return EXIT_USAGE
        if args.command in ("run", "compare", "demo", "bench"):
            from ventsource.common.threads import single_thread_environment
            single_thread_environment()  # before NumPy loads (the prior lookup loads it)
        _resolve_prior_args(args)
        return args.handler(args)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as exc:  # a write the run could not make (disk full, read-only folder...)
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"error: {where}cannot read or write ({exc.strerror or exc})", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
