"""`ventsource bench` section: series runs with 1 and 2 local workers.

Rows: the synthetic Mount Kerrow series (fictional), n rows; prior and inference
settings: the demo's (priors/demo_mount_kerrow_fast.toml, demo.DEMO_OPTIONS), row by row
(the demo file's window column is not used: windows have their own bench).
Reports seconds per measurement per core (wall time x workers / rows) and the
speed-up of 2 workers over 1 (targets: <= 1.5 s, >= 1.8x). Wall times on a shared
machine are noisy; the two runs' numbers are also checked to be identical.
"""
import io
import os
import resource
import tempfile
import time


def bench_series(quick=False, n_rows=None, workers=(1, 2)):
    from ventsource.workflow.demo import DEMO_FAST_PRIOR, DEMO_OPTIONS, make_demo_data, RELATIVE_SIGMA
    from ventsource.workflow.measurements import read_measurements
    from ventsource.workflow.series import run_series
    n = int(n_rows or (20 if quick else 200))
    with tempfile.TemporaryDirectory() as tmp:
        data = make_demo_data(os.path.join(tmp, "data"), n_rows=n)
        series = read_measurements(data, default_sigma=RELATIVE_SIGMA)
        seconds, summaries = {}, {}
        for w in workers:
            out = os.path.join(tmp, f"w{w}")
            start, cpu0 = time.perf_counter(), _cpu_seconds()
            run_series(series, str(DEMO_FAST_PRIOR), out, seed=1, workers=w, options=dict(DEMO_OPTIONS),
                       progress_stream=io.StringIO(), window="rows")  # the demo file has a window column
            seconds[w] = time.perf_counter() - start
            cpu = _cpu_seconds() - cpu0
            with open(os.path.join(out, "summary.csv")) as fh:
                summaries[w] = fh.read()
            per = seconds[w] * w / n
            print(f"[series] {n} measurements, {w} worker(s): {seconds[w]:.1f} s wall, "
                  f"{per:.2f} s per measurement per core (target <= 1.5 s; demo settings); "
                  f"CPU time {cpu / n:.2f} s per measurement (less sensitive to other load)")
    if len(workers) >= 2:
        a, b = workers[0], workers[1]
        print(f"[series] speed-up {b} workers over {a}: {seconds[a] / seconds[b]:.2f}x "
              f"(target >= 1.8x); summaries identical: {summaries[a] == summaries[b]}")
    return seconds


def _cpu_seconds():
    """User + system CPU of this process and its finished children (worker processes)."""
    me = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime
