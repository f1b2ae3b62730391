"""Measurement files: one row per measurement or averaging window.

Format (CSV, comma-separated, UTF-8, header row):

* `id`    - a unique identifier per row (text);
* `time`  - ISO 8601 date or date-time (e.g. 2026-03-14T10:20:00Z);
* ratio columns named the trade's way: `SO2/CO2`, `H2S/SO2`, `H2O/CO2`,
  `CO2/ST`, `H2/H2O`, `CO/CO2`, ... Cells hold a positive number, `<x`
  (below a detection limit x), `>x` (above the range), or nothing (missing);
* optional `sigma SO2/CO2`-style columns: relative 1-sigma for that ratio
  per cell (0.15 = 15 %); an empty cell, or no such column, takes the
  default (the prior file's likelihood.relative_sigma, or --sigma);
* optional `SO2 flux`, `CO2 flux` columns (t/d) with `sigma SO2 flux`-style
  relative errors: see ventsource.workflow.flux_columns;
* optional `quality ...` columns (any name starting with "quality "): notes
  for people (e.g. points, R^2 and flags of a regression window), not read.

Every problem is reported as one line naming file, row and column.
"""
import csv
import math
from dataclasses import dataclass

import numpy as np

from ventsource.common.errors import InputError
from ventsource.inference.likelihood import Measurement
from ventsource.ascent.observables import ratio_weights
from ventsource.workflow.flux_columns import FluxColumnReader

SIGMA_PREFIX = "sigma "
WINDOW_COLUMN = "window"  # optional: rows with the same label share one magma source
QUALITY_PREFIX = "quality "


@dataclass
class MeasurementSeries:
    path: str
    ids: list
    times: list           # numpy datetime64[s] per row (UTC)
    ratio_names: tuple
    measurements: list    # likelihood.Measurement per row
    windows: list | None = None  # the optional `window` column: the user's own periods
    fluxes: object = None        # flux_columns.FluxSeries, or None without flux columns

    def __len__(self):
        return len(self.ids)

    def values_for(self, x_ratio, y_ratio):
        """(k, 2) exact values of two ratios, rows where both are present."""
        rows = []
        for m in self.measurements:
            names = list(m.ratio_names)
            if x_ratio in names and y_ratio in names:
                i, j = names.index(x_ratio), names.index(y_ratio)
                if m.censoring[i] == 0 and m.censoring[j] == 0 and np.isfinite(m.values[i]) \
                        and np.isfinite(m.values[j]):
                    rows.append((m.values[i], m.values[j]))
        return np.array(rows).reshape(-1, 2)


def _fail(path, row, column, what):
    where = f"row {row}" + (f", column '{column}'" if column is not None else "")
    raise InputError(f"{path}: {where}: {what}")


def _parse_time(text, path, row):
    s = text.strip()
    if not s:
        _fail(path, row, "time", "empty; write an ISO 8601 time such as 2026-03-14T10:20:00Z")
    core = s[:-1] if s.endswith("Z") else s
    if len(core) > 19 and core[19] in "+-" or ("+" in core[10:]):
        _fail(path, row, "time", f"'{s}': give times in UTC ('Z' or no offset)")
    try:
        return np.datetime64(core, "s")
    except ValueError:
        _fail(path, row, "time", f"'{s}' is not an ISO 8601 date or date-time")


def _parse_cell(text, path, row, column):
    s = text.strip()
    if s == "" or s.upper() in ("NA", "NAN", "N/A"):
        return math.nan, 0
    flag = 0
    if s[0] in "<>":
        flag = -1 if s[0] == "<" else 1
        s = s[1:].strip()
    try:
        v = float(s)
    except ValueError:
        _fail(path, row, column, f"'{text}' is not a number, '<x' or '>x'")
    if not math.isfinite(v) or v <= 0:
        _fail(path, row, column, f"'{text}': a molar ratio must be a positive finite number")
    return v, flag


def read_measurements(path, default_sigma=0.15):
    """Read and check a measurement CSV; returns a MeasurementSeries.

    default_sigma: relative 1-sigma for cells without their own `sigma RATIO` value;
    a number for every ratio, or a dict {ratio: sigma} with an optional "*" entry
    for the ratios it does not name (per-column defaults).
    """
    if isinstance(default_sigma, dict):
        per_column = dict(default_sigma)
        fallback = float(per_column.pop("*", 0.15))
    else:
        per_column, fallback = {}, float(default_sigma)
    try:
        with open(path, "r", encoding="utf-8-sig", newline="") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not UTF-8 text") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a directory, not a CSV file") from None
    if not text.strip():
        raise InputError(f"{path}: the file is empty; expected a header row with id, time and ratio columns")
    rows = list(csv.reader(text.splitlines()))
    header = [h.strip() for h in rows[0]]
    if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
        raise InputError(f"{path}: row 1: the delimiter must be a comma (found "
                         f"{'semicolons' if ';' in header[0] else 'tabs'})")
    for required in ("id", "time"):
        if required not in header:
            _fail(path, 1, required, "missing required column")
    seen = set()
    for col in header:
        if col in seen:
            _fail(path, 1, col, "column appears twice")
        seen.add(col)
    ratio_cols, sigma_cols = [], {}
    flux = FluxColumnReader(path, header)
    for col in header:
        if col in flux.columns:
            continue
        if col in ("id", "time", WINDOW_COLUMN) or col == "":
            if col == "":
                _fail(path, 1, col, "empty column name")
            continue
        if col.startswith(QUALITY_PREFIX):
            continue
        if col.startswith(SIGMA_PREFIX):
            sigma_cols[col[len(SIGMA_PREFIX):].strip()] = header.index(col)
            continue
        try:
            ratio_weights(col)
        except InputError as exc:
            _fail(path, 1, col, f"not a ratio column ({exc})")
        ratio_cols.append(col)
    flux.check_has_ratios(ratio_cols)
    if not ratio_cols:
        _fail(path, 1, None, "no ratio columns (e.g. SO2/CO2, H2S/SO2)")
    for name in per_column:
        if name not in ratio_cols:
            raise InputError(f"{path}: a default sigma is given for '{name}', which is not a "
                             f"ratio column ({', '.join(ratio_cols)})")
    for name in sigma_cols:
        if name not in ratio_cols:
            _fail(path, 1, SIGMA_PREFIX + name, f"uncertainty column for '{name}', which is not a ratio column")
    if len(rows) < 2:
        raise InputError(f"{path}: no data rows under the header")
    ids, times, ms, windows = [], [], [], []
    for r, cells in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(header):
            _fail(path, r, None, f"{len(cells)} cells but the header has {len(header)} columns")
        row_id = cells[header.index("id")].strip()
        if not row_id:
            _fail(path, r, "id", "empty identifier")
        if row_id in ids:
            _fail(path, r, "id", f"duplicate identifier '{row_id}'")
        t = _parse_time(cells[header.index("time")], path, r)
        values, flags, sigmas = [], [], []
        for col in ratio_cols:
            v, flag = _parse_cell(cells[header.index(col)], path, r, col)
            values.append(v)
            flags.append(flag)
            sig = float(per_column.get(col, fallback))
            if col in sigma_cols:
                raw = cells[sigma_cols[col]].strip()
                if raw:
                    try:
                        sig = float(raw)
                    except ValueError:
                        _fail(path, r, SIGMA_PREFIX + col, f"'{raw}' is not a number")
                    if not (math.isfinite(sig) and 0 < sig <= 5):
                        _fail(path, r, SIGMA_PREFIX + col,
                              f"relative 1-sigma must be in (0, 5], got '{raw}'")
            sigmas.append(sig)
        if all(math.isnan(v) for v in values):
            _fail(path, r, None, "every ratio is missing")
        ids.append(row_id)
        times.append(t)
        ms.append(Measurement(ratio_cols, values, sigmas, flags, label=row_id))
        flux.read_row(cells, r)
        if WINDOW_COLUMN in header:
            label = cells[header.index(WINDOW_COLUMN)].strip()
            if not label:
                _fail(path, r, WINDOW_COLUMN, "empty window label (give every row one)")
            windows.append(label)
    if not ids:
        raise InputError(f"{path}: no data rows under the header")
    return MeasurementSeries(str(path), ids, times, tuple(ratio_cols), ms,
                             windows if WINDOW_COLUMN in header else None, flux.series())
