"""`ventsource watch`: follow a growing measurement file, answer each new row at once,
update the window, rewrite the tables, raise alerts (docs/running.md, "Live monitoring")."""
import os

import numpy as np

from ventsource.common.errors import InputError


def add_parser(sub):
    wp = sub.add_parser("watch", help="follow a growing measurement file: each new row answered "
                                      "at once, its window updated, alerts")
    wp.add_argument("data", nargs="?", help="measurement CSV that a station appends to (docs/measurements.md), "
                    "or a folder into which raw sensor files appear (the files `ventsource ratios` reads)")
    wp.add_argument("--prior", help="prior file (TOML) or a shipped prior's name")
    wp.add_argument("--out", required=True, metavar="FOLDER", help="output folder (state kept there; "
                    "the same command again resumes)")
    wp.add_argument("--window", default="30d", help="window span from the first row's time (30d, 12h, "
                    "2w) or 'column' (the file's window column)")
    wp.add_argument("--seed", type=int, default=0, help="run seed")
    wp.add_argument("--sigma", type=float, default=None, help="relative 1-sigma of cells without their own")
    wp.add_argument("--raw-options", metavar="'OPTIONS'", default="", help="DATA a raw folder: options of "
                    "`ventsource ratios` for its files, in one quoted string, e.g. '--window 10min --method ols'")
    wp.add_argument("--alerts", metavar="TOML", help="alert thresholds (docs/running.md, 'Alerts')")
    wp.add_argument("--once", action="store_true", help="take the lines there now, then exit")
    wp.add_argument("--poll", type=float, default=1.0, help="seconds between looks at the file")
    wp.add_argument("--particles", type=int, default=200, help="particles per run of the window population")
    wp.add_argument("--check-every", type=int, default=8, help="rows between change-of-source checks (0: never)")
    wp.add_argument("--no-figures", action="store_true", help="tables and report without the figure")
    wp.add_argument("--replay-demo", action="store_true", help="replay the synthetic demo series into "
                    "OUT/replay-data.csv and watch it (prior: the fast demo prior)")
    wp.add_argument("--speed", type=float, default=1.0, help="replay: rows per second")
    wp.add_argument("--rows", type=int, default=60, help="replay: rows of the demo series")
    wp.set_defaults(handler=cmd_watch)


def cmd_watch(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.watch.session import make_context, run_watch
    if args.replay_demo:
        return _replay(args)
    if not args.data or not args.prior:
        raise InputError("watch: give DATA and --prior (or --replay-demo)")
    raw = None
    if os.path.isdir(args.data):
        from ventsource.cli.ratios_command import parse_ratio_options
        from ventsource.workflow.watch.raw_folder import RawOptions
        raw = RawOptions(args.raw_options, *parse_ratio_options(args.raw_options))
    elif args.raw_options:
        raise InputError("--raw-options: DATA must then be a folder of raw sensor files")
    ctx = make_context(args.data, args.prior, args.out, seed=args.seed, window=args.window, sigma=args.sigma,
                       alerts_path=args.alerts, figures=not args.no_figures, n_particles=args.particles,
                       check_every=args.check_every, raw_options=raw)
    print(f"watching {args.data} into {args.out}/ (Ctrl-C stops; the same command resumes)")
    print(f"Caution: {CAUTION}")
    run_watch(ctx, once=args.once, poll_s=args.poll)
    return 0


def _replay(args):
    from ventsource.common.caution import CAUTION
    from ventsource.workflow.watch.replay import (DEMO_ALERTS, DEMO_PRIOR, demo_lines, latency_seconds, start_writer,
                                                  written_at)
    from ventsource.workflow.watch.session import make_context, run_watch
    if args.speed <= 0 or args.rows < 2:
        raise InputError("--speed must be > 0 and --rows >= 2")
    os.makedirs(args.out, exist_ok=True)
    header, lines = demo_lines(args.out, n_rows=args.rows)
    data = os.path.join(args.out, "replay-data.csv")
    if os.path.exists(os.path.join(args.out, "watch", "state")):
        raise InputError(f"{args.out}: holds an earlier replay; choose another --out")
    alerts = args.alerts
    if alerts is None:
        alerts = os.path.join(args.out, "alerts.toml")
        with open(alerts, "w", encoding="utf-8") as fh:
            fh.write(DEMO_ALERTS)
    ctx = make_context(data, args.prior or DEMO_PRIOR, os.path.join(args.out, "watch"), seed=args.seed,
                       window=args.window if args.window != "30d" else "column", sigma=args.sigma,
                       alerts_path=alerts, figures=not args.no_figures, synthetic=True,
                       n_particles=args.particles, check_every=args.check_every)
    ctx.clock_check = False   # the synthetic series is dated over years, some after today
    times = os.path.join(args.out, "replay-times.csv")
    writer = start_writer(data, header, lines, args.speed, times)
    print(f"replaying {len(lines)} synthetic rows (fictional Mount Kerrow) at {args.speed:g} per second "
          f"into {data}; results in {ctx.out_dir}/")
    watcher = run_watch(ctx, poll_s=min(0.2, 1.0 / args.speed), stop=lambda: not writer.is_alive())
    lat = latency_seconds(written_at(times), watcher.answered_at)
    if lat:
        print(f"arrival to answer written: median {np.median(lat):.2f} s, 95th percentile "
              f"{np.percentile(lat, 95):.2f} s over {len(lat)} rows")
    print(f"Caution: {CAUTION}")
    return 0
