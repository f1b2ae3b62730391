"""Windows of a series: which rows share one magma source, and their inversion.

A window is chosen by the user: `--window 30d` (consecutive spans of time from the
first measurement: s, min, h, d, w), a `window` column in the measurement file (the
user's own periods), or `--window 1` (every row alone, the row-by-row inversion).
Each window's rows are inverted together (ventsource.inference.window.sampling);
each row's summary is written as rows/KEY.json and the shared posterior as
windows/WKEY.nc, so an interrupted run keeps every finished window.
"""
from __future__ import annotations

import json
from functools import partial
import os
import re
import warnings

import numpy as np

from ventsource.common.errors import InputError
from ventsource.inference.engines.run_rhat import between_run_rhat
from ventsource.workflow.netcdf_bytes import write_netcdf
from ventsource.workflow.summary_columns import complete, has_columns, quantile_columns, summary_columns
from ventsource.workflow.window_if_scrubbed import if_scrubbed_fields, prior_draws

_UNITS_S = {"s": 1, "min": 60, "h": 3600, "d": 86400, "w": 7 * 86400}


def parse_window_option(text):
    """'1' -> "rows" (row by row); '30d' -> seconds; 'column' -> the file's window column."""
    s = str(text).strip()
    if s == "1":
        return "rows"
    if s in ("column", "auto"):  # auto: segments the data choose (workflow/segments.py)
        return s
    m = re.fullmatch(r"(\d+(?:\.\d+)?)\s*(s|min|h|d|w)", s)
    if not m or float(m.group(1)) <= 0:
        raise InputError(f"--window '{text}': give 1 (row by row), a time span such as 30d, 12h, "
                         f"2w, 'column' (the measurement file's window column) or 'auto' (segments "
                         f"the data choose)")
    seconds = float(m.group(1)) * _UNITS_S[m.group(2)]
    if seconds < 1:  # row times have one-second resolution
        raise InputError(f"--window '{text}': a window spans at least 1 s (times are read to the second)")
    return seconds


def assign_windows(series, window):
    """Ordered list of (window label, [row indices]) or None for row-by-row."""
    if window == "rows" or (window is None and series.windows is None):
        return None
    if window == "auto":  # chosen later by the data (workflow/segments.py), inside the run's lock
        return []
    if window == "column" or (window is None and series.windows is not None):
        if series.windows is None:
            raise InputError(f"{series.path}: --window column needs a 'window' column in the file")
        labels = series.windows
    else:
        t = np.array(series.times, dtype="datetime64[s]").astype(np.int64)
        k = np.floor((t - t.min()) / window).astype(int)
        labels = [f"w{v:04d}" for v in k]
    groups = {}
    t = np.array(series.times, dtype="datetime64[s]").astype(np.int64)
    for i in np.argsort(t, kind="stable"):  # a window's rows in time order, whatever the file's
        groups.setdefault(labels[i], []).append(int(i))
    first = {lab: min(rows) for lab, rows in groups.items()}  # windows in file order, as before
    return sorted(groups.items(), key=lambda item: first[item[0]])


def short_window_lines(groups, ids=None):
    """Warnings for windows too short for the change-of-source check (fewer than its
    split_min_rows, 4). groups: [(label, [row indices or ids])]; None (row by row): none."""
    from ventsource.inference.window.sampling import WINDOW_DEFAULTS
    least = WINDOW_DEFAULTS["split_min_rows"]
    short = [(label, len(idx)) for label, idx in (groups or []) if len(idx) < least]
    if not short:
        return []
    named = ", ".join(f"'{label}' ({n} row{'s' if n > 1 else ''})" for label, n in short[:10])
    more = f" and {len(short) - 10} more" if len(short) > 10 else ""
    return [f"{len(short)} window(s) of fewer than {least} rows: {named}{more}. Their change-of-source "
            f"check is not run (source_check = not_run, flag source_check_not_run; a one-row window "
            f"runs no source check at all): a change of magma inside them would go unnoticed."]


def short_window_notes(rows):
    """The same warning for README.txt, from the finished rows (window, window_n_rows)."""
    sizes = {}
    for r in rows:
        if r.get("window") is not None and r.get("window_n_rows") is not None:
            sizes[r["window"]] = int(r["window_n_rows"])
    return ["Warning: " + line for line in short_window_lines([(k, [0] * n) for k, n in sizes.items()])]


def window_key(label):
    from ventsource.workflow.run_folder import row_key
    return row_key(f"window-{label}")


def invert_window(args):
    """Invert one window and write its files; returns the summary rows of its rows."""
    prior_path, prior_ref, label, ids, times, measurements, seed, options, out_dir = args
    from ventsource.common.threads import limit_blas_threads
    limit_blas_threads()
    from ventsource.inference.window.sampling import WindowError, infer_window
    from ventsource.workflow.row_jobs import _cached_spec, report_window_progress
    from ventsource.workflow.run_folder import _atomic, _dump_json, file_sha256, row_key
    spec = _cached_spec(prior_path, prior_ref["sha256"])
    opts = {k: v for k, v in options.items() if k in _WINDOW_OPTION_NAMES}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            res = infer_window(measurements, spec, seed=seed,
                               progress=partial(report_window_progress, label, len(ids)), **opts)
        except WindowError as exc:
            raise InputError(f"window '{label}': {exc}") from None
    idata = res.idata()
    idata.posterior.attrs["prior"] = json.dumps(prior_ref)
    nc = os.path.join(out_dir, "windows", f"{window_key(label)}.nc")
    _atomic(nc, partial(write_netcdf, idata))
    nc_sha = file_sha256(nc)
    shared = _window_fields(label, times, res, spec)
    prior = prior_draws(spec, seed)
    rows = []
    for rid, t, r in zip(ids, times, res.rows):
        row = window_row_summary(rid, t, r, res, seed, spec, shared, prior)
        row["nc_sha256"], row["prior_sha256"] = nc_sha, prior_ref["sha256"]
        _atomic(os.path.join(out_dir, "rows", f"{row_key(rid)}.json"), lambda part: _dump_json(part, row, None))
        rows.append(row)
    return rows


_WINDOW_OPTION_NAMES = ("n_particles", "n_runs", "ess_target", "max_moves", "alpha", "pi0", "kind",
                        "dof", "n_source_check", "split_check", "split_particles", "split_runs")


def _window_fields(label, times, res, spec):
    """The fields every row of a window repeats: the window's span and checks, and the
    shared parameters' posterior quantiles, R-hat and bulk ESS (across the window's runs)."""
    t = np.array([x.rstrip("Z") for x in times], dtype="datetime64[s]")
    out = {"window": label, "window_first_time": f"{t.min()}Z", "window_last_time": f"{t.max()}Z",
           "window_span_days": float((t.max() - t.min()).astype(np.int64)) / 86400.0,
           "window_n_rows": len(times), "source_check": res.source_check,
           "log10_bf_one_source": _finite_or_none(res.log10_bf_shared),
           "log10_bf_one_vs_split": _finite_or_none(res.log10_bf_split),
           "log10_bf_one_vs_split_error": _finite_or_none(res.log10_bf_split_error)}
    theta = np.asarray(res.shared_draws, dtype=float)
    for j, name in enumerate(res.shared_names):
        if name not in spec.free_names:
            continue  # pooling hyperparameters: in windows/*.nc only
        x = theta[:, :, j]
        out.update(zip(quantile_columns(f"{name}_avg"), (float(v) for v in np.quantile(x, [0.05, 0.5, 0.95]))))
        out[f"{name}_rhat"] = _finite_or_none(between_run_rhat(x[:, :, None]))
        out[f"{name}_ess_bulk"] = _ess_bulk(x)
    return out


def _ess_bulk(x):
    """Bulk ESS of one shared parameter's (runs, particles) draws (ArviZ, as row by row)."""
    import arviz as az
    if x.shape[0] < 2 or not np.all(np.isfinite(x)) or np.ptp(x) == 0:
        return None
    return _finite_or_none(float(az.ess(x, method="bulk")))


def window_row_summary(rid, time_text, r, res, seed, spec, shared, prior=None):
    """One row's summary fields; prior: window_if_scrubbed.prior_draws(spec, seed), drawn
    once per window (made here when not given)."""
    from ventsource.workflow.hypothesis_rows import DRAWS_KEY, compact_draws, hypothesis_fields
    row = dict(shared, id=rid, time=time_text, p_magmatic=r.p_magmatic,
               p_magmatic_error=r.p_magmatic_error, flags=";".join(r.flags + res.flags), seed=int(seed))
    # the row's posterior if scrubbed: shared quantiles, P(s < epsilon), contractions
    fields = if_scrubbed_fields(r, res.shared_names, res.shared_draws, spec, prior or prior_draws(spec, seed))
    row.update({k: _finite_or_none(v) for k, v in fields.items()})
    if res.pi0 is not None and np.isfinite(r.p_magmatic):
        row["p_magmatic_shift"] = float(r.p_magmatic - res.pi0)
    if res.information is not None:
        row["unresolved_direction"] = "shared: " + res.information["unresolved_words"]
    for tag, q in (("scrubbed_so2_avg", r.scrubbed_model_averaged),
                   ("scrubbed_so2_if_scrubbed", r.scrubbed_if_scrubbed),
                   ("pressure_bar_avg", r.pressure_bar),
                   ("pressure_bar_if_scrubbed", r.pressure_if_scrubbed)):
        row.update(zip(quantile_columns(tag), (_finite_or_none(v) for v in q)))
    row.update(hypothesis_fields(r.hypotheses))
    row[DRAWS_KEY] = compact_draws(r.budget_draws, seed)
    for name, q in r.predictive.items():
        row[f"pp {name}_q05"], row[f"pp {name}_median"], row[f"pp {name}_q95"] = (float(v) for v in q)
    return complete(row, summary_columns(spec.free_names, ()))


def _finite_or_none(x):
    return float(x) if x is not None and np.isfinite(x) else None  # not computed: empty, not NaN


def read_done_windows(out_dir, groups, ids):
    """Rows of windows whose files are all present and agree (resume): every row's summary
    names the window file's sha256; anything else is inverted again."""
    from ventsource.workflow.run_folder import file_sha256, row_key
    done = {}
    for label, idx in groups:
        nc = os.path.join(out_dir, "windows", f"{window_key(label)}.nc")
        if not os.path.exists(nc):
            continue
        sha, rows = file_sha256(nc), {}
        for i in idx:
            try:
                with open(os.path.join(out_dir, "rows", f"{row_key(ids[i])}.json")) as fh:
                    row = json.load(fh)
            except (OSError, ValueError):
                row = None
            if not isinstance(row, dict) or row.get("id") != ids[i] or row.get("nc_sha256") != sha \
                    or not has_columns(row, summary_columns((), ())):
                rows = None
                break
            rows[ids[i]] = row
        if rows:
            done.update(rows)
    return done
