"""`ventsource bench --only watch`: the sequential window update against a full window run.

A synthetic arc_basalt window (bench/window.py: one source, 3 ratios, 15 % errors, half
the rows scrubbed) of 40 rows (20 with --quick). The population after the first n - 5 rows
comes from a full run (not timed); then each of the last five rows is added by the
sequential update (inference/window/sequential.py) and its CPU time kept (the mean over
the five: an update that must resample and move costs more than one that only reweights).
Reference: the full tempered run of the window's sampler on all n rows from the prior (the
sampling of infer_window, without its change-of-source checks), in the same process.
Target of the issue: the update at least 5x cheaper.
"""
import time
import warnings

import numpy as np

from ventsource.bench.window import NAMES, _warm_up_window_kernels, _window


def bench_watch(spec, quick=False):
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.window import sequential as sq
    from ventsource.inference.window.sequential_result import window_likelihoods
    forward = ForwardModel(spec, ratio_names=NAMES)
    _warm_up_window_kernels(spec, forward)
    n = 20 if quick else 40
    meas = _window(spec, forward, n)
    liks = window_likelihoods(meas, forward, spec)
    pi0 = spec.p_magmatic
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pop = sq.full_run(spec, forward, liks[:n - 5], pi0, [1, 0], 200, 4)
        costs, moved = [], 0
        for j in range(n - 5, n):
            t = time.process_time()
            pop, info = sq.add_row(pop, spec, forward, liks[:j + 1], pi0, 1, j)
            costs.append(time.process_time() - t)
            moved += info.moved_runs > 0
        t = time.process_time()
        sq.full_run(spec, forward, liks, pi0, [1, 1], 200, 4)
        full = time.process_time() - t
    update = float(np.mean(costs))
    ratio = full / update
    print(f"[watch] {n} rows: update of one row {update:.2f} CPU-s (mean of 5, {moved} of them "
          f"resampled and moved; per row {', '.join(f'{c:.2f}' for c in costs)}), full window run "
          f"{full:.1f} CPU-s: {ratio:.1f}x cheaper (target >= 5x): {'met' if ratio >= 5 else 'NOT met'}")
    return update, full
