"""Measurement file (read as it is by `ventsource run`), window sidecar and run record.

Columns: id, time (window centre, ISO 8601 UTC with 'Z'), one column per
ratio, `sigma RATIO` (relative 1-sigma), then `quality ...` columns that the
measurement reader skips: window start/end, file rows, lags, per-gas range
and noise, per-ratio points, R^2 and flags. Files are written to NAME.part
and renamed, so no half-written file is ever left under the final name.
"""
import csv
import json
import os

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.workflow.measurements import QUALITY_PREFIX


def iso_utc(ns):
    return str(np.datetime64(int(ns), "ns").astype("datetime64[s]")) + "Z"


def header(ratios, gases):
    cols = ["id", "time", *ratios, *(f"sigma {r}" for r in ratios)]
    q = QUALITY_PREFIX
    cols += [f"{q}start", f"{q}end", f"{q}rows", f"{q}lags s"]
    cols += [f"{q}range {g} ppmv" for g in gases] + [f"{q}noise {g} ppmv" for g in gases]
    for r in ratios:
        cols += [f"{q}points {r}", f"{q}R2 {r}", f"{q}flags {r}"]
    return cols


def _num(v, digits=6):
    return "" if v is None or not np.isfinite(v) else f"{v:.{digits}g}"


def row_cells(w, gases):
    cells = [w.window_id, iso_utc((w.start_ns + w.end_ns) // 2)]
    for r in w.results:
        cells.append("" if not np.isfinite(r.value) else f"{r.censor}{r.value:.6g}")
    for r in w.results:
        cells.append("" if r.censor or not np.isfinite(r.value) else _num(r.relative_sigma, 4))
    lags = ";".join(f"{g}={'~' if g in w.lags_kept else ''}{v:+g}" for g, v in w.lags_s.items()
                    if v or g in w.lags_kept)
    cells += [iso_utc(w.start_ns), iso_utc(w.end_ns), f"{w.first_line}-{w.last_line}", lags]
    ranges = {}
    for r in w.results:
        a, b = r.ratio.split("/")
        ranges[a], ranges[b] = r.y_range, r.x_range
    cells += [_num(ranges.get(g, np.nan), 4) for g in gases]
    cells += [_num(w.noise_ppmv.get(g, np.nan), 3) for g in gases]
    for r in w.results:
        cells += [str(r.n_points), _num(r.r_squared, 4), "; ".join(r.flags)]
    return cells


def has_value(w):
    return any(np.isfinite(r.value) for r in w.results)


def write_csv_atomic(path, cols, rows):
    part = f"{path}.part"
    with open(part, "w", encoding="utf-8", newline="") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(cols)
        out.writerows(rows)
    os.replace(part, path)


def write_json_atomic(path, doc):
    part = f"{path}.part"
    with open(part, "w", encoding="utf-8") as fh:
        json.dump(doc, fh, indent=2, default=str)
        fh.write("\n")
    os.replace(part, path)


def sidecar_paths(out_path):
    stem = out_path[:-4] if out_path.lower().endswith(".csv") else out_path
    return f"{stem}.windows.csv", f"{stem}.run.json"


def write_outputs(out_path, ratios, gases, windows, record):
    """Sidecar of every window, the measurement file of usable ones, then the run record."""
    cols = header(ratios, gases)
    rows = [row_cells(w, gases) for w in windows]
    windows_path, record_path = sidecar_paths(out_path)
    write_csv_atomic(windows_path, cols, rows)
    usable = [row for row, w in zip(rows, windows) if has_value(w)]
    write_csv_atomic(out_path, cols, usable)
    record = dict(record, caution=CAUTION, outputs={"measurements": out_path, "windows": windows_path},
                  windows_total=len(windows), windows_written=len(usable))
    write_json_atomic(record_path, record)
    return windows_path, record_path
