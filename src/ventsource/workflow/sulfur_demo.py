"""Synthetic sulfur-budget series at Mount Kerrow, a fictional volcano (for tests).

Made by this package's own forward model from known truth plus noise, through the
demo's series maker (workflow.demo.synthesize_series); it describes no real place or
data (labelled synthetic in the files). The story, one measurement a week, all in one
magma source: quiet magmatic degassing; a hydrothermal system that scrubs a growing
share of the SO2 (0.1 up to 0.99) so that the SO2 flux falls to below detection while
the CO2 flux carries on; then the stored sulfur is released, the SO2 flux rising to a
multiple (1 + r) of the magmatic one. Ratios carry 15 % and fluxes 20 % log-normal
errors. The release-capable prior is the shipped demo_mount_kerrow_fast_release.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

CO2_FLUX_TPD = 1500.0       # invented mean CO2 output of the fictional volcano
SOURCE = dict(temperature_c=1080.0, quench_temperature_c=880.0, dfmq=1.0, h2o_wt=4.0, co2_ppm=1500.0, s_ppm=1500.0,
              scrubbed_h2s=0.0, exsolved_gas_wt=0.0)


def sulfur_truth(n_rows=36, start="2025-03-01", step_days=7, phases=(0.25, 0.85)):
    """True state per row: quiet, growing scrubbing, release (DataFrame)."""
    times = pd.date_range(start, periods=n_rows, freq=f"{int(step_days)}D")
    rows = []
    for k, t in enumerate(times):
        phase = k / max(n_rows - 1, 1)
        scrubbed, released, episode = 0.0, 0.0, "quiet"
        if phases[0] <= phase < phases[1]:
            episode = "scrubbing"
            scrubbed = min(0.99, 0.1 + 0.95 * (phase - phases[0]) / (phases[1] - phases[0]))
        elif phase >= phases[1]:
            episode = "release"
            released = 2.5 - 1.5 * (phase - phases[1]) / (1.0 - phases[1])  # x3.5 falling to x2
        rows.append(dict(id=f"KRW-S{k + 1:03d}", time=t.strftime("%Y-%m-%dT%H:%M:%SZ"),
                         episode=episode, pressure_bar=round(150.0 * (1 + 0.2 * np.sin(7 * phase)), 3),
                         scrubbed_so2=round(scrubbed, 4), released_so2=round(released, 4),
                         co2_flux_tpd=CO2_FLUX_TPD * (1 + 0.1 * np.sin(5 * phase)), **SOURCE))
    return pd.DataFrame(rows)


def make_sulfur_series(out_dir, n_rows=36, seed=2027, prior_path=None):
    """Write measurements.csv (synthetic, with fluxes) and truth.csv; returns the data path.

    truth.csv holds the true ratios, magmatic and emitted SO2 fluxes, the retained
    sulfur rate (t/d of S) and its running total (trapezoid rule, t)."""
    from ventsource.workflow.demo import synthesize_series
    return synthesize_series(sulfur_truth(n_rows), out_dir, seed=seed, prior_path=prior_path)
