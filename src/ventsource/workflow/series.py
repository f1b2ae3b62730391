"""Series runner: every row of a measurement file inverted, results written
as each finishes, so an interrupted run loses nothing already done.

Per-row seeds derive from the run seed and the row identifier (not the row
position or the worker), so results do not depend on worker count or order.

Layout of an output directory DIR:

* `rows/KEY.nc`    - each row's InferenceData (written first, atomically); its
  prior is a reference (name and sha256) to the one copy below;
* `rows/KEY.json`  - each row's summary numbers with the sha256 of its .nc file
  (written second, atomically); a row counts as finished, and is kept by
  --resume, only when both files are there and the checksum and summary agree;
* `prior-SHA12.toml` - the prior file of the run, stored once;
* `.lock`          - held (flock) by the run using the folder; a second run is refused;
* `summary.running.csv` - rows appended in finishing order while the run goes;
* `summary.csv`, `hazard.json` - written only when every row is finished
  (temp file + rename), so a file by that name is always complete;
* `run.json`       - the run's settings (everything that changes a number: data and
  prior checksums, seed, default sigma, inference options, package version) and
  `"status": "running" | "stopped" | "complete"`; --resume refuses other settings.
"""
import csv
import fcntl
import hashlib
import json
import os
import shutil
import sys
import time
import warnings
from concurrent.futures import ProcessPoolExecutor, as_completed

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.inference.priors.hypotheses import prior_model_probabilities
from ventsource.workflow.hypothesis_rows import (DRAWS_KEY, add_budget, compact_draws, extend_hazard,
                                                 extra_columns, hypothesis_fields)
from ventsource.workflow.windows import (assign_windows, invert_window, read_done_windows,
                                         window_summary_columns)

SUMMARY_NAME = "summary.csv"
RUNNING_NAME = "summary.running.csv"
HAZARD_NAME = "hazard.json"
LOCK_NAME = ".lock"
# run.json entries that change a number; --resume refuses a change in any (label for the message)
RECORDED_SETTINGS = {"data_sha256": "measurement file", "prior_sha256": "prior file", "seed": "--seed",
                     "sigma": "--sigma (default relative 1-sigma)", "options": "inference options",
                     "package_version": "ventsource version", "window": "--window",
                     "window_per_row": "per-row set of the window model (the prior's [window] per_row)"}
DASK_CONNECT_TIMEOUT_S = 20


def row_seed(run_seed, row_id):
    digest = hashlib.sha256(f"{int(run_seed)}:{row_id}".encode()).digest()
    return int.from_bytes(digest[:8], "little") % (2**63 - 1)


def file_sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def summary_columns(free_names, ratio_names):
    cols = ["id", "time", "p_magmatic", "p_magmatic_error", "p_scrubbed_below_epsilon",
            "p_scrubbed_below_epsilon_error", "flags", "seed",
            "scrubbed_so2_avg_q05", "scrubbed_so2_avg_median", "scrubbed_so2_avg_q95"]
    for name in free_names:
        cols += [f"{name}_median", f"{name}_q05", f"{name}_q95", f"{name}_rhat", f"{name}_ess_bulk"]
    for r in ratio_names:  # posterior predictive of each measured ratio (for the figures)
        cols += [f"pp {r}_q05", f"pp {r}_median", f"pp {r}_q95"]
    return cols


def _fmt(v):
    if v is None:
        return ""
    if isinstance(v, (float, np.floating)):
        return "" if not np.isfinite(v) else repr(float(v))
    return str(v)


def _num(v):
    return None if v is None or not np.isfinite(v) else float(v)


def row_key(row_id):
    """File-name-safe key of a row identifier (a short hash keeps keys unique)."""
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in row_id)[:60]
    if safe != row_id:
        safe += "-" + hashlib.sha256(row_id.encode()).hexdigest()[:8]
    return safe


_SPEC_CACHE = {}


def _cached_spec(prior_path, prior_sha):
    """The prior, read once per worker process (a prior may carry long notes)."""
    from ventsource.inference.priors import load_prior_file
    key = (prior_path, prior_sha)
    if key not in _SPEC_CACHE:
        _SPEC_CACHE.clear()
        _SPEC_CACHE[key] = load_prior_file(prior_path)
    return _SPEC_CACHE[key]


def _invert_row(args):
    """Invert one row and write rows/KEY.nc then rows/KEY.json; returns the summary row."""
    prior_path, prior_ref, measurement, row_id, time_text, seed, options, out_dir = args
    from ventsource.common.threads import limit_blas_threads
    limit_blas_threads()  # bitwise-reproducible rows, whatever the process
    from ventsource.inference.row.one_measurement import InferenceError, infer
    spec = _cached_spec(prior_path, prior_ref["sha256"])
    opts = dict(options)
    opts.setdefault("epsilon", float(getattr(spec, "epsilon", 0.05)))
    with warnings.catch_warnings():
        # arviz warns when a short ensemble has more walkers than draws; not a user problem
        warnings.filterwarnings("ignore", message="More chains", category=UserWarning)
        try:
            result = infer(measurement, spec, seed=seed, **opts)
        except InferenceError as exc:  # one line, names the row; finished rows stay for --resume
            raise InputError(f"row '{row_id}': {exc}") from None
    # the prior is stored once per run (prior-SHA12.toml); each row refers to it
    result.idata.posterior.attrs["prior"] = json.dumps(prior_ref)
    key = row_key(row_id)
    nc_path = os.path.join(out_dir, "rows", f"{key}.nc")
    _atomic(nc_path, result.idata.to_netcdf)  # a file present is a finished file
    row = _summary_row(result, spec, row_id, time_text, seed)
    row["nc_sha256"], row["prior_sha256"] = file_sha256(nc_path), prior_ref["sha256"]
    _atomic(os.path.join(out_dir, "rows", f"{key}.json"), lambda part: _dump_json(part, row, None))
    return row


def _summary_row(result, spec, row_id, time_text, seed):
    summary = result.summary()
    row = {"id": row_id, "time": time_text, "p_magmatic": _num(result.p_magmatic),
           "p_magmatic_error": _num(result.p_magmatic_error),
           "p_scrubbed_below_epsilon": _num(result.p_scrubbed_below_epsilon),
           "p_scrubbed_below_epsilon_error": _num(result.p_scrubbed_below_epsilon_error),
           "flags": ";".join(result.flags), "seed": int(seed)}
    row.update(hypothesis_fields(result.hypotheses))
    row[DRAWS_KEY] = compact_draws(result.budget_draws, seed)
    if result.scrubbed_model_averaged is not None:  # point mass at 0 with weight P(M0)
        (row["scrubbed_so2_avg_q05"], row["scrubbed_so2_avg_median"],
         row["scrubbed_so2_avg_q95"]) = map(float, result.scrubbed_model_averaged)
    for name in spec.free_names:
        s = summary.loc[name]
        row[f"{name}_median"] = float(s["median"])
        row[f"{name}_q05"] = float(s["5%"])
        row[f"{name}_q95"] = float(s["95%"])
        row[f"{name}_rhat"] = float(s["r_hat"])
        row[f"{name}_ess_bulk"] = float(s["ess_bulk"])
    pp = result.idata.posterior_predictive
    for var in pp.data_vars:
        name = pp[var].attrs.get("long_name", var)
        x = pp[var].values.reshape(-1)
        x = x[np.isfinite(x)]
        if x.size:
            q = np.quantile(x, [0.05, 0.5, 0.95])
            row[f"pp {name}_q05"], row[f"pp {name}_median"], row[f"pp {name}_q95"] = map(float, q)
    return row


def _dask_client(scheduler, local_workers):
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise InputError("--dask-scheduler/--dask-local need dask.distributed: "
                         "pip install 'ventsource[dask]'") from None
    if scheduler:
        try:
            return Client(scheduler, timeout=DASK_CONNECT_TIMEOUT_S), None
        except (OSError, TimeoutError) as exc:
            raise InputError(f"--dask-scheduler {scheduler}: cannot connect ({exc})") from None
    cluster = LocalCluster(n_workers=local_workers, threads_per_worker=1, processes=True,
                           dashboard_address=None)
    return Client(cluster), cluster


class Progress:
    """One-line progress bar with an estimate of the time left (from this session's rate)."""

    def __init__(self, total, already, stream=None, width=28, label=""):
        self.total, self.done, self.start_done = total, already, already
        self.label = f"{label}: " if label else ""
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self.t0 = time.monotonic()
        self.tty = getattr(self.stream, "isatty", lambda: False)()

    def text(self, last=""):
        frac = self.done / self.total if self.total else 1.0
        fill = int(round(frac * self.width))
        bar = "#" * fill + "." * (self.width - fill)
        new = self.done - self.start_done
        elapsed = time.monotonic() - self.t0
        if new > 0 and self.done < self.total:
            left = elapsed / new * (self.total - self.done)
            eta = f"~{int(left // 60)}:{int(left % 60):02d} left"
        elif self.done >= self.total:
            eta = f"done in {elapsed:.0f} s"
        else:
            eta = "estimating time left"
        return f"{self.label}[{bar}] {self.done}/{self.total} rows, {eta}" + (f" (last: {last})" if last else "")

    def update(self, last=""):
        self.done += 1
        self.show(last)

    def show(self, last=""):
        line = self.text(last)
        if self.tty:
            self.stream.write("\r" + line.ljust(100))
            if self.done >= self.total:
                self.stream.write("\n")
        else:
            self.stream.write(line + "\n")
        self.stream.flush()


def _verified_rows(out_dir, ids, prior_sha, cols):
    """Finished rows that pass their checks: {id: row}, and the ids that failed them.

    A row is kept only when rows/KEY.json reads as this row's summary (its id, every
    summary column, this run's prior) and rows/KEY.nc has the sha256 the summary
    recorded; anything else (a truncated or edited file) is inverted again."""
    done, failed = {}, []
    for rid in ids:
        key = row_key(rid)
        js = os.path.join(out_dir, "rows", f"{key}.json")
        nc = os.path.join(out_dir, "rows", f"{key}.nc")
        if not os.path.exists(js):
            continue  # never finished (an .nc alone is a row stopped between its two files)
        try:
            with open(js) as fh:
                row = json.load(fh)
            ok = (isinstance(row, dict) and row.get("id") == rid and row.get("prior_sha256") == prior_sha
                  and all(c in row for c in cols[:8]) and row.get("nc_sha256") == file_sha256(nc))
        except (OSError, ValueError):
            ok = False
        if ok:
            done[rid] = row
        else:
            failed.append(rid)
    return done, failed


def _run_settings(series, prior_path, prior_sha, seed, options):
    from ventsource import __version__
    return {"data": os.path.abspath(series.path), "data_sha256": file_sha256(series.path),
            "prior": os.path.abspath(str(prior_path)), "prior_sha256": prior_sha,
            "seed": int(seed), "sigma": getattr(series, "default_sigma", None), "options": options,
            "package_version": __version__}


def _check_output_folder(out_dir):
    """Refuse a folder that cannot hold a run, before anything is written."""
    if os.path.exists(out_dir) and not os.path.isdir(out_dir):
        raise InputError(f"{out_dir}: exists and is not a folder; choose another --out")
    probe = os.path.abspath(out_dir)
    while not os.path.exists(probe):
        probe = os.path.dirname(probe)
    if not os.path.isdir(probe):
        raise InputError(f"{out_dir}: cannot be made: {probe} is a file, not a folder")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError(f"{out_dir}: cannot write in {probe} (permission denied or read-only)")
    rows = os.path.join(out_dir, "rows")
    if os.path.exists(rows) and not (os.path.isdir(rows) and os.access(rows, os.W_OK | os.X_OK)):
        raise InputError(f"{rows}: not a writable folder")


def _earlier_run(out_dir, settings, resume):
    """The earlier run's run.json (or None); refuses what would mix or lose results."""
    run_path = os.path.join(out_dir, "run.json")
    if not os.path.exists(run_path):
        return None
    try:
        with open(run_path) as fh:
            old = json.load(fh)
        assert isinstance(old, dict)
    except (OSError, ValueError, AssertionError):
        raise InputError(f"{run_path}: unreadable; choose another --out") from None
    rows = os.path.join(out_dir, "rows")
    has_rows = os.path.isdir(rows) and any(f.endswith(".json") for f in os.listdir(rows))
    if not resume:
        if has_rows or old.get("status") == "complete":
            raise InputError(f"{out_dir}: holds an earlier run; use --resume to continue it or "
                             "choose another --out")
        return old  # an earlier start that finished no row: nothing to lose, start again
    now = json.loads(json.dumps(settings, default=str))
    for key, label in RECORDED_SETTINGS.items():
        if _old_setting(old, key, now[key]) != now[key]:
            if key == "options":
                diff = sorted(k for k in set(old.get(key) or {}) | set(now[key])
                              if (old.get(key) or {}).get(k) != now[key].get(k))
                label = "inference option " + ", ".join(diff) if diff else label
            raise InputError(f"{out_dir}: --resume with a different {label} than the run there "
                             f"({_short(old.get(key))} there, {_short(now[key])} now); "
                             "use the same settings or choose another --out")
    return old


def _old_setting(old, key, now):
    """An earlier run's setting; a window run from before [window] tables used the default set."""
    if key == "window_per_row" and key not in old:
        from ventsource.inference.priors.window_table import PER_ROW_DEFAULT
        return now if now in (None, list(PER_ROW_DEFAULT)) else None
    return old.get(key)


def _short(value):
    text = json.dumps(value, default=str)
    return text if len(text) <= 40 else text[:12] + "..."


def _refuse_if_in_use(out_dir):
    """A run holding the folder's lock is named as such, whatever else the folder holds."""
    path = os.path.join(out_dir, LOCK_NAME)
    if os.path.exists(path):
        with _FolderLock(out_dir):
            pass


class _FolderLock:
    """An exclusive flock on OUT/.lock for the life of a run."""

    def __init__(self, out_dir):
        self.path, self.fh = os.path.join(out_dir, LOCK_NAME), None

    def __enter__(self):
        try:
            os.makedirs(os.path.dirname(self.path), exist_ok=True)
            self.fh = open(self.path, "a")
        except OSError as exc:
            raise InputError(f"{os.path.dirname(self.path)}: cannot write ({exc.strerror or exc})") from None
        try:
            fcntl.flock(self.fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self.fh.close()
            raise InputError(f"{os.path.dirname(self.path)}: another run is using this folder; "
                             "wait for it to end or choose another --out") from None
        return self

    def __exit__(self, *exc):
        self.fh.close()  # closing releases the lock
        return False


def run_series(series, prior_path, out_dir, seed=0, workers=1, resume=False, options=None,
               dask_scheduler=None, dask_local=False, progress_stream=None, model_note=None,
               oversubscribe=False, window=None, synthetic_data=False, progress_label="",
               budget_max_gap_days=None):
    """Invert every row; returns the list of summary rows in file order.

    window: None (the file's window column if it has one, else row by row), "rows",
    "column" or a time span in seconds (see ventsource.workflow.windows).
    budget_max_gap_days: longest interval the sulfur budget bridges (flux columns only).

    workers: local processes (or LocalCluster workers with dask_local), at most one per
    row to invert and, unless oversubscribe, one per core; dask_scheduler: address of a
    running dask.distributed scheduler. Everything is checked before anything is written.
    Without resume, finished rows already in out_dir are an error (never overwritten
    silently); with resume they are kept (after verification) and only the rest is
    inverted; a resume with other settings than the run there is refused.
    """
    from ventsource.common.threads import limit_blas_threads
    limit_blas_threads()  # before worker processes start: they inherit the setting
    prior_path, spec, options = _checked_inputs(series, prior_path, seed, workers, options)
    prior_sha = file_sha256(prior_path)
    settings = _run_settings(series, prior_path, prior_sha, seed, options)
    settings["window"] = window
    extras = {"synthetic_data": synthetic_data, "progress_label": progress_label,
              "budget_max_gap_days": budget_max_gap_days}
    groups = assign_windows(series, window)  # checked before anything is written
    settings["window_per_row"] = None if groups is None else list(spec.window_per_row)
    _check_output_folder(out_dir)
    _refuse_if_in_use(out_dir)
    _earlier_run(out_dir, settings, resume)
    with _FolderLock(out_dir):
        old = _earlier_run(out_dir, settings, resume)  # again, now that no other run can write
        try:
            return _run_locked(series, spec, prior_path, prior_sha, out_dir, settings, old, resume,
                               workers, dask_scheduler, dask_local, progress_stream, model_note,
                               oversubscribe, groups, extras)
        except OSError as exc:  # disk full, folder made read-only under the run...
            msg = (f"{out_dir}: cannot write ({exc.strerror or exc}); finished rows are kept: "
                   "make room or fix the folder and use --resume")
            _mark_stopped(out_dir, settings, msg)
            raise InputError(msg) from None
        except InputError as exc:
            _mark_stopped(out_dir, settings, str(exc))
            raise


def _checked_inputs(series, prior_path, seed, workers, options):
    from ventsource.inference.row.one_measurement import _DEFAULTS
    from ventsource.inference.option_rules import OptionError, check_options
    from ventsource.inference.priors import PriorFileError, load_prior_file
    from ventsource.inference.priors.shipped import resolve_prior
    prior_path = resolve_prior(prior_path)
    try:
        spec = load_prior_file(prior_path)
    except PriorFileError as exc:
        raise InputError(str(exc)) from None
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed must be a whole number >= 0, got {seed!r}")
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise InputError(f"workers must be a whole number >= 1, got {workers!r}")
    try:
        options = check_options(dict(options or {}), _DEFAULTS)
    except OptionError as exc:
        raise InputError(str(exc)) from None
    keys = [row_key(r) for r in series.ids]
    if len(set(keys)) != len(keys):
        raise InputError(f"{series.path}: two identifiers map to the same file name")
    return prior_path, spec, options


def _mark_stopped(out_dir, settings, message):
    """Best effort: run.json says the run stopped and why (a full disk may refuse even this)."""
    from ventsource import __version__
    run_path = os.path.join(out_dir, "run.json")
    try:
        with open(run_path) as fh:
            if json.load(fh).get("status") != "running":
                return  # a finished run stays "complete"
        _write_json(run_path, dict(settings, status="stopped", error=message,
                                   package_version=__version__, caution=CAUTION))
    except (OSError, ValueError):
        pass


def _run_locked(series, spec, prior_path, prior_sha, out_dir, settings, old, resume, workers,
                dask_scheduler, dask_local, progress_stream, model_note, oversubscribe, groups=None,
                extras=None):
    extras = extras or {}
    if groups is None:
        cols = summary_columns(spec.free_names, series.ratio_names)
        done, failed = _verified_rows(out_dir, series.ids, prior_sha, cols) if resume else ({}, [])
    else:
        cols = window_summary_columns(series.ratio_names)
        done, failed = (read_done_windows(out_dir, groups, series.ids) if resume else {}), []
    cols = cols + extra_columns(spec, series)  # three hypotheses, sulfur budget: only when used
    todo_ids = [rid for rid in series.ids if rid not in done]
    summary_path, hazard_path = (os.path.join(out_dir, n) for n in (SUMMARY_NAME, HAZARD_NAME))
    if (old or {}).get("status") == "complete" and not todo_ids and os.path.exists(summary_path) \
            and os.path.exists(hazard_path):
        return [done[i] for i in series.ids]  # finished and verified: nothing to write
    run_path = os.path.join(out_dir, "run.json")
    for stale in (summary_path, hazard_path):
        if os.path.exists(stale):
            os.remove(stale)  # re-written complete at the end
    _write_json(run_path, dict(settings, status="running", caution=CAUTION))
    os.makedirs(os.path.join(out_dir, "rows"), exist_ok=True)
    prior_ref = {"name": spec.name, "sha256": prior_sha, "file": f"prior-{prior_sha[:12]}.toml"}
    stored_prior = os.path.join(out_dir, prior_ref["file"])
    if not os.path.exists(stored_prior) or file_sha256(stored_prior) != prior_sha:
        _atomic(stored_prior, lambda part: shutil.copyfile(prior_path, part))
    running = os.path.join(out_dir, RUNNING_NAME)
    _rewrite(running, cols, [done[i] for i in series.ids if i in done])
    work, todo = _jobs(series, groups, done, prior_path, prior_ref, settings, out_dir)
    bar = Progress(len(series.ids), len(done), stream=progress_stream,
                   label=extras.get("progress_label", ""))
    if failed:
        bar.stream.write(f"{len(failed)} finished row(s) failed verification and are inverted again: "
                         f"{', '.join(failed[:5])}{' ...' if len(failed) > 5 else ''}\n")
    bar.show("resumed" if done else "")
    _run_rows(todo, done, running, cols, bar, workers, dask_scheduler, dask_local, oversubscribe, work)
    rows = _finish(series, spec, prior_path, out_dir, settings, cols, done, model_note, extras)
    _write_json(run_path, dict(settings, status="complete", caution=CAUTION))
    return rows


def _jobs(series, groups, done, prior_path, prior_ref, settings, out_dir):
    """(worker function, its argument tuples) for the rows or windows still to invert."""
    if groups is None:
        todo = [(str(prior_path), prior_ref, m, rid, _time_text(t), row_seed(settings["seed"], rid),
                 settings["options"], out_dir)
                for rid, t, m in zip(series.ids, series.times, series.measurements) if rid not in done]
        return _invert_row, todo
    os.makedirs(os.path.join(out_dir, "windows"), exist_ok=True)
    todo = [(str(prior_path), prior_ref, label, [series.ids[i] for i in idx],
             [_time_text(series.times[i]) for i in idx], [series.measurements[i] for i in idx],
             row_seed(settings["seed"], f"window-{label}"), settings["options"], out_dir)
            for label, idx in groups if series.ids[idx[0]] not in done]
    # longest windows first: two workers then finish together instead of one idling
    # while the other inverts the biggest window last (results do not depend on order)
    todo.sort(key=lambda job: -len(job[3]))
    return invert_window, todo


def _finish(series, spec, prior_path, out_dir, settings, cols, done, model_note, extras):
    """summary.csv, hazard.json and the tables' README.txt of a run whose rows are all done."""
    gap_days = extras.get("budget_max_gap_days")
    rows = add_budget(series, [done[i] for i in series.ids], settings["seed"], gap_days)
    _rewrite(os.path.join(out_dir, SUMMARY_NAME), cols, rows)  # final file in input order
    hazard = hazard_document(series, spec, prior_path, rows, settings["seed"], settings["options"],
                             model_note, sigma=settings["sigma"], out_dir=out_dir,
                             window_per_row=settings.get("window_per_row"),
                             synthetic_data=extras.get("synthetic_data", False))
    hazard = extend_hazard(hazard, rows, series, gap_days)
    _write_json(os.path.join(out_dir, HAZARD_NAME), hazard)
    from ventsource.workflow.table_notes import write_table_readme
    write_table_readme(out_dir, {SUMMARY_NAME: "one row per measurement (see docs/outputs.md)",
                                 HAZARD_NAME: "per-row probabilities with provenance and flag meanings"},
                       synthetic=hazard["synthetic"])
    return rows


def worker_count(requested, n_jobs, oversubscribe=False):
    """Processes to start: no more than rows to invert, nor (unless asked) than cores."""
    n = min(int(requested), max(n_jobs, 1))
    return n if oversubscribe else max(1, min(n, os.cpu_count() or 1))


def _run_rows(todo, done, running, cols, bar, workers, dask_scheduler, dask_local, oversubscribe,
              work=None):
    work = work or _invert_row

    def record(result):  # a row, or the rows of a window
        for row in (result if isinstance(result, list) else [result]):
            record_row(row)

    def record_row(row):
        with open(running, "a", newline="") as fh:
            csv.writer(fh, lineterminator="\n").writerow([_fmt(row.get(c)) for c in cols])
            fh.flush()
            os.fsync(fh.fileno())
        done[row["id"]] = row
        p = row.get("p_magmatic")
        bar.update(f"{row['id']} P(M0)={p:.3f}" if p is not None else row["id"])

    n_workers = worker_count(workers, len(todo), oversubscribe)
    if todo and (dask_scheduler or dask_local):
        from dask.distributed import as_completed as dask_completed
        client, cluster = _dask_client(dask_scheduler, n_workers)
        try:
            futures = [client.submit(work, job, pure=False) for job in todo]
            for fut in dask_completed(futures):
                record(fut.result())
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
    elif todo and n_workers > 1:
        with ProcessPoolExecutor(max_workers=n_workers) as pool:
            futures = [pool.submit(work, job) for job in todo]
            try:
                for fut in as_completed(futures):
                    record(fut.result())
            except BaseException:
                for fut in futures:
                    fut.cancel()
                raise
    else:
        for job in todo:
            record(work(job))


def hazard_document(series, spec, prior_path, rows, seed, options, model_note=None, sigma=None,
                    out_dir=None, synthetic_data=False, window_per_row=None):
    """Plain dict for elicitation panels: per-row probability with provenance.

    window_per_row: the window model's per-row parameters (None: rows inverted one by one).

    Paths are relative to the run folder; numbers are rounded by hazard_format's rule."""
    from ventsource import __version__
    from ventsource.common.flag_glossary import glossary_for
    from ventsource.inference.row.one_measurement import _DEFAULTS
    from ventsource.workflow.hazard_format import ROUNDING_RULE, relative_path
    effective = dict(_DEFAULTS, epsilon=float(getattr(spec, "epsilon", 0.05)), **options)
    flag_lists = [[f for f in (r.get("flags") or "").split(";") if f] for r in rows]
    return {
        "what": "P(M0 | data): posterior probability that the gas is purely magmatic "
                "(no SO2 scrubbed), per measurement, under the model and prior below",
        "caution": CAUTION,
        "synthetic": bool(getattr(spec, "fictional", False) or synthetic_data),
        "package": "ventsource", "package_version": __version__,
        "input_file": relative_path(series.path, out_dir), "input_sha256": file_sha256(series.path),
        "run_seed": int(seed), "row_seed_rule": "sha256('RUNSEED:ID'), first 8 bytes little-endian mod 2^63-1",
        "priors": [{"file": relative_path(prior_path, out_dir), "sha256": file_sha256(prior_path),
                    "name": spec.name, "fictional": bool(getattr(spec, "fictional", False)),
                    "models": dict(spec.models), "p_magmatic_prior": prior_model_probabilities(spec)[0],
                    "prior_model_probabilities": list(prior_model_probabilities(spec)),
                    "epsilon": float(getattr(spec, "epsilon", 0.05)),
                    "likelihood": dict(spec.likelihood), "free_parameters": list(spec.free_names)}],
        "inference_options": options,
        "inference_options_in_effect": {k: v for k, v in effective.items() if not callable(v)},
        "default_relative_sigma": sigma if sigma is not None else getattr(series, "default_sigma", None),
        "window_per_row": window_per_row,
        "note": model_note or "",
        "rounding": ROUNDING_RULE,
        "flag_glossary": glossary_for(flag_lists),
        "rows": [_hazard_row(r, flags) for r, flags in zip(rows, flag_lists)],
    }


def _hazard_row(r, flags):
    from ventsource.workflow.hazard_format import round_fraction, round_probability
    p, p_err = round_probability(r.get("p_magmatic"), r.get("p_magmatic_error"))
    pb, pb_err = round_probability(r.get("p_scrubbed_below_epsilon"), r.get("p_scrubbed_below_epsilon_error"))
    return {"id": r["id"], "time": r["time"], "p_magmatic": p, "p_magmatic_error": p_err,
            "p_scrubbed_below_epsilon": pb, "p_scrubbed_below_epsilon_error": pb_err,
            "scrubbed_so2_model_averaged": {q: round_fraction(r.get(f"scrubbed_so2_avg_{q}"))
                                            for q in ("q05", "median", "q95")},
            "window": r.get("window"), "log10_bf_one_source": r.get("log10_bf_one_source"),
            "log10_bf_one_vs_split": r.get("log10_bf_one_vs_split"),
            "flags": flags, "seed": r.get("seed")}


def _time_text(t):
    return str(np.datetime64(t, "s")) + "Z"


def _atomic(path, write):
    """write(PART) then rename PART to path; a failed write leaves no PART file behind."""
    part = path + ".part"
    try:
        write(part)
        os.replace(part, path)
    except BaseException:
        try:
            os.remove(part)
        except OSError:
            pass
        raise


def _dump_json(path, doc, indent=2):
    with open(path, "w") as fh:
        json.dump(doc, fh, indent=indent, default=str)


def _write_json(path, doc):
    _atomic(path, lambda part: _dump_json(part, doc))


def _rewrite(path, cols, rows):
    def write(part):
        with open(part, "w", newline="") as fh:
            out = csv.writer(fh, lineterminator="\n")  # quotes ids with commas, quotes or spaces at ends
            out.writerow(cols)
            for row in rows:
                out.writerow([_fmt(row.get(c)) for c in cols])
    _atomic(path, write)
