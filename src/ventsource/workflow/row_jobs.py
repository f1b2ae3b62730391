"""Job scheduling of a series run: one job per row (or per window), each seeded
from the run seed and its identifier, run in this process, in local worker processes
or on a Dask cluster, with a progress bar; a finished row writes its own files
(rows/KEY.nc, then rows/KEY.json) before it is recorded.
"""
import csv
import hashlib
import json
import multiprocessing
import os
import sys
import time
import warnings
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from functools import partial
from queue import Empty

import numpy as np

from ventsource.common.errors import InputError
from ventsource.workflow.hypothesis_rows import DRAWS_KEY, compact_draws, hypothesis_fields
from ventsource.workflow.netcdf_bytes import write_netcdf
from ventsource.workflow.run_folder import _atomic, _dump_json, _fmt, file_sha256, row_key
from ventsource.workflow.summary_columns import complete, quantile_columns, summary_columns

DASK_CONNECT_TIMEOUT_S = 20


def row_seed(run_seed, row_id):
    digest = hashlib.sha256(f"{int(run_seed)}:{row_id}".encode()).digest()
    return int.from_bytes(digest[:8], "little") % (2**63 - 1)


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
    _atomic(nc_path, partial(write_netcdf, result.idata))  # a file present is a finished file
    row = _summary_row(result, spec, row_id, time_text, seed)
    row["nc_sha256"], row["prior_sha256"] = file_sha256(nc_path), prior_ref["sha256"]
    _atomic(os.path.join(out_dir, "rows", f"{key}.json"), lambda part: _dump_json(part, row, None))
    return row


def _averaged_quantiles(result, spec):
    """NAME_avg_q05/median/q95 of every free parameter but the scrubbed fraction (whose
    model-averaged quantiles come with the result): the row averaged over M0 and M1
    (inference/row/averaged.py), as a window run reports it; {} without an M0 posterior."""
    if result.idata_m0 is None:
        return {}
    summary = result.summary("averaged")
    out = {}
    for name in spec.free_names:
        if name != "scrubbed_so2" and name in summary.index:
            s = summary.loc[name]
            out.update(zip(quantile_columns(f"{name}_avg"), (float(s["5%"]), float(s["median"]),
                                                             float(s["95%"]))))
    return out


def _summary_row(result, spec, row_id, time_text, seed):
    summary = result.summary("M1")
    row = {"id": row_id, "time": time_text, "p_magmatic": _num(result.p_magmatic),
           "p_magmatic_error": _num(result.p_magmatic_error),
           "p_scrubbed_below_epsilon": _num(result.p_scrubbed_below_epsilon),
           "p_scrubbed_below_epsilon_error": _num(result.p_scrubbed_below_epsilon_error),
           "flags": ";".join(result.flags), "seed": int(seed)}
    row.update(hypothesis_fields(result.hypotheses))
    row[DRAWS_KEY] = compact_draws(result.budget_draws, seed)
    if result.scrubbed_model_averaged is not None:  # point mass at 0 with weight P(M0)
        row.update(zip(quantile_columns("scrubbed_so2_avg"), map(float, result.scrubbed_model_averaged)))
    row.update(_averaged_quantiles(result, spec))  # the same quantities as a window run's
    for name in spec.free_names:  # the posterior if scrubbed (M1)
        s = summary.loc[name]
        row.update(zip(quantile_columns(f"{name}_if_scrubbed"),
                       (float(s["5%"]), float(s["median"]), float(s["95%"]))))
        row[f"{name}_rhat"] = float(s["r_hat"])
        row[f"{name}_ess_bulk"] = float(s["ess_bulk"])
    row.update(information_fields(result.information))
    pp = result.idata.posterior_predictive
    for var in pp.data_vars:
        name = pp[var].attrs.get("long_name", var)
        x = pp[var].values.reshape(-1)
        x = x[np.isfinite(x)]
        if x.size:
            q = np.quantile(x, [0.05, 0.5, 0.95])
            row[f"pp {name}_q05"], row[f"pp {name}_median"], row[f"pp {name}_q95"] = map(float, q)
    return complete(row, summary_columns(spec.free_names, ()))  # pp columns: the row's own ratios


def _num(v):
    return None if v is None or not np.isfinite(v) else float(v)


def information_fields(info):
    """Summary fields of how much the data said (empty without an information summary)."""
    if not info:
        return {}
    out = {"p_magmatic_shift": _num(info["p_magmatic_shift"]),
           "unresolved_direction": info["unresolved_words"]}
    out.update({f"{n}_contraction": _num(v) for n, v in info["contraction"].items()})
    return out


def _time_text(t):
    return str(np.datetime64(t, "s")) + "Z"


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


PROGRESS_CLOCK = time.monotonic   # the bar's seconds (a test replaces it by a count of work)


class Progress:
    """One-line progress bar with an estimate of the time left (from this session's rate).

    work: None (every job one row of equal cost), or {window label: (its row count, its
    relative cost)} of the windows still to invert (inference/window/progress.py
    expected_cost); a window then advances the bar by its rows as its inversion goes
    (partial(), from the sampler's stages), and the time left is estimated from the
    windows' costs, not from their rows. clock: seconds (default PROGRESS_CLOCK)."""

    def __init__(self, total, already, stream=None, width=28, label="", work=None, clock=None):
        self.total, self.done, self.start_done = total, already, already
        self.label = f"{label}: " if label else ""
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self.clock = clock or PROGRESS_CLOCK
        self.t0 = self.clock()
        self.tty = getattr(self.stream, "isatty", lambda: False)()
        self.work = dict(work or {})
        self.total_cost = sum(cost for _, cost in self.work.values())
        self.finished_cost, self.in_flight, self.closed, self.recorded = 0.0, {}, set(), {}

    def _rows_in_flight(self):
        """Rows' worth done in the windows in flight, less their rows already recorded."""
        return sum(max(int(f * n) - self.recorded.get(k, 0), 0) for k, (n, f) in self.in_flight.items())

    def _left_s(self, elapsed):
        """Seconds left, or None before anything was done."""
        if not self.work:
            new = self.done - self.start_done
            return elapsed / new * (self.total - self.done) if new > 0 else None
        done = self.finished_cost + sum(self.work[k][1] * f for k, (_, f) in self.in_flight.items())
        return elapsed / done * (self.total_cost - done) if done > 0 else None

    def text(self, last=""):
        shown = min(self.done + self._rows_in_flight(), self.total)
        frac = shown / self.total if self.total else 1.0
        fill = int(round(frac * self.width))
        bar = "#" * fill + "." * (self.width - fill)
        elapsed = self.clock() - self.t0
        left = self._left_s(elapsed) if self.done < self.total else None
        if self.done >= self.total:
            eta = f"done in {elapsed:.0f} s"
        elif left is not None:
            eta = f"~{int(left // 60)}:{int(left % 60):02d} left"
        else:
            eta = "estimating time left"
        return f"{self.label}[{bar}] {shown}/{self.total} rows, {eta}" + (f" (last: {last})" if last else "")

    def partial(self, label, n_rows, fraction):
        """A window in flight is `fraction` done: a line whenever it completes another row's worth."""
        if label in self.closed or label not in self.work:
            return
        before = int(self.in_flight.get(label, (n_rows, 0.0))[1] * n_rows)
        self.in_flight[label] = (n_rows, min(float(fraction), 1.0 - 1e-9))  # its rows count when recorded
        if int(self.in_flight[label][1] * n_rows) > before:
            self.show(f"window '{label}' {int(fraction * n_rows)} of {n_rows} rows' work")

    def update(self, last="", window=None):
        """One row recorded (window: its window's label, whose cost counts once all its rows are)."""
        self.done += 1
        if window is not None and window in self.work and window not in self.closed:
            self.recorded[window] = self.recorded.get(window, 0) + 1
            if self.recorded[window] >= self.work[window][0]:
                self.closed.add(window)
                self.in_flight.pop(window, None)
                self.finished_cost += self.work[window][1]
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


_PROGRESS_SINK = None   # this process: bar.partial (one worker) or a queue to the parent


def report_window_progress(label, n_rows, fraction):
    """Called by a window's sampler as it advances (workflow/windows.py); reporting only."""
    sink = _PROGRESS_SINK
    if sink is None:
        return
    if callable(sink):
        sink(label, n_rows, fraction)
    else:
        sink.put((label, n_rows, fraction))


def _worker_init(parent_pid, queue):
    """Pool initializer: end with the parent; send window progress to the parent's queue."""
    global _PROGRESS_SINK
    from ventsource.common.worker_death import die_with_parent
    die_with_parent(parent_pid)
    _PROGRESS_SINK = queue


def worker_count(requested, n_jobs, oversubscribe=False):
    """Processes to start: no more than rows to invert, nor (unless asked) than cores."""
    n = min(int(requested), max(n_jobs, 1))
    return n if oversubscribe else max(1, min(n, os.cpu_count() or 1))


class RowJobs:
    """The rows still to invert, each job made only when it is handed out: a million-row
    file starts at once and holds one Measurement per job in flight, not one per row."""

    def __init__(self, series, done, prior, settings, out_dir):
        self.series, self.prior, self.settings, self.out_dir = series, prior, settings, out_dir
        self.todo = [i for i, rid in enumerate(series.ids) if rid not in done]

    def __len__(self):
        return len(self.todo)

    def __iter__(self):
        s, seed = self.series, self.settings["seed"]
        for i in self.todo:
            rid = s.ids[i]
            yield (*self.prior, s.measurements[i], rid, _time_text(s.times[i]), row_seed(seed, rid),
                   self.settings["options"], self.out_dir)


PROGRESS_POLL_S = 0.5


def _pool_map(pool, work, jobs, record, in_flight, drain=lambda: None):
    """Submit jobs as workers free up (at most in_flight pending), record each result;
    between results, drain() passes on the workers' progress messages."""
    pending, jobs = set(), iter(jobs)
    try:
        for job in jobs:
            pending.add(pool.submit(work, job))
            while len(pending) >= in_flight:
                pending = _record_some(pending, record, drain)
        while pending:
            pending = _record_some(pending, record, drain)
    except BaseException:
        for fut in pending:
            fut.cancel()
        raise


def _record_some(pending, record, drain):
    finished, pending = wait(pending, timeout=PROGRESS_POLL_S, return_when=FIRST_COMPLETED)
    drain()
    for fut in finished:
        record(fut.result())
    return pending


def _drainer(queue, bar):
    def drain():
        while True:
            try:
                msg = queue.get_nowait()
            except Empty:
                return
            bar.partial(*msg)
    return drain


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
        bar.update(f"{row['id']} P(M0)={p:.3f}" if p is not None else row["id"], row.get("window"))

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
        queue = multiprocessing.get_context().Queue()
        with ProcessPoolExecutor(max_workers=n_workers, initializer=_worker_init,
                                 initargs=(os.getpid(), queue)) as pool:
            _pool_map(pool, work, todo, record, 4 * n_workers, _drainer(queue, bar))
    else:
        _run_here(todo, work, record, bar)


def _run_here(todo, work, record, bar):
    """Every job in this process; a window's progress goes straight to the bar."""
    global _PROGRESS_SINK
    _PROGRESS_SINK = bar.partial
    try:
        for job in todo:
            record(work(job))
    finally:
        _PROGRESS_SINK = None
