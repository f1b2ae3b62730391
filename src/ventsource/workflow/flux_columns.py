"""Optional gas flux columns of a measurement file: `SO2 flux`, `CO2 flux`.

Cells: a flux in tonnes per day (>= 0), `<x` (below the detection limit x), or empty
(missing). Each may have a `sigma SO2 flux` / `sigma CO2 flux` column: relative
1-sigma per cell (0.2 = 20 %); an empty cell or no such column takes
DEFAULT_FLUX_SIGMA. Flux columns describe the same gas as the ratios of their row, so
a file with flux columns needs at least one ratio column. Every problem is one line
naming file, row and column.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ventsource.common.errors import InputError

FLUX_COLUMNS = ("SO2 flux", "CO2 flux")
SIGMA_PREFIX = "sigma "
# plume-speed and column-amount errors make 20-30 % usual for spectrometer fluxes
# (common practice, no source); the lower end is the default
DEFAULT_FLUX_SIGMA = 0.2


@dataclass
class FluxSeries:
    """Per flux column: values (t/d, NaN missing; the limit where censored), censoring
    (0 exact, -1 below detection) and relative 1-sigma, one entry per row."""

    values: dict
    censoring: dict
    sigma: dict

    def __contains__(self, name):
        return name in self.values


def _fail(path, row, column, what):
    raise InputError(f"{path}: row {row}, column '{column}': {what}")


class FluxColumnReader:
    """Finds the flux columns of a header and reads their cells row by row."""

    def __init__(self, path, header):
        self.path = path
        self.index = {c: header.index(c) for c in FLUX_COLUMNS if c in header}
        self.sigma_index = {}
        for col in header:
            if col.startswith(SIGMA_PREFIX) and col[len(SIGMA_PREFIX):].strip().endswith(" flux"):
                name = col[len(SIGMA_PREFIX):].strip()
                if name not in self.index:
                    what = (f"uncertainty of '{name}', but the file has no '{name}' column"
                            if name in FLUX_COLUMNS else
                            f"unknown flux '{name}' (flux columns: {', '.join(FLUX_COLUMNS)})")
                    _fail(path, 1, col, what)
                self.sigma_index[name] = header.index(col)
            elif col.endswith(" flux") and col not in FLUX_COLUMNS:
                _fail(path, 1, col, f"unknown flux column (flux columns: {', '.join(FLUX_COLUMNS)})")
        self.rows = {c: [] for c in self.index}

    @property
    def columns(self):
        """Header names handled here (not ratio columns)."""
        return set(self.index) | {SIGMA_PREFIX + n for n in self.sigma_index}

    def check_has_ratios(self, ratio_cols):
        if self.index and not ratio_cols:
            col = next(iter(self.index))
            _fail(self.path, 1, col, "a flux column needs at least one ratio column (e.g. SO2/CO2) "
                                     "describing the same gas")

    def read_row(self, cells, row):
        for col, j in self.index.items():
            value, flag = self._cell(cells[j], row, col)
            sigma = DEFAULT_FLUX_SIGMA
            if col in self.sigma_index:
                raw = cells[self.sigma_index[col]].strip()
                if raw:
                    sigma = self._sigma(raw, row, SIGMA_PREFIX + col)
            self.rows[col].append((value, flag, sigma))

    def _cell(self, text, row, col):
        s = text.strip()
        if s == "" or s.upper() in ("NA", "NAN", "N/A"):
            return math.nan, 0
        flag = 0
        if s[0] == "<":
            flag, s = -1, s[1:].strip()
        try:
            v = float(s)
        except ValueError:
            _fail(self.path, row, col, f"'{text.strip()}' is not a flux in t/d, '<x' or empty")
        if not math.isfinite(v) or v < 0 or (flag == -1 and v == 0):
            _fail(self.path, row, col, f"'{text.strip()}': a flux must be a finite number >= 0 t/d "
                                       "(a detection limit > 0)")
        return v, flag

    def _sigma(self, raw, row, col):
        try:
            sig = float(raw)
        except ValueError:
            _fail(self.path, row, col, f"'{raw}' is not a number")
        if not (math.isfinite(sig) and 0 < sig <= 5):
            _fail(self.path, row, col, f"relative 1-sigma must be in (0, 5], got '{raw}'")
        return sig

    def series(self):
        """FluxSeries, or None when the file has no flux column."""
        if not self.index:
            return None
        arr = {c: np.array(v, dtype=float).reshape(-1, 3) for c, v in self.rows.items()}
        return FluxSeries({c: a[:, 0] for c, a in arr.items()},
                          {c: a[:, 1].astype(int) for c, a in arr.items()},
                          {c: a[:, 2] for c, a in arr.items()})
