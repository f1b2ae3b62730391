"""Synthetic demo at Mount Kerrow, a fictional volcano.

The series is made by this package's own forward model from known true
parameters plus multiplicative noise; it describes no real place or data.
The story, one measurement every 13 days: quiet magmatic degassing; a shallow
hydrothermal system scrubbing a growing share of the SO2 (0.1 up to 0.99), so
that the SO2 flux falls below detection while the CO2 flux carries on; the
stored sulfur released (SO2 x 3.5 falling to x 2); quiet magmatic degassing
again; then fresh recharge, a new magma source (twice the CO2, half the sulfur,
degassing deeper). Ratios carry 15 % and fluxes 20 % log-normal errors.
"""
import os

import numpy as np
import pandas as pd

from ventsource.inference.priors.shipped import shipped_prior_path
from ventsource.workflow.sulfur_budget import S_PER_SO2, SO2_PER_CO2_MASS

# shipped prior files (package data of an installed package, priors/ of a source checkout)
DEMO_PRIOR = shipped_prior_path("demo_mount_kerrow")
# Demo setting: the inversion uses a variant of the demo prior with five free parameters
# (pressure_bar, dfmq, scrubbed_so2, co2_ppm, s_ppm); the others are held at the values
# the synthetic series was made with, so 60 rows invert in minutes on two cores.
DEMO_FAST_PRIOR = shipped_prior_path("demo_mount_kerrow_fast")
# The same plus the [hypotheses] table of the third hypothesis, released stored sulfur (M2)
DEMO_RELEASE_PRIOR = shipped_prior_path("demo_mount_kerrow_fast_release")
# Both runs use the engines' default settings, as a real run does.
DEMO_OPTIONS = {}
DEMO_WINDOW_OPTIONS = {}
RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
RATIO_SIGMA = RELATIVE_SIGMA = 0.15  # in-plume sensor ratios: 10-20 % (common practice, no source)
FLUX_SIGMA = 0.20           # spectrometer fluxes: 20-30 % (common practice, no source)
SO2_DETECTION_TPD = 50.0    # invented detection limit of the fictional network
DEMO_ROWS = 60

# Episodes: (name, first row as a fraction of the series, magma source). For 60 rows:
# 6 quiet, 14 scrubbing, 5 release, 25 quiet, 10 recharge.
EPISODES = (("quiet", 0.0, "steady"), ("scrubbing", 6 / 60, "steady"), ("release", 20 / 60, "steady"),
            ("quiet", 25 / 60, "steady"), ("recharge", 50 / 60, "fresh"))
# The data file's `window` column, as a user names their own periods: (label, first row
# as a fraction); 20, 12, 8 and 20 rows for 60. Scrubbing and release each share a window
# with quiet rows of the same source, which pin it; period 4 spans the change of source
# (10 + 10 rows) so that its shared-source check can flag it.
WINDOWS = (("period 1", 0.0), ("period 2", 20 / 60), ("period 3", 32 / 60), ("period 4", 40 / 60))
# Invented magma sources (fictional): shared parameters, degassing pressure (bar) and
# CO2 flux (t/d); the gas freezes at 880 C on its way to the vent (gas-buffered quench,
# docs/models.md). The recharge brings twice the CO2 and half the sulfur, degassing deeper.
SOURCES = {
    "steady": dict(temperature_c=1080.0, quench_temperature_c=880.0, dfmq=1.0, h2o_wt=4.0,
                   co2_ppm=1500.0, s_ppm=1500.0, scrubbed_h2s=0.0, exsolved_gas_wt=0.0, pressure=150.0,
                   co2_flux=1500.0),
    "fresh": dict(temperature_c=1080.0, quench_temperature_c=880.0, dfmq=1.0, h2o_wt=4.0,
                  co2_ppm=3000.0, s_ppm=750.0, scrubbed_h2s=0.0, exsolved_gas_wt=0.0, pressure=450.0,
                  co2_flux=3000.0),
}


def _stage(phase, table):
    """Index of the last entry of table whose start fraction is <= phase."""
    return max(i for i, entry in enumerate(table) if phase >= entry[1] - 1e-9)


def _episode_state(phase):
    """(episode, source, scrubbed fraction, released factor r) at a fraction of the series."""
    i = _stage(phase, EPISODES)
    name, start, source = EPISODES[i]
    end = EPISODES[i + 1][1] if i + 1 < len(EPISODES) else 1.0
    u = (phase - start) / (end - start)
    scrubbed = min(0.99, 0.1 + 1.25 * u) if name == "scrubbing" else 0.0  # below detection at the end
    released = 2.5 - 1.5 * u if name == "release" else 0.0               # SO2 x 3.5 falling to x 2
    return name, source, scrubbed, released


def truth_table(n_rows=DEMO_ROWS, start="2025-01-10", step_days=13):
    """True state per synthetic measurement (DataFrame): episode, magma source, window,
    the forward model's parameters, the released factor r and the CO2 flux (t/d)."""
    times = pd.date_range(start, periods=n_rows, freq=f"{int(step_days)}D")
    rows = []
    for k, t in enumerate(times):
        phase = k / n_rows
        episode, source, scrubbed, released = _episode_state(phase)
        src = dict(SOURCES[source])
        p0, flux = src.pop("pressure"), src.pop("co2_flux")
        rows.append(dict(id=f"KRW-{k + 1:03d}", time=t.strftime("%Y-%m-%dT%H:%M:%SZ"), episode=episode,
                         source=source, window=WINDOWS[_stage(phase, WINDOWS)][0],
                         pressure_bar=round(p0 * (1 + 0.15 * np.sin(9 * phase)), 3),
                         scrubbed_so2=round(scrubbed, 4), released_so2=round(released, 4),
                         co2_flux_tpd=flux * (1 + 0.1 * np.sin(5 * phase)), **src))
    return pd.DataFrame(rows)


def _add_budget_truth(truth, magmatic_so2_co2):
    """True magmatic and emitted SO2 fluxes (t/d), retained sulfur rate (t/d of S) and its
    running total (t, trapezoid rule) as columns of truth."""
    factor = (1.0 - truth["scrubbed_so2"]) * (1.0 + truth["released_so2"])
    truth["magmatic_so2_flux_tpd"] = truth["co2_flux_tpd"] * magmatic_so2_co2 * SO2_PER_CO2_MASS
    truth["emitted_so2_flux_tpd"] = truth["magmatic_so2_flux_tpd"] * factor
    truth["retained_s_tpd"] = (truth["magmatic_so2_flux_tpd"] - truth["emitted_so2_flux_tpd"]) * S_PER_SO2
    t = pd.to_datetime(truth["time"])
    days = ((t - t[0]).dt.total_seconds() / 86400).to_numpy()
    rate = truth["retained_s_tpd"].to_numpy()
    truth["cumulative_retained_s_t"] = np.concatenate(
        [[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(days))])


def _noisy_data(truth, clean, seed):
    """The measurement table: ratios and fluxes with log-normal errors, labelled synthetic."""
    rng = np.random.default_rng(seed)
    n = len(truth)
    noisy = clean * np.exp(rng.normal(0.0, np.log1p(RATIO_SIGMA), clean.shape))
    so2_f = truth["emitted_so2_flux_tpd"].to_numpy() * np.exp(rng.normal(0.0, np.log1p(FLUX_SIGMA), n))
    co2_f = truth["co2_flux_tpd"].to_numpy() * np.exp(rng.normal(0.0, np.log1p(FLUX_SIGMA), n))
    data = pd.DataFrame({"id": truth["id"], "time": truth["time"]})
    if "window" in truth:
        data["window"] = truth["window"]
    for k, r in enumerate(RATIOS):
        data[r] = [f"{v:.5g}" for v in noisy[:, k]]
    data["SO2 flux"] = [f"<{SO2_DETECTION_TPD:g}" if v < SO2_DETECTION_TPD else f"{v:.4g}" for v in so2_f]
    data["sigma SO2 flux"] = FLUX_SIGMA
    data["CO2 flux"] = [f"{v:.4g}" for v in co2_f]
    data["sigma CO2 flux"] = FLUX_SIGMA
    data["quality note"] = "synthetic, fictional Mount Kerrow"
    return data


def make_demo_data(out_dir, n_rows=DEMO_ROWS, seed=2026, prior_path=None):
    """Write measurements.csv (synthetic, noisy, with fluxes and a window column) and
    truth.csv (true state, noise-free ratios, sulfur budget) into out_dir; returns the
    data path."""
    return synthesize_series(truth_table(n_rows), out_dir, seed=seed, prior_path=prior_path)


def synthesize_series(truth, out_dir, seed, prior_path=None):
    """Measurements made from a truth table by the forward model plus noise.

    truth: one row per measurement with id, time, the prior's parameters, released_so2
    (r: emitted SO2 x (1 + r)) and co2_flux_tpd; a `window` column is copied to the data.
    Writes measurements.csv and truth.csv (with the noise-free ratios and the sulfur
    budget) into out_dir; returns the data path."""
    from ventsource.ascent import observables
    from ventsource.chemistry.species import INDEX
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    spec = load_prior_file(prior_path or DEMO_PRIOR)
    truth = truth.copy()
    model = ForwardModel(spec, RATIOS)
    st = model.state(truth[list(spec.parameter_names)].to_numpy(dtype=float), saturation=False)
    gas = st["gas"].copy()
    gas[:, INDEX["SO2"]] *= 1.0 + truth["released_so2"].to_numpy()  # stored sulfur released (M2)
    clean = observables.ratios(gas, RATIOS)
    mag = st["magmatic_gas"]
    _add_budget_truth(truth, mag[:, INDEX["SO2"]] / mag[:, INDEX["CO2"]])
    data = _noisy_data(truth, clean, seed)
    for k, r in enumerate(RATIOS):
        truth[f"true {r}"] = clean[:, k]
    os.makedirs(out_dir, exist_ok=True)
    data_path = os.path.join(out_dir, "measurements.csv")
    data.to_csv(data_path, index=False)
    truth.to_csv(os.path.join(out_dir, "truth.csv"), index=False)
    return data_path


def run_demo(out_dir="demo-output", n_rows=DEMO_ROWS, workers=2, seed=1, resume=False,
             progress_stream=None):
    """Make the synthetic series, invert it by windows and row by row (three hypotheses),
    write tables and figures; returns paths. The windows run is the main result (out_dir);
    the row-by-row run (out_dir/row_by_row) is there to compare."""
    from ventsource.workflow.measurements import read_measurements
    data_path = make_demo_data(out_dir, n_rows=n_rows)
    series = read_measurements(data_path, default_sigma=RATIO_SIGMA)
    note = ("synthetic demo at a fictional volcano; demo prior with five free parameters and "
            "the released-sulfur hypothesis")
    by_row = os.path.join(out_dir, "row_by_row")
    runs = ((out_dir, "column", DEMO_WINDOW_OPTIONS, "by windows"), (by_row, "rows", DEMO_OPTIONS, "row by row"))
    row_figures = lambda: _row_figures(out_dir, by_row, series)  # noqa: E731
    _, (_, figs) = run_both(_run_then_plot, [
        dict(series=series, prior_path=str(DEMO_RELEASE_PRIOR), out_dir=folder, seed=seed,
             workers=workers, resume=resume, options=dict(options), progress_stream=progress_stream,
             model_note=note, window=window, synthetic_data=True, progress_label=label,
             plot=row_figures if folder == by_row else None)
        for folder, window, options, label in runs])
    window_figs = _window_figures(out_dir, by_row, series)   # the comparison figure last
    figs = window_figs[:-1] + figs + window_figs[-1:]
    from ventsource.workflow.report_html import write_report
    for folder in (out_dir, by_row):
        write_report(folder)  # with the figures embedded
    from ventsource.workflow.table_notes import write_table_readme
    write_table_readme(out_dir, {"measurements.csv": "synthetic measurements at a fictional volcano "
                                 "(forward model plus noise)", "truth.csv": "the true state, noise-free "
                                 "ratios and sulfur budget of every synthetic row", "row_by_row/": "the "
                                 "same series inverted one row at a time, for comparison"}, synthetic=True)
    return {"measurements": data_path, "truth": os.path.join(out_dir, "truth.csv"),
            "summary": os.path.join(out_dir, "summary.csv"),
            "hazard": os.path.join(out_dir, "hazard.json"), "figures": figs,
            "rows": os.path.join(out_dir, "rows"), "row_by_row": by_row}


def run_both(run, calls):
    """run(**kwargs) for each of calls at the same time, each in its own thread (and so its
    own worker processes); returns their results in order, or raises the first error once
    every run has ended.

    Why: the windows run is four jobs of unequal cost and leaves a core idle at its end,
    and each run alone idles a core while the main process writes its tables; run side by
    side, the row-by-row jobs fill those gaps. Every job is seeded from the run seed and
    its own identifier, so the numbers are the same as one run after the other."""
    from concurrent.futures import ThreadPoolExecutor
    with ThreadPoolExecutor(max_workers=len(calls)) as pool:
        futures = [pool.submit(run, **kwargs) for kwargs in calls]
        errors = [f.exception() for f in futures]  # waits for every run
    for exc in errors:
        if exc is not None:
            raise exc
    return [f.result() for f in futures]


def _run_then_plot(plot=None, **kwargs):
    """run_series, then (in the same thread, while the other run may still be going) the
    run's own figures: (run_series' result, figure paths). Only one thread draws at a time:
    the windows run draws after both have ended."""
    from ventsource.workflow.series import run_series
    result = run_series(**kwargs)
    return result, (plot() if plot is not None else [])


DEMO_TITLE = "Mount Kerrow (fictional volcano), synthetic demo series"


def _row_figures(out_dir, by_row, series):
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.figures import run_figures
    mid = series.ids[len(series.ids) // 2]
    return run_figures(by_row, series, load_prior_file(DEMO_RELEASE_PRIOR),
                       corner_ids=[series.ids[0], mid, series.ids[-1]],
                       truth_csv=os.path.join(out_dir, "truth.csv"), title=DEMO_TITLE + ", row by row",
                       n_prior=0)


def _window_figures(out_dir, by_row, series):
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.figures import plot_rows_vs_windows, prior_p_magmatic, run_figures
    spec = load_prior_file(DEMO_RELEASE_PRIOR)
    truth = os.path.join(out_dir, "truth.csv")
    title = DEMO_TITLE
    figs = run_figures(out_dir, series, spec, truth_csv=truth, title=title + ", by windows",
                       n_prior=1500)
    figs.append(plot_rows_vs_windows(os.path.join(by_row, "summary.csv"),
                                     os.path.join(out_dir, "summary.csv"),
                                     os.path.join(out_dir, "figures", "rows_vs_windows.png"),
                                     truth_csv=truth, title=title,
                                     p_magmatic_prior=prior_p_magmatic(spec)))
    return figs
