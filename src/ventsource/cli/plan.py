"""`ventsource plan`: which added measurement would sharpen the answer most
(preposterior comparison, workflow/plan.py)."""
import sys

from ventsource.cli.shared import _load_prior, announce_compilation
from ventsource.common.errors import InputError


def add_parser(sub):
    p = sub.add_parser("plan", help="estimate which added measurement would sharpen P(M0) and "
                                    "the scrubbed fraction most (simulate, invert, average)")
    p.add_argument("prior", metavar="PRIOR", help="prior file (TOML) or the name of a shipped prior")
    what = p.add_mutually_exclusive_group()
    what.add_argument("--scenario", metavar="RATIOS",
                      help="ratios measured today, comma-separated (default SO2/CO2,H2S/SO2,H2O/CO2)")
    what.add_argument("--data", metavar="FILE",
                      help="measurement CSV: its ratios and median relative errors are today's, "
                           "and the truths are drawn from its rows' posteriors (what the data "
                           "already say; up to 8 rows are inverted first)")
    p.add_argument("--truths-from-prior", action="store_true",
                   help="with --data: draw the truths from the prior instead of the data's posterior")
    p.add_argument("--sigma", type=float, default=0.15,
                   help="relative 1-sigma of the scenario's ratios (default 0.15)")
    p.add_argument("-n", type=int, default=40, help="simulated data sets per candidate (default 40)")
    p.add_argument("--particles", type=int, default=300,
                   help="SMC particles per run of each inversion (default 300, 2 runs)")
    p.add_argument("--window-rows", type=int, default=0, metavar="K",
                   help="also score K rows (2-8) of the gas inverted together by the window model "
                        "(about 20 CPU-s per data set; default 0: not scored)")
    p.add_argument("--seed", type=int, default=0, help="seed of the truths, noise and inversions")
    p.add_argument("--table", metavar="FILE", required=True,
                   help="CSV of the ranked candidates (FILE.README.txt with the caution beside it)")
    p.add_argument("--plot", metavar="FILE", help="PNG bar chart of the ranking")
    p.set_defaults(handler=cmd_plan)


def _scenario(args):
    if args.data:
        import numpy as np
        from ventsource.workflow.measurements import read_measurements
        series = read_measurements(args.data, default_sigma=args.sigma)
        sig = np.nanmedian(np.asarray(series.measurements.sigmas, dtype=float), axis=0)
        return tuple(series.ratio_names), sig, series
    names = tuple(r.strip() for r in (args.scenario or "SO2/CO2,H2S/SO2,H2O/CO2").split(",") if r.strip())
    if not names:
        raise InputError("plan: --scenario names no ratio")
    from ventsource.ascent.observables import weight_matrices
    weight_matrices(names)  # one clear line for an unknown species
    return names, args.sigma, None


def cmd_plan(args):
    from ventsource.workflow.plan import (default_candidates, plan_text, run_plan, summarise_plan,
                                          write_plan)
    if args.n < 2:
        raise InputError("plan: -n must be at least 2 (a Monte Carlo error needs two data sets)")
    if args.window_rows and not 2 <= args.window_rows <= 8:
        raise InputError(f"plan: --window-rows {args.window_rows} must be 0 (not scored) or 2 to 8")
    if args.particles < 50:
        raise InputError("plan: --particles must be at least 50")
    if not 0 < args.sigma < 10:
        raise InputError(f"plan: --sigma {args.sigma} must be a relative error between 0 and 10")
    import os
    for path in filter(None, (args.table, args.plot)):  # refused before minutes of inversions
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder) or not os.access(folder, os.W_OK):
            raise InputError(f"plan: {path}: folder {folder} does not exist or is not writable")
    spec = _load_prior(args.prior)
    if args.truths_from_prior and not args.data:
        raise InputError("plan: --truths-from-prior goes with --data (a scenario's truths are the prior's)")
    names, sigma, series = _scenario(args)
    announce_compilation()
    candidates = default_candidates(names, sigma, spec.free_names, args.window_rows)
    total = len(candidates) * args.n
    done = [0]

    def progress(name, i):
        done[0] += 1
        sys.stderr.write(f"\rplan: {done[0]}/{total} inversions ({name})".ljust(70))
        sys.stderr.flush()

    truths = None
    if series is not None and not args.truths_from_prior:
        from ventsource.workflow.plan_posterior import posterior_truths, rows_to_invert
        total += len(rows_to_invert(len(series), args.n))

        def truths(ratio_names, n, seed):
            return posterior_truths(spec, series, ratio_names, n, seed, args.particles, progress)
    long = run_plan(spec, candidates, n_sim=args.n, seed=args.seed, n_particles=args.particles,
                    progress=progress, truths=truths)
    sys.stderr.write("\n")
    table = summarise_plan(long)
    table["truths_from"] = ("prior" if truths is None
                            else f"posterior of {os.path.basename(args.data)}")
    write_plan(table, args.table, synthetic=bool(getattr(spec, "fictional", False)), plot_path=args.plot)
    print(plan_text(table))
    print(f"wrote {args.table}, {args.table}.README.txt" + (f" and {args.plot}" if args.plot else ""))
    return 0
