"""Replay demo: the bundled synthetic Mount Kerrow series written line by line, as a station
would append it, while the watcher follows the file (an accelerated clock: `speed` rows per
second). The writer is a process of its own (the compiled kernels hold the interpreter's lock
while they run, which would hold a writer thread back). Each line is written in two parts
with a pause between them, so the watcher also meets lines still being written. The writer
records when each row's line was complete (OUT/replay-times.csv), so the time from a row's
arrival to its answer can be measured."""
from __future__ import annotations

import csv
import multiprocessing
import os
import time

from ventsource.workflow.demo import make_demo_data

DEMO_PRIOR = "demo_mount_kerrow_fast"
DEMO_ALERTS = """# Alert rules of the replay demo (docs/running.md, "Alerts"); synthetic data only.
[[rule]]
name = "likely scrubbed"
field = "p_scrubbed"
above = 0.9
consecutive = 2

[[rule]]
name = "scrubbing above half"
field = "scrubbed_median"
above = 0.5

[[rule]]
name = "change of source"
event = "change_of_source"
"""


def demo_lines(out_dir, n_rows=60, seed=2026):
    """(header, [lines]) of the synthetic demo series, made into out_dir/replay-source."""
    src = make_demo_data(os.path.join(out_dir, "replay-source"), n_rows=n_rows, seed=seed)
    with open(src, encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    return lines[0], lines[1:]


def _write_lines(path, header, lines, speed, times_path):
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(header + "\n")
    with open(times_path, "w", encoding="utf-8") as fh:
        fh.write("id,written_at_unix_s\n")
    start = time.time()
    for k, line in enumerate(lines):
        delay = start + k / speed - time.time()
        if delay > 0:
            time.sleep(delay)
        half = len(line) // 2
        with open(path, "a", encoding="utf-8") as fh:
            fh.write(line[:half])
            fh.flush()
            time.sleep(min(0.05, 0.2 / speed))   # a line caught half written
            fh.write(line[half:] + "\n")
        done = time.time()
        with open(times_path, "a", encoding="utf-8") as fh:
            fh.write(f"{line.split(',', 1)[0]},{done!r}\n")


def start_writer(path, header, lines, speed, times_path):
    """The writer process (started); is_alive() tells when it has written every line."""
    proc = multiprocessing.get_context("spawn").Process(
        target=_write_lines, args=(path, header, lines, float(speed), times_path), daemon=True)
    proc.start()
    return proc


def written_at(times_path):
    with open(times_path, encoding="utf-8") as fh:
        return {r["id"]: float(r["written_at_unix_s"]) for r in csv.DictReader(fh)}


def latency_seconds(written, answered_at):
    """Seconds from each row's complete line to its answer written, rows with both."""
    return [answered_at[k] - written[k] for k in written if k in answered_at]
