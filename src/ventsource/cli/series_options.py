"""Options of the commands that invert a measurement file (`run`, `compare`): workers,
Dask, resume, seed, window, engine, default sigma and any option of ventsource.infer,
each checked before anything runs.
"""
import json
import math

from ventsource.common.errors import InputError


def add_series_options(p):
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
    p.add_argument("--window", default=None, metavar="SPAN|1|column|auto",
                   help="rows that share one magma source: a time span such as 30d, 12h or 2w "
                        "(consecutive windows from the first row), 'column' (the file's window "
                        "column), 'auto' (segments the data choose: where the source changes, by "
                        "Bayesian model comparison) or 1 (every row alone); default: the file's "
                        "window column if it has one, else 1")
    p.add_argument("--min-segment-rows", type=int, default=None, metavar="N",
                   help="--window auto: fewest rows in a segment (default 4, at least 2)")
    p.add_argument("--change-prior", default=None, metavar="geometric[:q]|poisson[:mean]",
                   help="--window auto: prior on the number of source changes (default geometric:0.5, "
                        "P(k) = (1 - q) q^k; poisson:MEAN gives a Poisson number)")
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
    from ventsource.inference.row.one_measurement import _DEFAULTS
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


def _segment_option(args):
    """{"min_rows", "change_prior"} of --window auto (checked), or None."""
    given = {k: v for k, v in (("min_rows", getattr(args, "min_segment_rows", None)),
                               ("change_prior", getattr(args, "change_prior", None))) if v is not None}
    if given and _window_option(args) != "auto":
        raise InputError("--min-segment-rows and --change-prior apply to --window auto only")
    from ventsource.workflow.segments import segment_settings
    return segment_settings(given) if _window_option(args) == "auto" else None


def _check_series_args(args):
    """Cheap checks of options, before the data file is read."""
    if args.workers < 1:
        raise InputError("--workers must be at least 1")
    _window_option(args)
    _segment_option(args)
    if getattr(args, "dask_local", False) or getattr(args, "dask_scheduler", None):
        try:
            import dask.distributed  # noqa: F401
        except ImportError:
            raise InputError("--dask-local and --dask-scheduler need dask: "
                             "pip install 'ventsource[dask]'") from None


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


def _budget_gap(args):
    gap = getattr(args, "budget_max_gap", None)
    if gap is not None and not gap > 0:
        raise InputError(f"--budget-max-gap {gap:g}: give a positive number of days")
    return gap
