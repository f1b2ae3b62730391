"""Synthetic demo at Mount Kerrow, a fictional volcano.

The series is made by this package's own forward model from known true
parameters plus multiplicative noise; it describes no real place or data.
Three episodes: quiet shallow magmatic degassing, a pulse of deeper,
CO2-rich gas from fresh magma, and growing SO2 scrubbing as a shallow
hydrothermal system develops.
"""
import os

import numpy as np
import pandas as pd

from ventsource.inference.priors.shipped import shipped_prior_path

# shipped prior files (package data of an installed package, priors/ of a source checkout)
DEMO_PRIOR = shipped_prior_path("demo_mount_kerrow")
# Demo setting: the inversion uses a variant of the demo prior with five free parameters
# (pressure_bar, dfmq, scrubbed_so2, co2_ppm, s_ppm); the others are held at the values
# the synthetic series was made with, so 60 rows invert in minutes on two cores.
DEMO_FAST_PRIOR = shipped_prior_path("demo_mount_kerrow_fast")
# The demo runs with the engine's default settings, as a real run does.
DEMO_OPTIONS = {}
# Windows of the demo: the user's own periods of one magma supply (a `window` column). The
# quiet and the scrubbing episodes share the supply (the quiet rows are the magmatic
# reference that pins it); the deep pulse of fresh magma is a period of its own.
DEMO_WINDOWS = {"quiet": "steady supply", "scrubbing": "steady supply", "deep pulse": "fresh magma pulse"}
RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
RELATIVE_SIGMA = 0.15  # in-plume sensor ratios carry roughly 10-20 % (common practice, no source)
DEMO_ROWS = 60


def truth_table(n_rows=DEMO_ROWS, start="2025-01-10", step_days=13):
    """True parameters per synthetic measurement (DataFrame).

    Quiet shallow magmatic degassing for the first ~40 % of the series; then a pulse of
    fresh magma at depth (degassing pressure rising to ~1200 bar, melt CO2 up to 4500 ppm:
    CO2-rich gas) that decays; then growing scrubbing of SO2 (0.1 to 0.9) at shallow level.
    """
    times = pd.date_range(start, periods=n_rows, freq=f"{int(step_days)}D")
    rows = []
    for k, t in enumerate(times):
        phase = k / max(n_rows - 1, 1)
        scrub = 0.0
        if phase < 0.4:                       # quiet, shallow magmatic
            p, co2, episode = 150.0 * (1 + 0.15 * np.sin(9 * phase)), 1500.0, "quiet"
        elif phase < 0.6:                     # deep pulse of fresh magma: CO2-rich
            w = np.sin(np.pi * (phase - 0.4) / 0.2)
            p, co2, episode = 150.0 + 1050.0 * w, 1500.0 + 3000.0 * w, "deep pulse"
        else:                                 # growing scrubbing
            p, co2, episode = 150.0, 1500.0, "scrubbing"
            scrub = min(0.9, 0.1 + 2.0 * (phase - 0.6))
        rows.append(dict(id=f"KRW-{k + 1:03d}", time=t.strftime("%Y-%m-%dT%H:%M:%SZ"),
                         episode=episode, pressure_bar=round(p, 3), temperature_c=1080.0, dfmq=1.0,
                         scrubbed_so2=round(scrub, 4), h2o_wt=4.0, co2_ppm=round(co2, 3),
                         s_ppm=1500.0, s_partition=80.0, scrubbed_h2s=0.0, h2s_return=0.5,
                         exsolved_gas_wt=0.0))
    return pd.DataFrame(rows)


def make_demo_data(out_dir, n_rows=DEMO_ROWS, seed=2026):
    """Write measurements.csv (synthetic, noisy) and truth.csv into out_dir."""
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    spec = load_prior_file(DEMO_PRIOR)
    truth = truth_table(n_rows)
    model = ForwardModel(spec, RATIOS)
    theta = truth[list(spec.parameter_names)].to_numpy(dtype=float)
    clean = model.ratios(theta)
    rng = np.random.default_rng(seed)
    noisy = clean * np.exp(rng.normal(0.0, np.log(1 + RELATIVE_SIGMA), clean.shape))
    data = pd.DataFrame({"id": truth["id"], "time": truth["time"],
                         "window": truth["episode"].map(DEMO_WINDOWS)})
    for k, r in enumerate(RATIOS):
        data[r] = [f"{v:.5g}" for v in noisy[:, k]]
        truth[f"true {r}"] = clean[:, k]
    os.makedirs(out_dir, exist_ok=True)
    data_path = os.path.join(out_dir, "measurements.csv")
    data.to_csv(data_path, index=False)
    truth.to_csv(os.path.join(out_dir, "truth.csv"), index=False)
    return data_path


def run_demo(out_dir="demo-output", n_rows=DEMO_ROWS, workers=2, seed=1, resume=False,
             progress_stream=None):
    """Make the synthetic series, invert it by windows and row by row, write tables and
    figures; returns paths. The windows run is the main result (out_dir); the row-by-row
    run (out_dir/row_by_row) is there to compare."""
    from ventsource.workflow.figures import plot_rows_vs_windows, prior_p_magmatic, run_figures
    from ventsource.workflow.measurements import read_measurements
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.series import run_series
    data_path = make_demo_data(out_dir, n_rows=n_rows)
    series = read_measurements(data_path, default_sigma=RELATIVE_SIGMA)
    note = "synthetic demo at a fictional volcano; demo prior with five free parameters"
    run_series(series, str(DEMO_FAST_PRIOR), out_dir, seed=seed, workers=workers, resume=resume,
               options=dict(DEMO_OPTIONS), progress_stream=progress_stream, model_note=note,
               window="column", synthetic_data=True)
    by_row = os.path.join(out_dir, "row_by_row")
    run_series(series, str(DEMO_FAST_PRIOR), by_row, seed=seed, workers=workers, resume=resume,
               options=dict(DEMO_OPTIONS), progress_stream=progress_stream, model_note=note,
               window="rows", synthetic_data=True)
    spec = load_prior_file(DEMO_FAST_PRIOR)
    truth = os.path.join(out_dir, "truth.csv")
    title = "Mount Kerrow (fictional volcano), synthetic demo series"
    figs = run_figures(out_dir, series, spec, truth_csv=truth, title=title + ", by windows",
                       n_prior=1500)
    mid = series.ids[len(series.ids) // 2]
    figs += run_figures(by_row, series, spec, corner_ids=[series.ids[0], mid, series.ids[-1]],
                        truth_csv=truth, title=title + ", row by row", n_prior=0)
    figs.append(plot_rows_vs_windows(os.path.join(by_row, "summary.csv"),
                                     os.path.join(out_dir, "summary.csv"),
                                     os.path.join(out_dir, "figures", "rows_vs_windows.png"),
                                     truth_csv=truth, title=title, p_magmatic_prior=prior_p_magmatic(spec)))
    from ventsource.workflow.table_notes import write_table_readme
    write_table_readme(out_dir, {"measurements.csv": "synthetic measurements at a fictional volcano "
                                 "(forward model plus noise)", "truth.csv": "the true parameters and "
                                 "noise-free ratios of every synthetic row", "row_by_row/": "the same "
                                 "series inverted one row at a time, for comparison"}, synthetic=True)
    return {"measurements": data_path, "truth": truth,
            "summary": os.path.join(out_dir, "summary.csv"),
            "hazard": os.path.join(out_dir, "hazard.json"), "figures": figs,
            "rows": os.path.join(out_dir, "rows"), "row_by_row": by_row}
