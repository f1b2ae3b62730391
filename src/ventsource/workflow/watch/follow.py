"""Complete new lines of a growing measurement file, each checked on its own.

A line counts only once its newline is written: a partly written last line is left
for the next look. Each new line is read with the measurement reader's own checks
(workflow/measurements.py) under the file's header; a line that fails them is
reported (file, line, column) and skipped, the watch goes on. A cell holding a
newline inside quotes is not supported by the watch (each line is one row).
"""
from __future__ import annotations

import csv
import os
import re
from dataclasses import dataclass

from ventsource.common.errors import InputError
from ventsource.workflow.measurements import _read_table


@dataclass
class NewRow:
    line: int               # line number in the file (the header is line 1)
    row_id: str
    time_s: int             # seconds since 1970-01-01 UTC
    window: str | None      # the file's window column, if any
    measurement: object     # likelihood.Measurement
    ratio_names: tuple


class FollowedFile:
    """Byte position after the last complete line read, and the line count there."""

    def __init__(self, path, offset=0, line=0, header=None):
        self.path, self.offset, self.line, self.header = str(path), int(offset), int(line), header

    def new_lines(self):
        """[(line number, text, byte offset after it)] of the lines completed since the last
        call (the header is kept, not returned)."""
        try:
            size = os.path.getsize(self.path)
        except FileNotFoundError:
            return []
        if size < self.offset:
            raise InputError(f"{self.path}: the file got shorter than the {self.offset} bytes already "
                             "read (replaced or truncated); start a new watch with another --out")
        with open(self.path, "rb") as fh:
            fh.seek(self.offset)
            chunk = fh.read(size - self.offset)
        end = chunk.rfind(b"\n")
        if end < 0:
            return []   # nothing complete yet (a line still being written)
        out, pos = [], 0
        while pos <= end:
            stop = chunk.index(b"\n", pos)
            raw, pos = chunk[pos:stop].rstrip(b"\r"), stop + 1
            self.line += 1
            text = raw.decode("utf-8-sig" if self.line == 1 else "utf-8", errors="replace")
            if self.line == 1:
                self.header = text
            elif text.strip():
                out.append((self.line, text, self.offset + pos))
        self.offset += end + 1
        return out


def parse_row(path, header, line, text, default_sigma):
    """NewRow of one line, or InputError naming file, line and column."""
    per_column, fallback = ({}, float(default_sigma)) if not isinstance(default_sigma, dict) else \
        ({k: v for k, v in default_sigma.items() if k != "*"}, float(default_sigma.get("*", 0.15)))
    cells = [next(csv.reader([header])), next(csv.reader([text]))]
    try:
        series = _read_table(iter(cells), path, per_column, fallback)
    except InputError as exc:   # the reader numbers this line 2: give its place in the file
        raise InputError(re.sub(r": row 2\b", f": row {line}", str(exc), count=1)) from None
    except csv.Error as exc:
        raise InputError(f"{path}: row {line}: not valid CSV ({exc})") from None
    window = series.windows[0] if series.windows is not None else None
    t = int(series.times.astype("datetime64[s]").astype("int64")[0])
    return NewRow(line, series.ids[0], t, window, series.measurements[0], series.ratio_names)
