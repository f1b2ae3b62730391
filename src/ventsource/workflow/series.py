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
import os
import shutil

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.workflow.hazard_export import hazard_document
from ventsource.workflow.hypothesis_rows import add_budget, extend_hazard, extra_columns
from ventsource.workflow.output_guard import refuse_foreign_run_folder
from ventsource.workflow.shift_reference import checked_count
from ventsource.workflow.row_jobs import (Progress, RowJobs, _invert_row, _run_rows, _time_text, row_seed,
                                         worker_count)
from ventsource.workflow.run_folder import (HAZARD_NAME, LOCK_NAME, RECORDED_SETTINGS, RUNNING_NAME,
                                            SUMMARY_NAME, _FolderLock, _atomic, _check_output_folder,
                                            _earlier_run, _mark_stopped, _refuse_if_in_use, _rewrite,
                                            _run_settings, _verified_rows, _write_json, file_sha256,
                                            prior_content_sha256, row_key)
from ventsource.workflow.summary_columns import summary_columns
from ventsource.workflow.windows import (assign_windows, invert_window, read_done_windows, short_window_lines,
                                         short_window_notes)

# names other modules and tests import from here (their homes: run_folder, row_jobs, hazard_export)
__all__ = ["run_series", "summary_columns", "hazard_document", "Progress", "row_key", "row_seed",
           "worker_count", "file_sha256", "HAZARD_NAME", "LOCK_NAME",
           "RECORDED_SETTINGS", "RUNNING_NAME", "SUMMARY_NAME"]


def run_series(series, prior_path, out_dir, seed=0, workers=1, resume=False, options=None,
               dask_scheduler=None, dask_local=False, progress_stream=None, model_note=None,
               oversubscribe=False, window=None, synthetic_data=False, progress_label="",
               budget_max_gap_days=None, shift_reference=0):
    """Invert every row; returns the list of summary rows in file order.

    window: None (the file's window column if it has one, else row by row), "rows",
    "column" or a time span in seconds (see ventsource.workflow.windows).
    budget_max_gap_days: longest interval the sulfur budget bridges (flux columns only).
    shift_reference: data sets simulated from the prior to say how far data usually move
    P(M0) (workflow/shift_reference.py; 0: not run).

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
    prior_sha = prior_content_sha256(prior_path)  # a comment changed is the same prior
    settings = _run_settings(series, prior_path, prior_sha, seed, options)
    settings["window"] = window
    extras = {"synthetic_data": synthetic_data, "progress_label": progress_label,
              "budget_max_gap_days": budget_max_gap_days, "shift_reference": checked_count(shift_reference)}
    groups = assign_windows(series, window)  # checked before anything is written
    if groups is not None and (options or {}).get("engine") == "emcee":
        raise InputError("--engine emcee inverts row by row; windows (--window or the file's window "
                         "column) use the SMC engine: drop --engine emcee or give --window 1")
    settings["window_per_row"] = None if groups is None else list(spec.window_per_row)
    _check_output_folder(out_dir)
    refuse_foreign_run_folder(out_dir, (series.path, prior_path))
    _refuse_if_in_use(out_dir)
    window_column = series.windows is not None
    _earlier_run(out_dir, settings, resume, window_column)
    with _FolderLock(out_dir):
        old = _earlier_run(out_dir, settings, resume, window_column)  # again, now that no other run can write
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
    from ventsource.workflow.prior_check import refuse_prior_without_gas
    refuse_prior_without_gas(spec, prior_path)
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


def _run_locked(series, spec, prior_path, prior_sha, out_dir, settings, old, resume, workers,
                dask_scheduler, dask_local, progress_stream, model_note, oversubscribe, groups=None,
                extras=None):
    extras = extras or {}
    cols = summary_columns(spec.free_names, series.ratio_names)  # one table shape, rows or windows
    if groups is None:
        done, failed = _verified_rows(out_dir, series.ids, prior_sha, cols) if resume else ({}, [])
    else:
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
    if not os.path.exists(stored_prior) or file_sha256(stored_prior) != file_sha256(prior_path):
        _atomic(stored_prior, lambda part: shutil.copyfile(prior_path, part))
    running = os.path.join(out_dir, RUNNING_NAME)
    _rewrite(running, cols, [done[i] for i in series.ids if i in done])
    work, todo = _jobs(series, groups, done, prior_path, prior_ref, settings, out_dir)
    bar = Progress(len(series.ids), len(done), stream=progress_stream, label=extras.get("progress_label", ""),
                   work=None if groups is None else window_work(todo))
    for line in short_window_lines(groups, series.ids):  # also in README.txt and the flag summary
        bar.stream.write(f"warning: {line}\n")
    if failed:
        bar.stream.write(f"{len(failed)} finished row(s) failed verification and are inverted again: "
                         f"{', '.join(failed[:5])}{' ...' if len(failed) > 5 else ''}\n")
    bar.show("resumed" if done else "")
    _run_rows(todo, done, running, cols, bar, workers, dask_scheduler, dask_local, oversubscribe, work)
    rows = _finish(series, spec, prior_path, out_dir, settings, cols, done, model_note, extras)
    _write_json(run_path, dict(settings, status="complete", caution=CAUTION))
    from ventsource.workflow.run_summary import flag_summary
    bar.stream.write("\n".join(flag_summary(rows)) + "\n")
    return rows


def window_work(todo):
    """{label: (rows, relative cost)} of the window jobs still to invert (for the progress bar)."""
    from ventsource.inference.window.sampling import expected_cost
    return {job[2]: (len(job[3]), expected_cost(len(job[3]), job[7])) for job in todo}


def _jobs(series, groups, done, prior_path, prior_ref, settings, out_dir):
    """(worker function, its argument tuples) for the rows or windows still to invert."""
    if groups is None:
        return _invert_row, RowJobs(series, done, (str(prior_path), prior_ref), settings, out_dir)
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
                             window_per_row=settings.get("window_per_row"), window=settings.get("window"),
                             synthetic_data=extras.get("synthetic_data", False))
    from ventsource.workflow.hazard_export import ordered
    from ventsource.workflow.run_folder import write_text_json
    from ventsource.workflow.shift_reference import reference_entry, run_reference
    ref = run_reference(out_dir, spec, series, settings, extras.get("shift_reference", 0))
    hazard = ordered(dict(extend_hazard(hazard, rows, series, gap_days),
                          p_magmatic_shift_reference=reference_entry(ref)))
    write_text_json(os.path.join(out_dir, HAZARD_NAME), hazard)
    from ventsource.workflow.table_notes import information_notes, write_table_readme
    write_table_readme(out_dir, {SUMMARY_NAME: "one row per measurement (see docs/outputs.md)",
                                 HAZARD_NAME: "per-row probabilities with provenance and flag meanings",
                                 "report.html": "the run on one page for a panel (figures included; "
                                                "open in any browser, no network needed)"},
                       synthetic=hazard["synthetic"], flags=list(hazard["flag_glossary"]),
                       notes=short_window_notes(rows) + information_notes(rows, ref))
    from ventsource.workflow.report_html import write_report
    write_report(out_dir)  # drawn again with the figures by the commands that draw them
    return rows
