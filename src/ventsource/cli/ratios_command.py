"""`ventsource ratios RAW.csv --out measurements.csv`: raw in-plume sensor data to gas ratios.

The parser and runner of the subcommand; the work is in ventsource.workflow.plume.
"""
import argparse
import math
import os

from ventsource.common.errors import InputError

GAS_VALUE_OPTIONS = {"noise": "noise_ppmv", "detection_limit": "detection_limit_ppmv",
                     "max_reading": "max_reading_ppmv", "min_range": "min_range_ppmv", "lag": "lag_s"}


def _name_values(option, items, allow_negative=False):
    """['SO2=0.1', 'CO2=2,H2S=0.05'] -> {'SO2': 0.1, 'CO2': 2.0, 'H2S': 0.05}."""
    out = {}
    for item in items or []:
        for part in item.split(","):
            name, sep, text = part.partition("=")
            try:
                value = float(text)
            except ValueError:
                value = math.nan
            if not sep or not name.strip() or not math.isfinite(value) or (value < 0 and not allow_negative):
                raise InputError(f"{option} '{part}': expected GAS=NUMBER"
                                 + ("" if allow_negative else " with NUMBER >= 0"))
            out[name.strip()] = value
    return out


def add_parser(subparsers):
    p = subparsers.add_parser("ratios", help="raw in-plume sensor concentrations -> measurement file of "
                              "gas ratios (regression per window)")
    p.add_argument("raw", help="raw CSV: time (ISO 8601, Z or offset) and columns such as 'SO2 [ppmv]'")
    p.add_argument("--out", required=True, help="measurement CSV to write (read by `ventsource run`)")
    how = p.add_mutually_exclusive_group()
    how.add_argument("--window", default="30min", help="fixed windows, e.g. 10min, 30min, 1h (default 30min)")
    how.add_argument("--plume-threshold", metavar="GAS=PPMV",
                     help="one window per plume passage: the gas above PPMV, e.g. SO2=0.5")
    p.add_argument("--pad", default="30s", help="plume passages: background kept each side (default 30s)")
    p.add_argument("--merge-gap", default="10s", help="plume passages closer than this merge (default 10s)")
    p.add_argument("--max-duration", default="1h", help="plume passages longer than this are cut (default 1h)")
    p.add_argument("--ratios", help="comma-separated GAS/GAS list (default: SO2/CO2, H2S/SO2, H2O/CO2, "
                   "H2/SO2 as far as the file has the gases)")
    p.add_argument("--tracer", help="plume gas for lags and background (default: the threshold gas, else SO2)")
    p.add_argument("--method", choices=["york", "ols"], default="york",
                   help="york: errors in both gases (York et al. 2004, default); ols: ordinary least squares")
    p.add_argument("--noise", action="append", metavar="GAS=PPMV",
                   help="sensor 1-sigma noise (else estimated from the window's background)")
    p.add_argument("--detection-limit", action="append", metavar="GAS=PPMV",
                   help="detection limit (else --detection-sigmas x noise)")
    p.add_argument("--detection-sigmas", type=float, default=3.0,
                   help="detection limit in units of the sensor noise, where --detection-limit is not given")
    p.add_argument("--max-reading", action="append", metavar="GAS=PPMV",
                   help="instrument maximum: windows with a reading at or above it drop that gas")
    p.add_argument("--h2s-so2-cross-sensitivity", type=float, default=0.0, metavar="FRACTION",
                   help="H2S sensor signal per ppmv SO2, subtracted (default 0: no correction)")
    p.add_argument("--lag", action="append", metavar="GAS=SECONDS",
                   help="fixed lag of a gas behind the tracer (else searched by cross-correlation)")
    p.add_argument("--max-lag-s", type=float, default=30.0, help="lag search bound (0: no search)")
    p.add_argument("--min-lag-correlation", type=float, default=0.8,
                   help="a window's own lag is used when its peak correlation reaches this and it lies "
                   "inside the bound; else the median of recent accepted lags (marked '~' in the output)")
    p.add_argument("--min-points", type=int, default=30, help="windows with fewer points give no ratio")
    p.add_argument("--min-range", action="append", metavar="GAS=PPMV",
                   help="least range (2nd-98th percentile) of the x gas of a ratio")
    p.add_argument("--min-range-noise", type=float, default=10.0,
                   help="least x-gas range in units of its noise (default 10)")
    p.add_argument("--min-r2", type=float, default=0.6, help="ratios of a poorer fit (R^2 below this) are flagged")
    p.add_argument("--max-relative-sigma", type=float, default=1.0,
                   help="ratios with a larger relative 1-sigma are flagged")
    p.add_argument("--keep-flagged", action="store_true",
                   help="write ratios failing --min-r2 or --max-relative-sigma (flag in quality columns)")
    p.add_argument("--no-mswd-scaling", action="store_true",
                   help="York: do not widen the slope error by sqrt(MSWD) when MSWD > 1")
    p.add_argument("--max-gap-s", type=float, default=10.0, help="windows with a longer gap are dropped")
    p.add_argument("--units", action="append", metavar="NAME=UNIT",
                   help="unit of a column without one in its header, e.g. SO2=ppmv, P=hPa")
    p.add_argument("--assume-utc", action="store_true", help="times without offset are UTC")
    p.add_argument("--chunk-rows", type=int, default=200_000, help="rows read at a time (memory bound)")
    p.add_argument("--figures", metavar="DIR", help="write ratios_overview.png here")
    p.add_argument("--window-figures", action="store_true", help="also one PNG per window in --figures DIR")
    p.set_defaults(handler=run)
    return p


def _units(items):
    out = {}
    for item in items or []:
        for part in item.split(","):
            name, sep, unit = part.partition("=")
            if not sep or not name.strip() or not unit.strip():
                raise InputError(f"--units '{part}': expected NAME=UNIT, e.g. SO2=ppmv")
            out[name.strip()] = unit.strip()
    return out


def settings_from_args(args):
    from ventsource.workflow.plume.settings import RatioSettings
    from ventsource.workflow.plume.windows import parse_duration_s
    s = RatioSettings(ratios=tuple(r.strip() for r in args.ratios.split(",") if r.strip())
                      if args.ratios else None, method=args.method)
    for opt, attr in GAS_VALUE_OPTIONS.items():
        setattr(s, attr, _name_values("--" + opt.replace("_", "-"), getattr(args, opt), opt == "lag"))
    if any(v <= 0 for v in s.noise_ppmv.values()):
        raise InputError("--noise: a sensor noise must be positive")
    if args.plume_threshold:
        threshold = _name_values("--plume-threshold", [args.plume_threshold])
        if len(threshold) != 1:
            raise InputError("--plume-threshold: give one GAS=PPMV, e.g. SO2=0.5")
        ((gas, level),) = threshold.items()
        s.plume_threshold, s.window_s, s.tracer = level, None, gas
    else:
        s.window_s = parse_duration_s(args.window, "--window")
    if args.tracer:
        s.tracer = args.tracer
    s.pad_s = parse_duration_s(args.pad, "--pad") if args.pad not in ("0", "0s") else 0.0
    s.merge_gap_s = parse_duration_s(args.merge_gap, "--merge-gap")
    s.max_duration_s = parse_duration_s(args.max_duration, "--max-duration")
    for name in ("detection_sigmas", "max_lag_s", "min_lag_correlation", "h2s_so2_cross_sensitivity",
                 "min_range_noise", "min_r2", "max_relative_sigma", "max_gap_s"):
        value = getattr(args, name)
        if not math.isfinite(value) or value < 0:
            raise InputError(f"--{name.replace('_', '-')} must be a finite number >= 0")
        setattr(s, name, value)
    if args.min_points < 3:
        raise InputError("--min-points must be at least 3")
    if args.chunk_rows < 1000:
        raise InputError("--chunk-rows must be at least 1000")
    s.min_points, s.keep_flagged, s.scale_by_mswd = args.min_points, args.keep_flagged, not args.no_mswd_scaling
    return s


def run(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.plume.pipeline import run_ratios
    settings = settings_from_args(args)
    if args.window_figures and not args.figures:
        raise InputError("--window-figures needs --figures DIR")
    if os.path.isdir(args.out):
        raise InputError(f"--out {args.out}: is a directory; give a CSV file name")
    from ventsource.workflow.output_guard import refuse_input_as_output
    from ventsource.workflow.plume.writer import sidecar_paths
    refuse_input_as_output((args.out, *sidecar_paths(args.out)), (args.raw,))
    out = run_ratios(args.raw, args.out, settings, unit_overrides=_units(args.units),
                     chunk_rows=args.chunk_rows, assume_utc=args.assume_utc, figure_dir=args.figures,
                     window_figures=args.window_figures)
    windows = out["windows"]
    written = sum(any(r.value == r.value for r in w.results) for w in windows)
    print(f"{len(windows)} windows, {written} with at least one ratio -> {args.out}")
    print(f"every window with its quality and flags: {out['windows_path']}; settings: {out['record_path']}")
    for f in out["figures"][-1:]:
        print(f"overview figure: {f}")
    print(f"Caution: {CAUTION}")
    return 0


def parse_ratio_options(text, where="--raw-options"):
    """(RatioSettings, run_ratios keyword arguments) from options of this command in one string
    (`ventsource watch FOLDER --raw-options`): the same parser and checks as the command."""
    import shlex

    class _Parser(argparse.ArgumentParser):
        def error(self, message):
            raise InputError(f"{where}: {message}")

    parser = add_parser(_Parser(prog=f"ventsource watch {where}").add_subparsers())
    parser.__class__ = _Parser
    try:
        words = shlex.split(text or "")
    except ValueError as exc:
        raise InputError(f"{where}: {exc}") from None
    if any(w.split("=")[0] in ("--out", "--figures", "--window-figures") for w in words):
        raise InputError(f"{where}: --out, --figures and --window-figures do not apply to watch")
    args = parser.parse_args(["RAW", "--out", "OUT.csv", *words])
    return settings_from_args(args), dict(unit_overrides=_units(args.units), chunk_rows=args.chunk_rows,
                                          assume_utc=args.assume_utc)
