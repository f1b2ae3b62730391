"""Series runner: every row of a measurement file inverted, results written
as each finishes, so an interrupted run loses nothing already done.

Per-row seeds derive from the run seed and the row identifier (not the row
position or the worker), so results do not depend on worker count or order.

Layout of an output directory DIR:

* `rows/KEY.nc`    - each row's InferenceData (written first, atomically);
* `rows/KEY.json`  - each row's summary numbers (written second, atomically:
  its presence is what marks a row finished);
* `summary.running.csv` - rows appended in finishing order while the run goes;
* `summary.csv`, `hazard.json` - written only when every row is finished
  (temp file + rename), so a file by that name is always complete;
* `run.json`       - the run's settings and `"status": "running" | "complete"`.
"""
import hashlib
import json
import os
import sys
import time
import warnings
from concurrent.futures import ProcessPoolExecutor, as_completed

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.workflow.hypothesis_rows import (DRAWS_KEY, add_budget, compact_draws, extend_hazard,
                                                 extra_columns, hypothesis_fields)
from ventsource.workflow.windows import (assign_windows, invert_window, read_done_windows,
                                         window_summary_columns)

SUMMARY_NAME = "summary.csv"
RUNNING_NAME = "summary.running.csv"
HAZARD_NAME = "hazard.json"
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


def _invert_row(args):
    """Invert one row and write rows/KEY.nc then rows/KEY.json; returns the summary row."""
    prior_path, measurement, row_id, time_text, seed, options, out_dir = args
    from ventsource.common.threads import limit_blas_threads
    limit_blas_threads()  # bitwise-reproducible rows, whatever the process
    from ventsource.inference.one_measurement import InferenceError, infer
    from ventsource.inference.priors import load_prior_file
    spec = load_prior_file(prior_path)
    opts = dict(options)
    opts.setdefault("epsilon", float(getattr(spec, "epsilon", 0.05)))
    with warnings.catch_warnings():
        # arviz warns when a short ensemble has more walkers than draws; not a user problem
        warnings.filterwarnings("ignore", message="More chains", category=UserWarning)
        try:
            result = infer(measurement, spec, seed=seed, **opts)
        except InferenceError as exc:  # one line, names the row; finished rows stay for --resume
            raise InputError(f"row '{row_id}': {exc}") from None
    key = row_key(row_id)
    nc_path = os.path.join(out_dir, "rows", f"{key}.nc")
    result.idata.to_netcdf(nc_path + ".part")
    os.replace(nc_path + ".part", nc_path)  # atomic: a file present is a finished file
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
    write_row_json(out_dir, key, row)
    return row


def write_row_json(out_dir, key, row):
    js = os.path.join(out_dir, "rows", f"{key}.json")
    with open(js + ".part", "w") as fh:
        json.dump(row, fh)
    os.replace(js + ".part", js)


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

    def __init__(self, total, already, stream=None, width=28):
        self.total, self.done, self.start_done = total, already, already
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
        return f"[{bar}] {self.done}/{self.total} rows, {eta}" + (f" (last: {last})" if last else "")

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


def _read_done(out_dir, ids):
    done = {}
    for rid in ids:
        key = row_key(rid)
        js = os.path.join(out_dir, "rows", f"{key}.json")
        nc = os.path.join(out_dir, "rows", f"{key}.nc")
        if os.path.exists(js) and os.path.exists(nc):
            try:
                with open(js) as fh:
                    done[rid] = json.load(fh)
            except (OSError, ValueError):
                pass  # unreadable: recompute
    return done


def run_series(series, prior_path, out_dir, seed=0, workers=1, resume=False, options=None,
               dask_scheduler=None, dask_local=False, progress_stream=None, model_note=None,
               window=None, budget_max_gap_days=None):
    """Invert every row; returns the list of summary rows in file order.

    workers: local processes (or LocalCluster workers with dask_local);
    dask_scheduler: address of a running dask.distributed scheduler.
    budget_max_gap_days: longest interval the sulfur budget bridges (flux columns only).
    Without resume, finished rows already in out_dir are an error (never overwritten
    silently); with resume they are kept and only the rest is inverted.
    """
    from ventsource.inference.priors import load_prior_file
    from ventsource.common.threads import limit_blas_threads
    from ventsource import __version__
    limit_blas_threads()  # before worker processes start: they inherit the setting
    spec = load_prior_file(prior_path)
    options = dict(options or {})
    keys = [row_key(r) for r in series.ids]
    if len(set(keys)) != len(keys):
        raise InputError(f"{series.path}: two identifiers map to the same file name")
    rows_dir = os.path.join(out_dir, "rows")
    os.makedirs(rows_dir, exist_ok=True)
    run_path = os.path.join(out_dir, "run.json")
    settings = {"data": os.path.abspath(series.path), "data_sha256": file_sha256(series.path),
                "prior": os.path.abspath(str(prior_path)), "prior_sha256": file_sha256(prior_path),
                "seed": int(seed), "options": options, "window": window}
    if os.path.exists(run_path):
        with open(run_path) as fh:
            old = json.load(fh)
        if not resume:
            raise InputError(f"{out_dir}: holds an earlier run; use --resume to continue it or "
                             "choose another --out")
        for k in ("data_sha256", "prior_sha256", "seed", "options", "window"):
            if old.get(k) != settings[k]:
                raise InputError(f"{out_dir}: --resume with a different {k.replace('_sha256', ' file')} "
                                 f"than the run there; choose another --out")
    for stale in (SUMMARY_NAME, HAZARD_NAME):
        p = os.path.join(out_dir, stale)
        if os.path.exists(p):
            os.remove(p)  # re-written complete at the end
    _write_json(run_path, dict(settings, status="running", package_version=__version__,
                               caution=CAUTION))
    groups = assign_windows(series, window)
    if groups is None:
        cols = summary_columns(spec.free_names, series.ratio_names)
        done = _read_done(out_dir, series.ids) if resume else {}
        todo = [(str(prior_path), m, rid, _time_text(t), row_seed(seed, rid), options, out_dir)
                for rid, t, m in zip(series.ids, series.times, series.measurements) if rid not in done]
        work = _invert_row
    else:
        os.makedirs(os.path.join(out_dir, "windows"), exist_ok=True)
        cols = window_summary_columns(series.ratio_names)
        done = read_done_windows(out_dir, groups, series.ids) if resume else {}
        todo = [(str(prior_path), label, [series.ids[i] for i in idx],
                 [_time_text(series.times[i]) for i in idx], [series.measurements[i] for i in idx],
                 row_seed(seed, f"window-{label}"), options, out_dir)
                for label, idx in groups if series.ids[idx[0]] not in done]
        work = invert_window
    cols = cols + extra_columns(spec, series)
    running = os.path.join(out_dir, RUNNING_NAME)
    _rewrite(running, cols, [done[i] for i in series.ids if i in done])
    bar = Progress(len(series.ids), len(done), stream=progress_stream)
    bar.show("resumed" if done else "")

    def record(result):
        for row in (result if isinstance(result, list) else [result]):
            record_row(row)

    def record_row(row):
        with open(running, "a") as fh:
            fh.write(",".join(_csv_cell(_fmt(row.get(c))) for c in cols) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
        done[row["id"]] = row
        p = row.get("p_magmatic")
        bar.update(f"{row['id']} P(M0)={p:.3f}" if p is not None else row["id"])

    if todo and (dask_scheduler or dask_local):
        from dask.distributed import as_completed as dask_completed
        client, cluster = _dask_client(dask_scheduler, workers)
        try:
            futures = [client.submit(work, job, pure=False) for job in todo]
            for fut in dask_completed(futures):
                record(fut.result())
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
    elif todo and workers > 1:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            futures = [pool.submit(work, job) for job in todo]
            for fut in as_completed(futures):
                record(fut.result())
    else:
        for job in todo:
            record(work(job))
    rows = add_budget(series, [done[i] for i in series.ids], seed, budget_max_gap_days)
    _rewrite(os.path.join(out_dir, SUMMARY_NAME), cols, rows)  # final file in input order
    hazard = extend_hazard(hazard_document(series, spec, prior_path, rows, seed, options, model_note),
                           rows, series, budget_max_gap_days)
    _write_json(os.path.join(out_dir, HAZARD_NAME), hazard)
    _write_json(run_path, dict(settings, status="complete", package_version=__version__,
                               caution=CAUTION))
    return rows


def hazard_document(series, spec, prior_path, rows, seed, options, model_note=None):
    """Plain dict for elicitation panels: per-row probability with provenance."""
    from ventsource import __version__
    return {
        "what": "P(M0 | data): posterior probability that the gas is purely magmatic "
                "(no SO2 scrubbed), per measurement, under the model and prior below",
        "caution": CAUTION,
        "package": "ventsource", "package_version": __version__,
        "input_file": os.path.abspath(series.path), "input_sha256": file_sha256(series.path),
        "run_seed": int(seed), "row_seed_rule": "sha256('RUNSEED:ID'), first 8 bytes little-endian mod 2^63-1",
        "priors": [{"file": os.path.abspath(str(prior_path)), "sha256": file_sha256(prior_path),
                    "name": spec.name, "models": dict(spec.models), "p_magmatic_prior": spec.p_magmatic,
                    "epsilon": float(getattr(spec, "epsilon", 0.05)),
                    "likelihood": dict(spec.likelihood), "free_parameters": list(spec.free_names)}],
        "inference_options": options,
        "note": model_note or "",
        "rows": [{"id": r["id"], "time": r["time"], "p_magmatic": r.get("p_magmatic"),
                  "p_magmatic_error": r.get("p_magmatic_error"),
                  "p_scrubbed_below_epsilon": r.get("p_scrubbed_below_epsilon"),
                  "p_scrubbed_below_epsilon_error": r.get("p_scrubbed_below_epsilon_error"),
                  "scrubbed_so2_model_averaged": {q: r.get(f"scrubbed_so2_avg_{q}")
                                                  for q in ("q05", "median", "q95")},
                  "window": r.get("window"), "log10_bf_one_source": r.get("log10_bf_one_source"),
                  "flags": [f for f in r.get("flags", "").split(";") if f], "seed": r.get("seed")}
                 for r in rows],
    }


def _time_text(t):
    return str(np.datetime64(t, "s")) + "Z"


def _write_json(path, doc):
    with open(path + ".part", "w") as fh:
        json.dump(doc, fh, indent=2, default=str)
    os.replace(path + ".part", path)


def _csv_cell(text):
    return f'"{text}"' if ("," in text or '"' in text) else text


def _rewrite(path, cols, rows):
    tmp = path + ".part"
    with open(tmp, "w") as fh:
        fh.write(",".join(_csv_cell(c) for c in cols) + "\n")
        for row in rows:
            fh.write(",".join(_csv_cell(_fmt(row.get(c))) for c in cols) + "\n")
    os.replace(tmp, path)
