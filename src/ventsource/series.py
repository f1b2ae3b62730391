"""Series runner: every row of a measurement file inverted, results written
as each finishes, so an interrupted run loses nothing already done.

Per-row seeds derive from the run seed and the row identifier (not the row
position or the worker), so results do not depend on worker count or order.
"""
import hashlib
import json
import os
from concurrent.futures import ProcessPoolExecutor, as_completed

import numpy as np

from .caution import CAUTION

SUMMARY_NAME = "summary.csv"


def row_seed(run_seed, row_id):
    digest = hashlib.sha256(f"{int(run_seed)}:{row_id}".encode()).digest()
    return int.from_bytes(digest[:8], "little") % (2**63 - 1)


def _summary_columns(free_names):
    cols = ["id", "time", "p_magmatic", "p_magmatic_error", "p_scrubbed_below_epsilon", "flags"]
    for name in free_names:
        cols += [f"{name}_median", f"{name}_q05", f"{name}_q95", f"{name}_rhat", f"{name}_ess_bulk"]
    return cols


def _fmt(v):
    if v is None:
        return ""
    if isinstance(v, float):
        return "" if not np.isfinite(v) else repr(v)
    return str(v)


def _invert_row(args):
    prior_path, measurement, row_id, time_text, seed, options, out_dir = args
    from .inference import infer
    from .priors import load_prior_file
    spec = load_prior_file(prior_path)
    result = infer(measurement, spec, seed=seed, **options)
    nc_path = os.path.join(out_dir, "rows", f"{_safe(row_id)}.nc")
    tmp = nc_path + ".part"
    result.idata.to_netcdf(tmp)
    os.replace(tmp, nc_path)  # atomic: a file present is a finished file
    summary = result.summary()
    row = {"id": row_id, "time": time_text, "p_magmatic": result.p_magmatic,
           "p_magmatic_error": result.p_magmatic_error,
           "p_scrubbed_below_epsilon": result.p_scrubbed_below_epsilon,
           "flags": ";".join(result.flags)}
    for name in spec.free_names:
        s = summary.loc[name]
        row[f"{name}_median"] = float(s["median"])
        row[f"{name}_q05"] = float(s["q05"]) if "q05" in s else float(s.iloc[2])
        row[f"{name}_q95"] = float(s["q95"]) if "q95" in s else float(s.iloc[3])
        row[f"{name}_rhat"] = float(s["r_hat"])
        row[f"{name}_ess_bulk"] = float(s["ess_bulk"])
    return row


def _safe(row_id):
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in row_id)


def run_series(series, prior_path, out_dir, seed=0, workers=1, resume=False, options=None,
               progress=print):
    """Invert every row; returns the list of summary rows in file order."""
    from .priors import load_prior_file
    spec = load_prior_file(prior_path)
    options = dict(options or {})
    os.makedirs(os.path.join(out_dir, "rows"), exist_ok=True)
    summary_path = os.path.join(out_dir, SUMMARY_NAME)
    cols = _summary_columns(spec.free_names)
    done = {}
    if resume and os.path.exists(summary_path):
        import pandas as pd
        for rec in pd.read_csv(summary_path, dtype={"id": str}, keep_default_na=False).to_dict("records"):
            if os.path.exists(os.path.join(out_dir, "rows", f"{_safe(rec['id'])}.nc")):
                done[rec["id"]] = rec
        _rewrite(summary_path, cols, [done[i] for i in series.ids if i in done])
    elif not resume or not os.path.exists(summary_path):
        _rewrite(summary_path, cols, [])
    with open(os.path.join(out_dir, "run.json"), "w") as fh:
        json.dump({"prior": str(prior_path), "seed": int(seed), "data": series.path,
                   "options": options, "caution": CAUTION}, fh, indent=2)
    todo = [(prior_path, m, rid, str(t), row_seed(seed, rid), options, out_dir)
            for rid, t, m in zip(series.ids, series.times, series.measurements) if rid not in done]
    total = len(series.ids)
    finished = len(done)
    if todo:
        progress(f"{finished}/{total} rows already finished; inverting {len(todo)}")

    def record(row):
        nonlocal finished
        with open(summary_path, "a") as fh:
            fh.write(",".join(_csv_cell(_fmt(row.get(c))) for c in cols) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
        finished += 1
        done[row["id"]] = row
        progress(f"[{finished}/{total}] {row['id']}: P(M0) = {_fmt(row['p_magmatic'])[:6]}")

    if workers <= 1:
        for job in todo:
            record(_invert_row(job))
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            futures = [pool.submit(_invert_row, job) for job in todo]
            for fut in as_completed(futures):
                record(fut.result())
    rows = [done[i] for i in series.ids]
    _rewrite(summary_path, cols, rows)  # final file in input order
    return rows


def _csv_cell(text):
    return f'"{text}"' if ("," in text or '"' in text) else text


def _rewrite(path, cols, rows):
    tmp = path + ".part"
    with open(tmp, "w") as fh:
        fh.write(",".join(cols) + "\n")
        for row in rows:
            fh.write(",".join(_csv_cell(_fmt(row.get(c))) for c in cols) + "\n")
    os.replace(tmp, path)
