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
import datetime
import math
import re
import unicodedata
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ventsource.common.errors import InputError
from ventsource.inference.likelihood import Measurement
from ventsource.ascent.observables import ratio_weights
from ventsource.chemistry.species import INDEX
from ventsource.workflow.flux_columns import FluxColumnReader

SIGMA_PREFIX = "sigma "
WINDOW_COLUMN = "window"  # optional: rows with the same label share one magma source
QUALITY_PREFIX = "quality "


@dataclass
class MeasurementSeries:
    path: str
    ids: list
    times: object         # numpy datetime64[s] per row (UTC), an array
    ratio_names: tuple
    measurements: object  # likelihood.Measurement per row (a sequence built on access)
    default_sigma: object = None  # what cells without their own sigma took (recorded by runs)
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


class MeasurementRows(Sequence):
    """Rows of a series as likelihood.Measurement objects, made when asked for: a file of
    a million rows keeps three (n, k) arrays instead of a million small objects."""

    def __init__(self, ratio_names, values, sigmas, censoring, labels):
        self.ratio_names, self.values, self.sigmas = tuple(ratio_names), values, sigmas
        self.censoring, self.labels = censoring, labels

    def __len__(self):
        return len(self.labels)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        return Measurement(self.ratio_names, self.values[i], self.sigmas[i], self.censoring[i],
                           label=self.labels[i])


def _fail(path, row, column, what):
    where = f"row {row}" + (f", column '{column}'" if column is not None else "")
    raise InputError(f"{path}: {where}: {what}")


# ISO 8601 extended date-time with an explicit UTC offset or Z (RFC 3339 profile);
# seconds and their fraction optional; the one accepted form.
_TIME = re.compile(r"(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?"
                   r"(?:(Z)|([+-])(\d{2}):(\d{2}))")
_EPOCH_ORDINAL = datetime.date(1970, 1, 1).toordinal()
TIME_RULE = "an ISO 8601 date-time with 'Z' or a UTC offset, e.g. 2026-03-14T10:20:00Z"


def _parse_time(text, path, row):
    """Seconds since 1970-01-01T00:00:00Z (fractions of a second dropped)."""
    s = text.strip()
    m = _TIME.fullmatch(s)
    if m is None:
        _fail(path, row, "time", f"'{s}' is not {TIME_RULE}" if s else f"empty; write {TIME_RULE}")
    y, mo, d, hh, mi, ss, z, sign, oh, om = m.groups()
    try:
        day = datetime.date(int(y), int(mo), int(d)).toordinal() - _EPOCH_ORDINAL
        datetime.time(int(hh), int(mi), int(ss or 0))
    except ValueError as exc:
        _fail(path, row, "time", f"'{s}': {exc}")
    offset = 0
    if z is None:
        if int(oh) > 23 or int(om) > 59:
            _fail(path, row, "time", f"'{s}': UTC offset out of range")
        offset = (int(oh) * 3600 + int(om) * 60) * (1 if sign == "+" else -1)
    return day * 86400 + int(hh) * 3600 + int(mi) * 60 + int(ss or 0) - offset


def _check_id(row_id, path, row):
    if not row_id:
        _fail(path, row, "id", "empty identifier")
    if not row_id.isprintable():  # fast test; the exact rule below
        for ch in row_id:
            if unicodedata.category(ch) in ("Cc", "Zl", "Zp"):
                _fail(path, row, "id", f"identifier {row_id!r} holds the control character "
                                       f"U+{ord(ch):04X}; identifiers are one line of printable text")


# A number as written in a CSV file: ASCII digits, optional sign, point and exponent;
# Python's float() also reads '0_70351' as 70351 and other scripts' digits.
_PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:inf|infinity|nan)",
                           re.IGNORECASE)


def _parse_cell(text, path, row, column):
    s = text.strip()
    if s == "" or s.upper() in ("NA", "NAN", "N/A"):
        return math.nan, 0
    flag = 0
    if s[0] in "<>":
        flag = -1 if s[0] == "<" else 1
        s = s[1:].strip()
    if _PLAIN_NUMBER.fullmatch(s) is None:  # float() would take '0_5', full-width digits
        _fail(path, row, column, f"'{text}' is not a number, '<x' or '>x'")
    v = float(s)
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
    try:  # streamed: a file of a million rows is never held as one string
        with open(path, "r", encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh)
            try:
                return _read_table(reader, path, per_column, fallback)
            except csv.Error as exc:  # e.g. a quote left open at the end of the file
                raise InputError(f"{path}: row {reader.line_num}: not valid CSV ({exc})") from None
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not UTF-8 text") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a directory, not a CSV file") from None
    except PermissionError:
        raise InputError(f"{path}: permission denied") from None


def _read_table(reader, path, per_column, fallback):
    header = next(reader, None)
    while header is not None and not any(h.strip() for h in header):  # leading blank lines
        header = next(reader, None)
    if header is None:
        raise InputError(f"{path}: the file is empty; expected a header row with id, time and ratio columns")
    header = [h.strip() for h in header]
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
    _check_distinct_ratios(path, ratio_cols)
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
    windows = [] if WINDOW_COLUMN in header else None
    ids, times, values, flags, sigmas = _read_rows(reader, path, header, ratio_cols, sigma_cols,
                                                  per_column, fallback, windows, flux)
    if not ids:
        raise InputError(f"{path}: no data rows under the header")
    rows = MeasurementRows(ratio_cols, values, sigmas, flags, ids)
    recorded = dict(per_column, **{"*": fallback}) if per_column else fallback
    return MeasurementSeries(str(path), ids, times, tuple(ratio_cols), rows, default_sigma=recorded,
                             windows=windows, fluxes=flux.series())


def _check_distinct_ratios(path, ratio_cols):
    """Refuse a ratio of a gas to itself, the same ratio written twice ('SO2/CO2' and
    'SO2 / CO2') and a ratio beside its inverse: each would count one measurement twice."""
    seen = {}
    for col in ratio_cols:
        top, bottom = ratio_weights(col)
        if np.array_equal(top, bottom):
            _fail(path, 1, col, "a ratio of a gas to itself carries no information")
        key, inverse = (top.tobytes(), bottom.tobytes()), (bottom.tobytes(), top.tobytes())
        if key in seen:
            _fail(path, 1, col, f"the same ratio as column '{seen[key]}'; keep one of them")
        if inverse in seen:
            _fail(path, 1, col, f"the inverse of column '{seen[inverse]}'; keep one of them")
        seen[key] = col


_SO2_BEARING = "a ratio with SO2 (SO2/CO2, H2S/SO2, CO2/ST, ...)"


def _check_rows_speak_to_so2(path, ratio_cols, values, rownums):
    """Scrubbing acts on SO2: a row without an SO2-bearing ratio has M0 and M1 fit it
    equally, and would read as 'magmatic' on no evidence; it is refused, never guessed."""
    so2 = INDEX["SO2"]
    bearing = [j for j, c in enumerate(ratio_cols) if any(w[so2] for w in ratio_weights(c))]
    if not bearing:
        _fail(path, 1, None, f"no column is {_SO2_BEARING}: the gas's source cannot be told from "
                             "scrubbing without one")
    silent = np.isnan(values[:, bearing]).all(axis=1)
    if silent.any():
        _fail(path, rownums[int(np.argmax(silent))], None,
              f"no value for {_SO2_BEARING}: such a row cannot speak to scrubbing; "
              "fill one or remove the row")


def _read_rows(reader, path, header, ratio_cols, sigma_cols, per_column, fallback, windows=None,
               flux=None):
    """Check every data row: identifiers and times row by row, ratio and sigma cells a
    column at a time (pandas.to_numeric; only cells that are not a plain positive number
    take the slow path). Returns ids, UTC seconds and (n, k) values, flags, sigmas."""
    n_cols, i_id, i_time = len(header), header.index("id"), header.index("time")
    i_ratio = [header.index(c) for c in ratio_cols]
    i_sigma = [sigma_cols.get(c) for c in ratio_cols]
    raw = [[] for _ in ratio_cols]
    raw_sigma = [[] if i is not None else None for i in i_sigma]
    keep = [(lst.append, i) for lst, i in zip(raw + raw_sigma, i_ratio + i_sigma) if i is not None]
    ids, seen, times, rownums, fullmatch = [], set(), [], [], _TIME.fullmatch
    for r, cells in enumerate(reader, start=2):
        if len(cells) != n_cols or not cells[i_id].strip():
            if not any(c.strip() for c in cells):
                continue
            if len(cells) != n_cols:
                _fail(path, r, None, f"{len(cells)} cells but the header has {n_cols} columns")
        row_id = cells[i_id].strip()
        if not row_id or not row_id.isprintable():
            _check_id(row_id, path, r)
        if row_id in seen:
            _fail(path, r, "id", f"duplicate identifier '{row_id}'")
        seen.add(row_id)
        t = cells[i_time].strip()
        if fullmatch(t) is None:
            _parse_time(t, path, r)  # raises with the reason
        times.append(t)
        for add, i in keep:
            add(cells[i])
        if flux is not None:
            flux.read_row(cells, r)
        if windows is not None:  # the user's own periods of one magma source
            label = cells[header.index(WINDOW_COLUMN)].strip()
            if not label:
                _fail(path, r, WINDOW_COLUMN, "empty window label (give every row one)")
            windows.append(label)
        ids.append(row_id)
        rownums.append(r)
    n, k = len(ids), len(ratio_cols)
    values, flags, sigmas = np.empty((n, k)), np.zeros((n, k), dtype=np.int8), np.empty((n, k))
    for j, col in enumerate(ratio_cols):
        values[:, j], flags[:, j] = _ratio_column(raw[j], rownums, path, col)
        sigmas[:, j] = _sigma_column(raw_sigma[j], rownums, path, col, float(per_column.get(col, fallback)))
    missing = np.isnan(values).all(axis=1) if n else np.zeros(0, bool)
    if missing.any():
        _fail(path, rownums[int(np.argmax(missing))], None, "every ratio is missing")
    _check_rows_speak_to_so2(path, ratio_cols, values, rownums)
    return ids, _utc_times(times, rownums, path), values, flags, sigmas


def _utc_times(texts, rownums, path):
    """datetime64[s] UTC of time texts already of the accepted form (_TIME): converted a
    column at a time; a text pandas refuses (Feb 30, hour 24, a year outside its range)
    is found and reported, or converted, by the row-by-row parser."""
    try:
        stamps = pd.to_datetime(pd.Series(texts, dtype=object), format="ISO8601", utc=True)
        return stamps.dt.tz_convert(None).to_numpy().astype("datetime64[s]")
    except (ValueError, OverflowError):  # includes pandas' out-of-bounds error
        secs = [_parse_time(t, path, r) for t, r in zip(texts, rownums)]
        return np.array(secs, dtype=np.int64).astype("datetime64[s]")


def _ratio_column(raw, rownums, path, col):
    values = pd.to_numeric(pd.Series(raw, dtype=object), errors="coerce").to_numpy(dtype=float, copy=True)
    flags = np.zeros(len(raw), dtype=np.int8)
    for i in np.flatnonzero(~((values > 0) & (values < np.inf))):  # censored, missing or wrong
        values[i], flags[i] = _parse_cell(raw[i], path, rownums[i], col)
    return values, flags


def _sigma_column(raw, rownums, path, col, default):
    if raw is None:
        return default
    out = pd.to_numeric(pd.Series(raw, dtype=object), errors="coerce").to_numpy(dtype=float, copy=True)
    for i in np.flatnonzero(~((out > 0) & (out <= 5))):
        text = raw[i].strip()
        out[i] = _parse_sigma(text, path, rownums[i], col) if text else default
    return out


def _parse_sigma(raw, path, row, col):
    if _PLAIN_NUMBER.fullmatch(raw.strip()) is None:
        _fail(path, row, SIGMA_PREFIX + col, f"'{raw}' is not a number")
    sig = float(raw)
    if not (math.isfinite(sig) and 0 < sig <= 5):
        _fail(path, row, SIGMA_PREFIX + col, f"relative 1-sigma must be in (0, 5], got '{raw}'")
    return sig
