"""Synthetic sulfur-budget series at Mount Kerrow, a fictional volcano.

Made by this package's own forward model from known truth plus noise; it describes
no real place or data (labelled synthetic in the files). The story: quiet magmatic
degassing; a hydrothermal system that scrubs a growing share of the SO2 (0.1 up to
0.99) so that the SO2 flux falls to below detection while the CO2 flux carries on;
then the stored sulfur is released, the SO2 flux rising to a multiple (1 + r) of the
magmatic one. Ratios carry 15 % and fluxes 20 % log-normal errors.
"""
from __future__ import annotations

import os

import numpy as np
import pandas as pd

from ventsource.workflow.sulfur_budget import S_PER_SO2, SO2_PER_CO2_MASS

RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
RATIO_SIGMA = 0.15          # in-plume sensor ratios: 10-20 % (common practice, no source)
FLUX_SIGMA = 0.20           # spectrometer fluxes: 20-30 % (common practice, no source)
SO2_DETECTION_TPD = 50.0    # invented detection limit of the fictional network
CO2_FLUX_TPD = 1500.0       # invented mean CO2 output of the fictional volcano
SOURCE = dict(temperature_c=1080.0, dfmq=1.0, h2o_wt=4.0, co2_ppm=1500.0, s_ppm=1500.0,
              s_partition=80.0, scrubbed_h2s=0.0, h2s_return=0.5, exsolved_gas_wt=0.0)


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
    from ventsource.ascent import observables
    from ventsource.chemistry.species import INDEX
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.demo import DEMO_PRIOR
    spec = load_prior_file(prior_path or DEMO_PRIOR)
    truth = sulfur_truth(n_rows)
    model = ForwardModel(spec, RATIOS)
    st = model.state(truth[list(spec.parameter_names)].to_numpy(dtype=float), saturation=False)
    gas = st["gas"].copy()
    gas[:, INDEX["SO2"]] *= 1.0 + truth["released_so2"].to_numpy()
    clean = observables.ratios(gas, RATIOS)
    mag = st["magmatic_gas"]
    so2_co2 = mag[:, INDEX["SO2"]] / mag[:, INDEX["CO2"]]
    factor = (1.0 - truth["scrubbed_so2"]) * (1.0 + truth["released_so2"])
    truth["magmatic_so2_flux_tpd"] = truth["co2_flux_tpd"] * so2_co2 * SO2_PER_CO2_MASS
    truth["emitted_so2_flux_tpd"] = truth["magmatic_so2_flux_tpd"] * factor
    truth["retained_s_tpd"] = (truth["magmatic_so2_flux_tpd"] - truth["emitted_so2_flux_tpd"]) * S_PER_SO2
    days = (pd.to_datetime(truth["time"]) - pd.to_datetime(truth["time"][0])).dt.total_seconds() / 86400
    rate = truth["retained_s_tpd"].to_numpy()
    truth["cumulative_retained_s_t"] = np.concatenate(
        [[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(days.to_numpy()))])
    rng = np.random.default_rng(seed)
    noisy = clean * np.exp(rng.normal(0.0, np.log1p(RATIO_SIGMA), clean.shape))
    so2_f = truth["emitted_so2_flux_tpd"].to_numpy() * np.exp(rng.normal(0.0, np.log1p(FLUX_SIGMA), n_rows))
    co2_f = truth["co2_flux_tpd"].to_numpy() * np.exp(rng.normal(0.0, np.log1p(FLUX_SIGMA), n_rows))
    data = pd.DataFrame({"id": truth["id"], "time": truth["time"]})
    for k, r in enumerate(RATIOS):
        data[r] = [f"{v:.5g}" for v in noisy[:, k]]
        truth[f"true {r}"] = clean[:, k]
    data["SO2 flux"] = [f"<{SO2_DETECTION_TPD:g}" if v < SO2_DETECTION_TPD else f"{v:.4g}" for v in so2_f]
    data["sigma SO2 flux"] = FLUX_SIGMA
    data["CO2 flux"] = [f"{v:.4g}" for v in co2_f]
    data["sigma CO2 flux"] = FLUX_SIGMA
    data["quality note"] = "synthetic, fictional Mount Kerrow"
    os.makedirs(out_dir, exist_ok=True)
    path = os.path.join(out_dir, "measurements.csv")
    data.to_csv(path, index=False)
    truth.to_csv(os.path.join(out_dir, "truth.csv"), index=False)
    return path


RELEASE_TABLE = '''
[hypotheses]
p_released = 0.2
source = "defaults of ventsource: release needs stored sulfur, judged rarer than either ordinary state (no source)"

[hypotheses.released_so2]
distribution = "loguniform"
min = 0.1
max = 10.0
source = "invented bounds for the fictional demo: below a 10 % excess a release hides in the ratio errors"
'''


def write_release_prior(out_path, base_prior=None):
    """The fast demo prior plus the [hypotheses] table of the third hypothesis (M2)."""
    from ventsource.workflow.demo import DEMO_FAST_PRIOR
    with open(base_prior or DEMO_FAST_PRIOR, encoding="utf-8") as fh:
        text = fh.read()
    text = text.replace('name = "demo_mount_kerrow_fast"', 'name = "demo_mount_kerrow_fast_release"')
    with open(out_path, "w", encoding="utf-8") as fh:
        fh.write(text + RELEASE_TABLE)
    return out_path
