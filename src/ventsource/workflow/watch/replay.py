"""Replay demo: the bundled synthetic Mount Kerrow series written line by line, as a station
would append it, while the watcher follows the file (an accelerated clock: `speed` rows per
second). Each line is written in two parts with a pause between them, so the watcher also
meets lines still being written. Returns the write time of every row, so the time from a
row's arrival to its answer can be measured."""
from __future__ import annotations

import os
import threading
import time

from ventsource.workflow.demo import make_demo_data

DEMO_PRIOR = "demo_mount_kerrow_fast"


def demo_lines(out_dir, n_rows=60, seed=2026):
    """(header, [lines]) of the synthetic demo series, made into out_dir/replay-source."""
    src = make_demo_data(os.path.join(out_dir, "replay-source"), n_rows=n_rows, seed=seed)
    with open(src, encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    return lines[0], lines[1:]


class ReplayWriter(threading.Thread):
    """Appends lines to path at `speed` lines per second; written_at: row id -> time."""

    def __init__(self, path, header, lines, speed=1.0):
        super().__init__(daemon=True)
        self.path, self.header, self.lines, self.speed = path, header, lines, float(speed)
        self.written_at = {}

    def run(self):
        with open(self.path, "w", encoding="utf-8") as fh:
            fh.write(self.header + "\n")
        start = time.time()
        for k, line in enumerate(self.lines):
            delay = start + k / self.speed - time.time()
            if delay > 0:
                time.sleep(delay)
            half = len(line) // 2
            with open(self.path, "a", encoding="utf-8") as fh:
                fh.write(line[:half])
                fh.flush()
                time.sleep(min(0.05, 0.2 / self.speed))   # a line caught half written
                fh.write(line[half:] + "\n")
            self.written_at[line.split(",", 1)[0]] = time.time()


def latency_seconds(written_at, answered_at):
    """Seconds from each row's complete line to its answer written, rows with both."""
    return [answered_at[k] - written_at[k] for k in written_at if k in answered_at]
