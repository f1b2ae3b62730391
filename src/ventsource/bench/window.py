"""`ventsource bench --only window`: the window model's cost, in CPU seconds.

Synthetic windows from one arc_basalt source (3 ratios, 15 % errors, half the rows
scrubbed 50-90 %), inverted in this process: the 12-row case against its target
(<= 60 CPU-s, median of three), then the growth with rows, 10, 40 and 160 rows (one
run each; --quick: 10 and 40), as ratios to the 10-row window measured in the same
process, split into shared draws (more rows, more tempering stages) and cost per
shared draw (the rows' own terms). The cost includes the change-of-source check.
Peak RSS is the process's (resource.getrusage), so it only grows down the list.
The 60-row demo by windows is timed by `ventsource demo`.
"""
import resource
import time
import warnings

import numpy as np

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
REPEATS = 3   # each size timed three times, the median kept: a shared machine's noise is ~15 %


def _window(spec, forward, n_rows, seed=5):
    from ventsource.inference.likelihood import Measurement
    rng = np.random.default_rng(seed)
    names = list(spec.free_names)
    while True:
        theta = np.repeat(spec.sample(rng, 1), n_rows, axis=0)
        theta[:, names.index("pressure_bar")] = np.exp(rng.uniform(np.log(50), np.log(1500), n_rows))
        theta[:, names.index("scrubbed_so2")] = np.r_[np.zeros(n_rows // 2),
                                                      np.linspace(0.5, 0.9, n_rows - n_rows // 2)]
        pred = forward.ratios(spec.full(theta))
        if np.all(np.isfinite(pred)):
            break
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    return [Measurement(NAMES, obs[i], 0.15, label=f"r{i}") for i in range(n_rows)]


def _warm_up_window_kernels(spec, forward):
    """One small window first: compiled loops, tables and the libraries used once per window
    (ArviZ for R-hat) load before any timing."""
    from ventsource.inference.window.sampling import infer_window
    infer_window(_window(spec, forward, 4), spec, forward=forward, seed=0, n_particles=40, n_runs=2,
                 split_particles=40)


def _timed(spec, forward, n, repeats):
    from ventsource.inference.window.sampling import infer_window
    meas = _window(spec, forward, n)
    runs = []
    for _ in range(repeats):  # same seed: same work, only the clock varies
        t = time.process_time()
        res = infer_window(meas, spec, forward=forward, seed=1)
        runs.append((time.process_time() - t, res.diagnostics["source_check_cpu_s"]))
    cost, check = (float(np.median([r[k] for r in runs])) for k in (0, 1))
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 ** 2   # KiB -> GiB (Linux)
    p = np.array([r.p_magmatic for r in res.rows])
    print(f"[window] {n} rows: {cost:.1f} CPU-s (median of {len(runs)}; source check {check:.1f}), "
          f"{res.diagnostics['n_forward_evals']:,} shared draws x {res.diagnostics['n_solve_pressures']} "
          f"pressures, stages {res.diagnostics['stages']}, R-hat {res.diagnostics['rhat_max']:.3f}, "
          f"P(M0) magmatic rows mean {p[:n // 2].mean():.3f} (min {p[:n // 2].min():.3f}), scrubbed rows "
          f"max {p[n // 2:].max():.3f}, flags {res.flags or 'none'}, process peak RSS {rss:.2f} GiB; "
          f"stage-0 ancestors left {res.diagnostics['moves'].get('ancestors_last')}, MCMC moves per stage "
          f"{res.diagnostics['moves'].get('n_moves')}")
    return cost, res.diagnostics["n_forward_evals"]


def bench_window(spec, quick=False):
    from ventsource.forward.model import ForwardModel
    forward = ForwardModel(spec, ratio_names=NAMES)
    forward.ratios(spec.full(spec.sample(np.random.default_rng(0), 32)))  # warm up
    _warm_up_window_kernels(spec, forward)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        c12, _ = _timed(spec, forward, 12, 1 if quick else REPEATS)
        print(f"[window] target 12 rows <= 60 CPU-s: {c12:.1f} -> {'met' if c12 <= 60 else 'NOT met'}")
        sizes = (10, 40) if quick else (10, 40, 160)
        cost, draws = zip(*[_timed(spec, forward, n, 1) for n in sizes])
    for n, c, d in zip(sizes[1:], cost[1:], draws[1:]):
        g, gd = c / cost[0], d / draws[0]
        print(f"[window] growth 10 -> {n} rows: {g:.2f}x the 10-row window's CPU-s ({n / 10:.0f}x the rows); "
              f"shared draws {gd:.2f}x, cost per shared draw {g / gd:.2f}x")
    return {12: c12, **dict(zip(sizes, cost))}
