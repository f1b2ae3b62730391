"""`ventsource bench --only ratios`: raw 1 Hz sensor records -> gas ratios.

Synthetic records of the fictional Mount Kerrow (CO2, SO2, H2S, H2 and H2O
from T, RH and P) are written to a temporary directory (not timed). Reported:
* one day at 1 Hz -> ratios in 30 min windows, CPU seconds (best of three) and
  the ratio to a reference measured in the same run: pandas reading the same
  file in one go (the floor any CSV-based path pays); target <= 5 s;
* a chunked run of a few days with small chunks: CPU seconds per row
  extrapolated to a year at 1 Hz (target <= 3 min) and the peak memory traced
  by tracemalloc (NumPy and pandas frames) for two record lengths: the chunked
  reader keeps the peak flat, and the window results still held at the end,
  scaled to a year, are added (target <= 1 GiB).
"""
import os
import resource
import tempfile
import time
import tracemalloc

import pandas as pd

from ventsource.workflow.plume.pipeline import run_ratios
from ventsource.workflow.plume.settings import RatioSettings
from ventsource.workflow.plume.synthetic import write_synthetic_csv

DAY_S = 86_400
YEAR_ROWS = 365 * DAY_S


def _cpu(fn, repeats):
    best = float("inf")
    for _ in range(repeats):
        start = time.process_time()
        fn()
        best = min(best, time.process_time() - start)
    return best


def _run(raw, out, chunk_rows):
    return run_ratios(raw, out, RatioSettings(ratios=None), chunk_rows=chunk_rows, hash_input=False)


def _memory_mib(raw, out, chunk_rows):
    """(peak, still held at the end) traced memory of one run, MiB."""
    tracemalloc.start()
    try:
        result = _run(raw, out, chunk_rows)   # window results alive while measured
        held, peak = tracemalloc.get_traced_memory()
        del result
        return peak / 2 ** 20, held / 2 ** 20
    finally:
        tracemalloc.stop()


def _verdict(ok):
    return "meets target" if ok else "MISSES target"


def bench_ratios(quick=False):
    with tempfile.TemporaryDirectory(prefix="ventsource-bench-ratios-") as tmp:
        day = write_synthetic_csv(os.path.join(tmp, "day.csv"), DAY_S, seed=1)
        out = os.path.join(tmp, "m.csv")
        repeats = 1 if quick else 3
        seconds = _cpu(lambda: _run(day, out, 200_000), repeats)
        reference = _cpu(lambda: pd.read_csv(day, comment="#"), repeats)
        n_win = len(pd.read_csv(out))
        print(f"[ratios] one day at 1 Hz, 5 gases, {n_win} windows of 30 min: {seconds:.2f} CPU s "
              f"(plain pandas read of the file: {reference:.2f} s, ratio {seconds / reference:.1f}); "
              f"target <= 5 s: {_verdict(seconds <= 5.0)}")
        days = 1 if quick else 2
        chunk = 20_000 if quick else 50_000
        short = write_synthetic_csv(os.path.join(tmp, "short.csv"), days * DAY_S, seed=2)
        long = write_synthetic_csv(os.path.join(tmp, "long.csv"), 2 * days * DAY_S, seed=3)
        seconds_long = _cpu(lambda: _run(long, out, chunk), 1)
        rows = 2 * days * DAY_S
        year_s = seconds_long / rows * YEAR_ROWS
        print(f"[ratios] chunked, {2 * days} days in chunks of {chunk} rows: {seconds_long:.2f} CPU s, "
              f"{seconds_long / rows * 1e6:.1f} us/row -> a year at 1 Hz ({YEAR_ROWS:.2e} rows) "
              f"~{year_s:.0f} CPU s; target <= 180 s: {_verdict(year_s <= 180)}")
        peak_short, _ = _memory_mib(short, out, chunk)
        peak_long, held_long = _memory_mib(long, out, chunk)
        # what grows with the record is the list of window results (held at the end);
        # the larger of that and a straight line through the two peaks
        slope = max(held_long, (peak_long - peak_short) * 2) / rows
        year_peak = peak_long + slope * (YEAR_ROWS - rows)
        print(f"[ratios] peak traced memory {peak_short:.1f} MiB for {days} day(s), {peak_long:.1f} MiB for "
              f"{2 * days} days ({held_long:.2f} MiB of window results held at the end) -> a year "
              f"~{year_peak:.0f} MiB (process max RSS so far "
              f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB); "
              f"target <= 1024 MiB: {_verdict(year_peak <= 1024)}")
