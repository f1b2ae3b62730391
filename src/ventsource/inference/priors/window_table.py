"""[window]: which parameters vary from row to row in the window model.

    [window]
    per_row = ["pressure_bar", "scrubbed_so2"]   # the default when the table is absent
    pressure_rows = "pooled"                     # or "independent"
    hypothesis_rows = "persistent"               # or "independent"
    source = "why these vary per row"

Every parameter not in per_row is shared by the rows of a window (one magma source).
scrubbed_so2 must be per row: it carries each row's hypothesis (M0: none scrubbed).
pressure_bar may be per row (integrated out per row by quadrature) or shared (sampled
with the magma's parameters: every row degasses at the same pressure). With a
[hypotheses] table the released fraction r is per row as well, implicitly.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from ventsource.inference.priors.distributions import Fixed
from ventsource.inference.priors.fields import (key_error, read_string, read_table, reject_unknown_keys,
                                                type_name)
from ventsource.inference.priors.schema import OPTIONAL_PARAMETERS, REQUIRED_PARAMETERS

PER_ROW_DEFAULT = ("pressure_bar", "scrubbed_so2")
PER_ROW_ALLOWED = ("pressure_bar", "scrubbed_so2")
PER_ROW_REQUIRED = "scrubbed_so2"
PRESSURE_ROWS = ("pooled", "independent")   # how per-row pressures relate (pooled_pressure.py)
PRESSURE_ROWS_DEFAULT = "pooled"
HYPOTHESIS_ROWS = ("persistent", "independent")   # how rows' hypotheses relate (hypothesis_persistence.py)
HYPOTHESIS_ROWS_DEFAULT = "persistent"


@dataclass(frozen=True)
class WindowTable:
    per_row: tuple
    source: str | None = None
    pressure_rows: str | None = None   # None: the default, PRESSURE_ROWS_DEFAULT
    hypothesis_rows: str | None = None  # None: the default, HYPOTHESIS_ROWS_DEFAULT

    def to_dict(self):
        out = {"per_row": list(self.per_row)}
        if self.pressure_rows is not None:
            out["pressure_rows"] = self.pressure_rows
        if self.hypothesis_rows is not None:
            out["hypothesis_rows"] = self.hypothesis_rows
        if self.source is not None:
            out["source"] = self.source
        return out


def parse_window(file: str, data: Mapping, dists: Mapping) -> WindowTable | None:
    """The [window] table checked against the parameters (dists), or None when absent."""
    table = read_table(file, data, "window", "window", False)
    if table is None:
        return None
    reject_unknown_keys(file, table, ("per_row", "source", "pressure_rows", "hypothesis_rows"), "window")
    source = read_string(file, table, "source", "window.source", False)
    pressure_rows = _choice(file, table, "pressure_rows", PRESSURE_ROWS)
    hypothesis_rows = _choice(file, table, "hypothesis_rows", HYPOTHESIS_ROWS)
    if "per_row" not in table:
        return WindowTable(PER_ROW_DEFAULT, source, pressure_rows, hypothesis_rows)
    names = table["per_row"]
    if not isinstance(names, list):
        raise key_error(file, "window.per_row",
                        f"must be an array of parameter names, got {type_name(names)} {names!r}")
    for name in names:
        _check_name(file, name, dists)
    if len(set(names)) != len(names):
        twice = next(n for n in names if names.count(n) > 1)
        raise key_error(file, "window.per_row", f"{twice!r} is listed twice")
    if PER_ROW_REQUIRED not in names:
        raise key_error(file, "window.per_row",
                        "must include 'scrubbed_so2' (it carries each row's own scrubbing hypothesis)")
    # file order of the allowed names, so equal sets give equal records
    return WindowTable(tuple(n for n in PER_ROW_ALLOWED if n in names), source, pressure_rows, hypothesis_rows)


def _choice(file: str, table: Mapping, key: str, allowed: tuple):
    value = read_string(file, table, key, f"window.{key}", False)
    if value is not None and value not in allowed:
        raise key_error(file, f"window.{key}", f"must be one of {', '.join(allowed)}, got {value!r}")
    return value


def _check_name(file: str, name, dists: Mapping) -> None:
    if not isinstance(name, str):
        raise key_error(file, "window.per_row",
                        f"entries must be parameter names (strings), got {type_name(name)} {name!r}")
    if name == "released_so2":
        raise key_error(file, "window.per_row",
                        "'released_so2' is per row whenever [hypotheses] is given; leave it out "
                        "(only pressure_bar and scrubbed_so2 can be listed)")
    if name not in REQUIRED_PARAMETERS + OPTIONAL_PARAMETERS:
        raise key_error(file, "window.per_row",
                        f"unknown parameter {name!r} (only pressure_bar and scrubbed_so2 can vary per row)")
    if name not in PER_ROW_ALLOWED:
        raise key_error(file, "window.per_row",
                        f"{name!r} cannot vary per row: only pressure_bar and scrubbed_so2 can "
                        "(the magma's parameters are shared by the rows of a window)")
    if isinstance(dists[name], Fixed):  # both allowed names are required parameters
        remedy = ("give it a distribution (each row needs its own scrubbing hypothesis)"
                  if name == PER_ROW_REQUIRED else "leave it out of per_row or give it a distribution")
        raise key_error(file, "window.per_row",
                        f"{name!r} is fixed (distribution = \"fixed\") so it cannot vary per row; {remedy}")
