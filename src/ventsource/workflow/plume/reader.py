"""Raw sensor CSV files read in chunks with bounded memory, checked row by row.

Format: optional leading lines starting with '#', then a header row with a
`time` column (ISO 8601 with 'Z' or a UTC offset) and one column per gas or
meteorological quantity with its unit in brackets (`SO2 [ppmv]`, `T [C]`,
`RH [%]`, `P [hPa]`); other columns are ignored. Every problem is one
InputError naming file, row (line number in the file) and column.
"""
import re
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ventsource.common.errors import InputError
from ventsource.workflow.plume.humidity import h2o_ppmv
from ventsource.workflow.plume.units import canonical_name, conversion, split_header

_AWARE = r"[T ]\d\d:\d\d(?::\d\d(?:\.\d+)?)?(?:Z|[+-]\d\d:?\d\d)$"


@dataclass
class Chunk:
    times_ns: np.ndarray       # int64 ns since 1970-01-01 UTC
    values: dict               # name -> float64 array (ppmv, C, %, hPa)
    lines: np.ndarray          # int64 line number in the file of each row


@dataclass
class RawLayout:
    path: str
    comment_lines: int
    time_column: str
    columns: dict              # canonical name -> header text
    scale: dict                # canonical name -> (scale, offset)
    ignored: list


def _fail(path, line, column, what):
    col = f", column '{column}'" if column is not None else ""
    raise InputError(f"{path}: row {line}{col}: {what}")


def inspect_header(path, unit_overrides=None):
    """Read the header and decide which columns to use and how to convert them."""
    unit_overrides = dict(unit_overrides or {})
    comments, header = 0, None
    try:
        with open(path, "r", encoding="utf-8-sig") as fh:
            for line in fh:
                if line.startswith("#"):
                    comments += 1
                    continue
                header = line.rstrip("\r\n")
                break
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except (UnicodeDecodeError, IsADirectoryError):
        raise InputError(f"{path}: not a UTF-8 text file") from None
    if not header:
        raise InputError(f"{path}: no header row (expected time and gas columns)")
    cells = [c.strip() for c in header.split(",")]
    row = comments + 1
    if len(set(cells)) != len(cells):
        dup = next(c for c in cells if cells.count(c) > 1)
        _fail(path, row, dup, "column appears twice")
    time_cols = [c for c in cells if split_header(c)[0].lower() == "time"]
    if not time_cols:
        _fail(path, row, "time", "missing time column")
    columns, scale, ignored = {}, {}, []
    for c in cells:
        if c == time_cols[0]:
            continue
        name, unit = split_header(c)
        canon = canonical_name(name)
        if canon is None:
            ignored.append(c)
            continue
        if canon in columns:
            _fail(path, row, c, f"a second column for {canon} (first: '{columns[canon]}')")
        unit = unit_overrides.get(canon, unit)
        scale[canon] = conversion(path, c, canon, unit, row)
        columns[canon] = c
    for name in unit_overrides:
        if name not in columns:
            raise InputError(f"{path}: --units names '{name}', which is not a column of the file")
    return RawLayout(str(path), comments, time_cols[0], columns, scale, ignored)


def _parse_times(text):
    """Fast path: one pandas parse; a column mixing offsets (or offsets and none) falls back
    to UTC conversion plus a per-row check for a missing offset."""
    try:
        parsed = pd.to_datetime(text, format="ISO8601", errors="coerce")
        if isinstance(parsed.dtype, pd.DatetimeTZDtype):
            return parsed, np.zeros(len(text), dtype=bool)
        if parsed.dtype.kind == "M":
            return parsed.dt.tz_localize("UTC"), np.ones(len(text), dtype=bool)
    except (ValueError, TypeError):
        pass
    parsed = pd.to_datetime(text, format="ISO8601", utc=True, errors="coerce")
    return parsed, ~text.str.contains(_AWARE, na=False).to_numpy()


def _check_times(layout, text, first_line, previous_ns, assume_utc):
    path, col = layout.path, layout.time_column
    text = text.astype(str)
    parsed, naive = _parse_times(text)
    bad = np.flatnonzero(parsed.isna().to_numpy())
    if bad.size:
        i = bad[0]
        _fail(path, first_line + i, col, f"'{text.iloc[i]}' is not an ISO 8601 date-time")
    if not assume_utc and naive.any():
        i = np.flatnonzero(naive)[0]
        _fail(path, first_line + i, col, f"'{text.iloc[i]}' has no UTC offset; add 'Z' or an "
              "offset such as +01:00, or pass --assume-utc")
    ns = parsed.dt.tz_convert(None).to_numpy().astype("datetime64[ns]").astype(np.int64)
    steps = np.diff(ns, prepend=ns[0] if previous_ns is None else previous_ns)
    if previous_ns is None:
        steps[0] = 1
    wrong = np.flatnonzero(steps <= 0)
    if wrong.size:
        i = wrong[0]
        what = "duplicated timestamp" if steps[i] == 0 else "time goes backwards"
        _fail(path, first_line + i, col, f"{what} ('{text.iloc[i]}'); times must increase")
    return ns


def _check_numbers(layout, name, series, first_line):
    column = layout.columns[name]
    values = pd.to_numeric(series, errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        i = bad[0]
        raw = series.iloc[i]
        what = ("empty or NaN value" if raw is None or (isinstance(raw, float) and np.isnan(raw))
                or str(raw).strip().lower() in ("", "nan") else f"'{raw}' is not a finite number")
        _fail(layout.path, first_line + i, column, what)
    scale, offset = layout.scale[name]
    values = values * scale + offset if (scale != 1.0 or offset != 0.0) else values
    low, high, what = PLAUSIBLE.get(name, GAS_PLAUSIBLE)
    out = np.flatnonzero((values < low) | (values > high))
    if out.size:
        i = out[0]
        _fail(layout.path, first_line + i, column, f"'{series.iloc[i]}' is {what}")
    return values


# Plausible readings of a plume station, in ppmv / C / % / hPa (common practice, no source):
# air from polar cold to air warmed near a vent; RH sensors read a little above 100 % near
# saturation; station pressure from the highest summits (~330 hPa) to sea level (~1085 hPa).
PLAUSIBLE = {"T": (-90.0, 100.0, "not a plausible air temperature (-90 to 100 C)"),
             "RH": (0.0, 105.0, "not a relative humidity (0 to 105 %)"),
             "P": (300.0, 1100.0, "not a plausible station pressure (300 to 1100 hPa)")}
GAS_PLAUSIBLE = (-1e6, 1e6, "more than a mole fraction of 100 %")


def read_chunks(layout, needed, chunk_rows=200_000, assume_utc=False):
    """Yield Chunk objects of at most chunk_rows rows; `needed` lists canonical names."""
    first_line = layout.comment_lines + 2
    previous = None
    # every column is parsed (no usecols), so a row with more cells than the header is an error
    reader = pd.read_csv(layout.path, skiprows=layout.comment_lines,
                         dtype={layout.time_column: str}, chunksize=chunk_rows, index_col=False,
                         skip_blank_lines=False, encoding="utf-8-sig", skipinitialspace=True)
    with warnings.catch_warnings():
        warnings.simplefilter("error", pd.errors.ParserWarning)
        try:
            for frame in reader:
                if len(frame) == 0:
                    continue
                frame.columns = [c.strip() for c in frame.columns]
                ns = _check_times(layout, frame[layout.time_column], first_line, previous, assume_utc)
                values = {n: _check_numbers(layout, n, frame[layout.columns[n]], first_line) for n in needed}
                lines = np.arange(first_line, first_line + len(frame), dtype=np.int64)
                yield Chunk(ns, values, lines)
                previous = ns[-1]
                first_line += len(frame)
        except pd.errors.ParserWarning:
            raise InputError(f"{layout.path}: row {first_line}: more cells than the header has "
                             "columns") from None
        except pd.errors.ParserError as exc:
            found = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(exc))
            if found:
                raise InputError(f"{layout.path}: row {int(found.group(2))}: "
                                 f"{found.group(3)} cells but the header has {found.group(1)} columns") from None
            raise InputError(f"{layout.path}: malformed CSV ({str(exc).splitlines()[0]})") from None


def add_h2o(chunk):
    """H2O ppmv from T, RH and P (Buck 1981) when the file has no H2O column."""
    v = chunk.values
    v["H2O"] = h2o_ppmv(v["T"], v["RH"], v["P"])
    return chunk
