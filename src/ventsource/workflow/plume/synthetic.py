"""Synthetic 1 Hz in-plume sensor records with known ratios (fictional Mount Kerrow).

For tests, the benchmark and the example file only: invented numbers, labelled
synthetic. Plume passages are Gaussian puffs with turbulent modulation on a
constant ambient background; each gas has white noise and a sensor lag.
"""
import numpy as np
import pandas as pd

from ventsource.workflow.plume.humidity import enhancement_factor, saturation_vapour_pressure_hpa

TRUE_RATIOS = {"SO2/CO2": 0.3, "H2S/SO2": 0.2, "H2O/CO2": 30.0, "H2/SO2": 0.05}
BACKGROUND_PPMV = {"CO2": 420.0, "SO2": 0.0, "H2S": 0.0, "H2": 0.5}
NOISE = {"CO2": 1.0, "SO2": 0.05, "H2S": 0.02, "H2": 0.01, "RH": 0.05, "T": 0.05, "P": 0.05}
LAG_S = {"CO2": 5, "H2S": 2, "H2": 0, "RH": 3, "T": 3, "P": 0, "SO2": 0}


def plume_signal(n_seconds, rng, every_s=300.0, amplitude_ppmv=(1.0, 8.0)):
    """SO2 excess (ppmv) at 1 Hz: a puff every `every_s` seconds on average."""
    t = np.arange(n_seconds, dtype=float)
    signal = np.zeros(n_seconds)
    n_puffs = rng.poisson(n_seconds / every_s)
    centres = rng.uniform(0, n_seconds, n_puffs)
    widths = rng.uniform(15, 60, n_puffs)
    heights = rng.uniform(*amplitude_ppmv, n_puffs)
    for c, w, h in zip(centres, widths, heights):
        lo, hi = int(max(0, c - 5 * w)), int(min(n_seconds, c + 5 * w))
        signal[lo:hi] += h * np.exp(-0.5 * ((t[lo:hi] - c) / w) ** 2)
    turbulence = np.exp(0.3 * np.convolve(rng.standard_normal(n_seconds), np.ones(5) / 5, "same"))
    return signal * turbulence


def _lagged(v, lag):
    return np.concatenate([np.full(lag, v[0]), v[:v.size - lag]]) if lag > 0 else v


def synthetic_record(n_seconds, seed=0, start="2026-03-14T00:00:00", ratios=None):
    """DataFrame with time (ISO 8601 Z) and CO2, SO2, H2S, H2 [ppmv], T [C], RH [%], P [hPa]."""
    rng = np.random.default_rng(seed)
    r = dict(TRUE_RATIOS, **(ratios or {}))
    so2 = plume_signal(n_seconds, rng)
    excess = {"SO2": so2, "CO2": so2 / r["SO2/CO2"], "H2S": so2 * r["H2S/SO2"], "H2": so2 * r["H2/SO2"]}
    cols = {}
    for g in ("CO2", "SO2", "H2S", "H2"):
        clean = BACKGROUND_PPMV[g] + _lagged(excess[g], LAG_S[g])
        cols[f"{g} [ppmv]"] = clean + NOISE[g] * rng.standard_normal(n_seconds)
    t_c = np.full(n_seconds, 12.0)
    p_hpa = np.full(n_seconds, 850.0)
    h2o = 8000.0 + excess["CO2"] * r["H2O/CO2"]
    rh = h2o * 1e-6 * p_hpa / (enhancement_factor(p_hpa) * saturation_vapour_pressure_hpa(t_c)) * 100
    cols["T [C]"] = t_c + NOISE["T"] * rng.standard_normal(n_seconds)
    cols["RH [%]"] = _lagged(rh, LAG_S["RH"]) + NOISE["RH"] * rng.standard_normal(n_seconds)
    cols["P [hPa]"] = p_hpa + NOISE["P"] * rng.standard_normal(n_seconds)
    times = pd.date_range(pd.Timestamp(start), periods=n_seconds, freq="s")
    frame = pd.DataFrame({"time": times.strftime("%Y-%m-%dT%H:%M:%SZ")})
    for name, v in cols.items():
        frame[name] = np.round(v, 4)
    return frame


def write_synthetic_csv(path, n_seconds, seed=0, start="2026-03-14T00:00:00"):
    frame = synthetic_record(n_seconds, seed=seed, start=start)
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write("# SYNTHETIC in-plume sensor record, fictional Mount Kerrow (ventsource test data);\n"
                 f"# true ratios {TRUE_RATIOS}; seed {seed}\n")
        frame.to_csv(fh, index=False)
    return path
