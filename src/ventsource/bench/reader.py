"""`ventsource bench` section: reading and checking a long measurement file.

A synthetic file of n rows (id, time with a UTC offset, three ratios, one censored
cell in ten, one sigma column) is read by `read_measurements` in a fresh process;
printed: CPU seconds, microseconds per row, the ratio to pandas.read_csv of the same
file in the same process (C parser, no checks: the reference), and the peak
resident memory the read added (targets: 1e6 rows in <= 10 s and <= 1 GiB).
"""
import os
import resource
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from multiprocessing import get_context


def write_synthetic_file(path, n_rows):
    with open(path, "w") as fh:
        fh.write("id,time,SO2/CO2,H2S/SO2,H2O/CO2,sigma SO2/CO2\n")
        for i in range(n_rows):
            day, minute = 1 + i % 28, i % 1440
            h2s = f"<{0.05 + i % 7 * 0.01:.2f}" if i % 10 == 0 else f"{0.2 + i % 13 * 0.01:.3f}"
            fh.write(f"R{i:07d},2026-{1 + i % 12:02d}-{day:02d}T{minute // 60:02d}:{minute % 60:02d}:00+01:00,"
                     f"{0.3 + i % 17 * 0.01:.4f},{h2s},{20 + i % 29:.1f},{'0.2' if i % 5 == 0 else ''}\n")


def _measure_in_child(path):
    import pandas as pd

    from ventsource.workflow.measurements import read_measurements
    rss_before_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    cpu0 = time.process_time()
    series = read_measurements(path, default_sigma=0.15)
    cpu = time.process_time() - cpu0
    rss_after_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    cpu0 = time.process_time()
    pd.read_csv(path, dtype=str, keep_default_na=False)
    reference = time.process_time() - cpu0
    return len(series), cpu, reference, (rss_after_kib - rss_before_kib) / 1024.0


def bench_reader(quick=False, n_rows=None):
    n = int(n_rows or (100_000 if quick else 1_000_000))
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "long.csv")
        write_synthetic_file(path, n)
        size_mib = os.path.getsize(path) / 2**20
        # a fresh process, so the peak memory is this read's and not an earlier section's
        with ProcessPoolExecutor(max_workers=1, mp_context=get_context("spawn")) as pool:
            rows, cpu, reference, added_mib = pool.submit(_measure_in_child, path).result()
    print(f"[reader] {rows} rows ({size_mib:.0f} MiB): {cpu:.2f} s CPU, {cpu / rows * 1e6:.2f} us/row, "
          f"{cpu / reference:.1f}x pandas.read_csv without checks ({reference:.2f} s); "
          f"peak memory added {added_mib:.0f} MiB (targets for 1e6 rows: <= 10 s, <= 1024 MiB)")
    return cpu, added_mib
