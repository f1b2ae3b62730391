"""Synthetic demo at Mount Kerrow, a fictional volcano.

The series is made by this package's own forward model from known true
parameters plus multiplicative noise; it describes no real place or data.
Three episodes: quiet shallow magmatic degassing, a pulse of deeper,
CO2-rich gas from fresh magma, and growing SO2 scrubbing as a shallow
hydrothermal system develops.
"""
import os
from pathlib import Path

import numpy as np
import pandas as pd

from .caution import CAUTION

DEMO_PRIOR = Path(__file__).resolve().parents[2] / "priors" / "demo_mount_kerrow.toml"
RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
RELATIVE_SIGMA = 0.15  # in-plume sensor ratios carry roughly 10-20 % (common practice, no source)


def truth_table(n_rows=8, start="2025-01-10"):
    """True parameters per synthetic measurement (DataFrame)."""
    times = pd.date_range(start, periods=n_rows, freq=f"{int(730 / max(n_rows - 1, 1))}D")
    rows = []
    for k, t in enumerate(times):
        phase = k / max(n_rows - 1, 1)
        if phase < 0.35:          # quiet, shallow magmatic
            p, co2, scrub, episode = 150.0, 1500.0, 0.0, "quiet"
        elif phase < 0.6:         # deep pulse of fresh magma: CO2-rich
            p, co2, scrub, episode = 1200.0, 4500.0, 0.0, "deep pulse"
        else:                     # growing scrubbing
            p, co2, episode = 150.0, 1500.0, "scrubbing"
            scrub = min(0.95, 0.3 + 1.6 * (phase - 0.6))
        rows.append(dict(id=f"KRW-{k + 1:03d}", time=t.strftime("%Y-%m-%dT%H:%M:%SZ"),
                         episode=episode, pressure_bar=p, temperature_c=1080.0, dfmq=1.0,
                         scrubbed_so2=scrub, h2o_wt=4.0, co2_ppm=co2, s_ppm=1500.0,
                         s_partition=80.0, scrubbed_h2s=0.0, h2s_return=0.5, exsolved_gas_wt=0.0))
    return pd.DataFrame(rows)


def make_demo_data(out_dir, n_rows=8, seed=2026):
    """Write measurements.csv (synthetic, noisy) and truth.csv into out_dir."""
    from .forward import ForwardModel
    from .priors import load_prior_file
    spec = load_prior_file(DEMO_PRIOR)
    truth = truth_table(n_rows)
    model = ForwardModel(spec, RATIOS)
    theta = truth[list(spec.parameter_names)].to_numpy(dtype=float)
    clean = model.ratios(theta)
    rng = np.random.default_rng(seed)
    noisy = clean * np.exp(rng.normal(0.0, np.log(1 + RELATIVE_SIGMA), clean.shape))
    data = pd.DataFrame({"id": truth["id"], "time": truth["time"]})
    for k, r in enumerate(RATIOS):
        data[r] = [f"{v:.5g}" for v in noisy[:, k]]
        truth[f"true {r}"] = clean[:, k]
    os.makedirs(out_dir, exist_ok=True)
    data_path = os.path.join(out_dir, "measurements.csv")
    data.to_csv(data_path, index=False)
    truth.to_csv(os.path.join(out_dir, "truth.csv"), index=False)
    return data_path


def plot_series(summary_csv, truth_csv, path):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    s = pd.read_csv(summary_csv)
    t = pd.read_csv(truth_csv)
    times = pd.to_datetime(s["time"])
    fig, axes = plt.subplots(3, 1, figsize=(8, 7.5), sharex=True)
    axes[0].errorbar(times, s["p_magmatic"], yerr=s["p_magmatic_error"].fillna(0), fmt="o",
                     color="#2f4b7c", capsize=3)
    axes[0].set_ylabel("P(purely magmatic)")
    axes[0].set_ylim(-0.02, 1.02)
    med = s["scrubbed_so2_median"]
    axes[1].fill_between(times, s["scrubbed_so2_q05"], s["scrubbed_so2_q95"], color="#a05195",
                         alpha=0.25, label="5-95 % credible")
    axes[1].plot(times, med, "o-", color="#a05195", label="posterior median")
    axes[1].plot(pd.to_datetime(t["time"]), t["scrubbed_so2"], "k+", ms=9, label="synthetic truth")
    axes[1].set_ylabel("scrubbed SO2 fraction")
    axes[1].legend(frameon=False, fontsize=8)
    axes[2].fill_between(times, s["pressure_bar_q05"], s["pressure_bar_q95"], color="#d45087",
                         alpha=0.2)
    axes[2].plot(times, s["pressure_bar_median"], "o-", color="#d45087", label="posterior median")
    axes[2].plot(pd.to_datetime(t["time"]), t["pressure_bar"], "k+", ms=9, label="synthetic truth")
    axes[2].set_yscale("log")
    axes[2].set_ylabel("degassing pressure (bar)")
    axes[2].legend(frameon=False, fontsize=8)
    fig.suptitle("Mount Kerrow (fictional volcano), synthetic demo series")
    fig.text(0.01, 0.005, CAUTION, fontsize=7, color="#444444")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    fig.savefig(path, dpi=120)
    plt.close(fig)


def run_demo(out_dir="demo-output", n_rows=8, workers=2, seed=1, fast=True, progress=print):
    from .measurements import read_measurements
    from .series import run_series
    data_path = make_demo_data(out_dir, n_rows=n_rows)
    series = read_measurements(data_path, default_sigma=RELATIVE_SIGMA)
    options = dict(target_ess=300, max_steps=3000) if fast else {}
    run_series(series, str(DEMO_PRIOR), out_dir, seed=seed, workers=workers, options=options,
               progress=progress)
    fig = os.path.join(out_dir, "series.png")
    plot_series(os.path.join(out_dir, "summary.csv"), os.path.join(out_dir, "truth.csv"), fig)
    return out_dir
