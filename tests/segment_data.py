"""Synthetic series with known changes of magma source, made by the package's own forward
model (for the segmentation tests and the acceptance numbers). Invented data: the truth
is known by construction; nothing here is a measurement."""
import numpy as np

from ventsource.inference.likelihood import Measurement

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def source_series(spec, forward, n_rows, change_at=(), scrubbed=None, seed=5, sigma=0.15):
    """n_rows rows from one drawn source; from each row index in change_at on, a new source
    with twice the CO2 and half the S of the one before (a recharge, as in
    tests/test_window.py). Pressures 50-1500 bar, shuffled; scrubbed: per-row fraction."""
    rng = np.random.default_rng(seed)
    names = list(spec.free_names)
    scrubbed = np.zeros(n_rows) if scrubbed is None else np.asarray(scrubbed, float)
    while True:
        theta = np.repeat(spec.sample(rng, 1), n_rows, axis=0)
        pressure = np.exp(np.linspace(np.log(50.0), np.log(1500.0), n_rows))
        rng.shuffle(pressure)
        theta[:, names.index("pressure_bar")] = pressure
        theta[:, names.index("scrubbed_so2")] = scrubbed
        for c in change_at:
            theta[c:, names.index("co2_ppm")] *= 2.0
            theta[c:, names.index("s_ppm")] *= 0.5
        pred = forward.ratios(spec.full(theta))
        if np.all(np.isfinite(pred)):
            break
    obs = pred * np.exp(np.log1p(sigma) * rng.standard_normal(pred.shape))
    return [Measurement(NAMES, obs[i], sigma, label=f"r{i:03d}") for i in range(n_rows)], theta


def write_csv(path, measurements, start="2026-01-01"):
    """A measurement file, one row a day."""
    day0 = np.datetime64(start)
    lines = ["id,time," + ",".join(NAMES)]
    for i, m in enumerate(measurements):
        lines.append(f"{m.label},{day0 + np.timedelta64(i, 'D')}T00:00:00Z,"
                     + ",".join(f"{v:.6g}" for v in m.values))
    path.write_text("\n".join(lines) + "\n")
    return str(path)
