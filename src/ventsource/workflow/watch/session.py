"""run_watch: the settings checked, the folder locked, the watcher run."""
from __future__ import annotations

import os
from dataclasses import dataclass, field

from ventsource.common.errors import InputError

WATCH_DEFAULTS = dict(n_particles=200, n_runs=4, check_every=8, figures_every=10)


@dataclass
class WatchContext:
    data: str
    prior_path: str
    spec: object
    out_dir: str
    seed: int
    window: object          # seconds, or "column"
    sigma: object
    pi0: float
    n_particles: int = 200
    n_runs: int = 4
    check_every: int = 8    # rows between change-of-source checks (0: never)
    figures_every: int = 10
    figures: bool = True
    synthetic: bool = False
    rules: list = field(default_factory=list)
    argv: list | None = None
    settings: dict = field(default_factory=dict)
    clock_check: bool = True   # skip rows dated more than a day after this computer's clock
    raw_folder: str | None = None   # raw sensor files appear here (watch/raw_folder.py); data is then
    raw_options: object = None      # OUT/ratios-from-raw.csv, made from them with these (RawOptions)


def make_context(data, prior_path, out_dir, seed=0, window="30d", sigma=None, alerts_path=None,
                 figures=True, synthetic=False, raw_options=None, **options):
    from ventsource import __version__
    from ventsource.inference.priors import PriorFileError, load_prior_file
    from ventsource.inference.priors.shipped import resolve_prior
    from ventsource.workflow.run_folder import prior_content_sha256
    from ventsource.workflow.watch.alerts import read_alert_rules
    from ventsource.workflow.windows import parse_window_option
    unknown = sorted(set(options) - set(WATCH_DEFAULTS))
    if unknown:
        raise InputError(f"watch: unknown option(s) {unknown}; known: {sorted(WATCH_DEFAULTS)}")
    opts = dict(WATCH_DEFAULTS, **options)
    for k, v in opts.items():
        if isinstance(v, bool) or not isinstance(v, int) or v < (0 if k in ("check_every", "figures_every") else 1):
            raise InputError(f"watch: {k} must be a whole number >= 1 (check_every, figures_every: >= 0), got {v!r}")
    win = parse_window_option(window)
    if win == "rows":
        raise InputError("--window 1 (row by row) does not apply to watch: give a span such as 30d, or 'column'")
    prior_path = resolve_prior(prior_path)
    try:
        spec = load_prior_file(prior_path)
    except PriorFileError as exc:
        raise InputError(str(exc)) from None
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise InputError(f"seed must be a whole number >= 0, got {seed!r}")
    sigma = float(spec.likelihood.get("relative_sigma", 0.15)) if sigma is None else sigma
    raw_folder, data = _raw_folder(data, out_dir, raw_options)
    alerts = read_alert_rules(alerts_path) if alerts_path else {"rules": [], "argv": None}
    settings = {"data": os.path.abspath(data), "prior_sha256": prior_content_sha256(prior_path),
                "seed": int(seed), "window": win, "sigma": sigma, "package_version": __version__,
                "options": {k: opts[k] for k in ("n_particles", "n_runs", "check_every")},
                "raw": None if raw_folder is None else {"folder": raw_folder, "options": raw_options.text}}
    return WatchContext(str(data), str(prior_path), spec, str(out_dir), int(seed), win, sigma,
                        float(spec.p_magmatic), opts["n_particles"], opts["n_runs"], opts["check_every"],
                        opts["figures_every"], figures, bool(synthetic or getattr(spec, "fictional", False)),
                        alerts["rules"], alerts["argv"], settings, raw_folder=raw_folder,
                        raw_options=raw_options)


def _raw_folder(data, out_dir, raw_options):
    """(raw folder or None, the measurement file followed): a folder DATA holds raw sensor files,
    taken with raw_options (watch/raw_folder.RawOptions; the CLI makes it from --raw-options)."""
    from ventsource.workflow.watch.raw_folder import MEASUREMENT_NAME
    if not os.path.isdir(data):
        if raw_options is not None and raw_options.text:
            raise InputError("--raw-options: DATA must then be a folder of raw sensor files")
        return None, data
    if os.path.abspath(data) == os.path.abspath(out_dir):
        raise InputError(f"{data}: the raw folder cannot be the --out folder")
    if raw_options is None:
        raise InputError(f"{data}: a folder of raw sensor files needs the raw-data step's options "
                         "(RawOptions; the command line makes them from --raw-options)")
    return os.path.abspath(data), os.path.join(str(out_dir), MEASUREMENT_NAME)


def run_watch(ctx, once=False, poll_s=1.0, stream=None, stop=None):
    """Follow ctx.data into ctx.out_dir; returns the Watcher (its timings, its state)."""
    from ventsource.common.threads import limit_blas_threads
    from ventsource.workflow.run_folder import _check_output_folder, _FolderLock
    from ventsource.workflow.watch.watcher import Watcher
    limit_blas_threads()
    _check_output_folder(ctx.out_dir)
    os.makedirs(ctx.out_dir, exist_ok=True)
    if os.path.exists(os.path.join(ctx.out_dir, "run.json")):
        raise InputError(f"{ctx.out_dir}: holds a series run (run.json); choose another --out")
    watcher = Watcher(ctx, stream)
    with _FolderLock(ctx.out_dir):
        watcher.run(once=once, poll_s=poll_s, stop=stop)
    return watcher
