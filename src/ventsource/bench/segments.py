"""`ventsource bench --only window`, second part: `--window auto` (segments the data choose).

A synthetic arc_basalt series (3 ratios, 15 % errors) of n rows: the first 35 % from
source A unscrubbed, the next 32.5 % from A with 70 % of the SO2 scrubbed, the rest from
source B (twice the CO2, half the S: a recharge). Timed in CPU seconds of this process:
the segmentation (binary segmentation over cached segment evidences) and the inversion
of each segment found as a window (infer_window, as a run does). Target of the issue: 40
rows within 10 CPU-minutes. 160 rows is not in the bench (measured once by hand:
docs/running.md).
"""
import time
import warnings

import numpy as np

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
TARGET_40_ROWS_CPU_S = 600.0


def story(spec, forward, n_rows, seed=3):
    """(measurements, first row of B, first scrubbed row) of the series described above."""
    from ventsource.inference.likelihood import Measurement
    rng = np.random.default_rng(seed)
    names = list(spec.free_names)
    a, b = round(n_rows * 0.35), round(n_rows * 0.675)
    while True:
        theta = np.repeat(spec.sample(rng, 1), n_rows, axis=0)
        pressure = np.exp(np.linspace(np.log(50.0), np.log(1500.0), n_rows))
        rng.shuffle(pressure)
        theta[:, names.index("pressure_bar")] = pressure
        theta[:, names.index("scrubbed_so2")] = np.r_[np.zeros(a), np.full(b - a, 0.7), np.zeros(n_rows - b)]
        theta[b:, names.index("co2_ppm")] *= 2.0
        theta[b:, names.index("s_ppm")] *= 0.5
        pred = forward.ratios(spec.full(theta))
        if np.all(np.isfinite(pred)):
            break
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    return [Measurement(NAMES, obs[i], 0.15, label=f"r{i}") for i in range(n_rows)], b, a


def bench_segments(spec, quick=False):
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.segments.search import segment_series
    from ventsource.inference.window.sampling import infer_window
    forward = ForwardModel(spec, ratio_names=NAMES)
    forward.ratios(spec.full(spec.sample(np.random.default_rng(0), 32)))  # warm up
    cost = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for n in ((10,) if quick else (10, 40)):
            meas, change, scrub_from = story(spec, forward, n)
            t = time.process_time()
            seg = segment_series(meas, spec, forward=forward, seed=1)
            t_seg = time.process_time() - t
            for _, rows in seg.groups():
                infer_window([meas[i] for i in rows], spec, forward=forward, seed=1)
            cost[n] = time.process_time() - t
            print(f"[window auto] {n} rows (recharge at row {change}, 70 % scrubbing from row {scrub_from}): "
                  f"{cost[n]:.0f} CPU-s ({t_seg:.0f} choosing, {seg.diagnostics['n_segment_evidences']} "
                  f"segment evidences), segments start at {seg.starts}")
    if 40 in cost:
        print(f"[window auto] target 40 rows <= {TARGET_40_ROWS_CPU_S:.0f} CPU-s: {cost[40]:.0f} -> "
              f"{'met' if cost[40] <= TARGET_40_ROWS_CPU_S else 'NOT met'}; growth 10 -> 40 rows "
              f"{cost[40] / cost[10]:.2f}x")
    return cost
