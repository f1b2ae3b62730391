"""Acceptance (slow): a window of gas made at depth and re-equilibrated at 1 bar by an
independent Gibbs minimiser, inverted with the gas-buffered quench.

Gas at depth: this package's degassing + speciation (arc_basalt, one magma source,
14 pressures 50-1500 bar). Re-equilibrated at 1 bar and 1000 C by Cantera's
`equilibrate('TP')` at fixed elements (ideal gas, NASA Glenn data bundled with Cantera),
not by the package; half the rows then lose 70 % of their SO2 (plain loss); 15 %
log-normal noise, seeded. No H2 is burnt by air (h2_retained_log10 = 0, the upper edge
of its prior). Inverted by the window model with the shipped arc_basalt (gas_buffered)
and pooled window pressures; the same data with quench = "none" is printed beside it.

Why the checks are what they are (measured, docs/models.md "The gas on its way to the
vent"):
* the truth lies inside the prior in every parameter (quench 1000 C in 600-1100 C), and
  the package's own gas-buffered quench of the truth's deep gas reproduces the Cantera
  vent ratios to 1e-4 (relative), far inside the 15 % noise;
* noise-free, the window holds the truth (dFMQ 0.93-1.18, magmatic mean P(M0) 0.847);
  quench = "none" misses it even without noise (1.04-1.20): that is what the stage buys;
* the Occam ceiling: a noise-free magmatic row with the magma at its truth gets
  P(M0) 0.87-0.89 (the scrubbed-fraction prior's volume against the 15 % error, pressure
  integrated over its prior; 0.896 at a known pressure), so a mean of 0.75 is reachable,
  but the magmatic rows' P(M0) moves steeply with the magma's dFMQ (higher dFMQ reads a
  magmatic row's H2S/SO2 as scrubbing): a noise realisation that pulls dFMQ up pulls the
  magmatic rows' P(M0) down with it (data seed 11: dFMQ 1.03-1.25, mean 0.734);
* the band sits above the truth in every seed (medians 1.075-1.16) because the quench
  temperature is not identified by these three ratios (posterior = prior, 600-1100 C,
  median near 870 C), trades off against dFMQ, and the truth (1000 C) sits high in its
  prior; pinned at 1000 C the noise-free median falls from 1.085 to 1.029, and with
  CO/CO2 measured it is identified (test_co_co2_identifies_the_quench_temperature; on
  seed 11 the median falls from 1.14 to 1.084, the band still misses by 0.004);
* so one noise realisation decides little: the band and the mean are asserted over
  several seeds (test_noisy_windows_recover_the_magma_in_most_seeds).
"""
import tomllib
from pathlib import Path

import numpy as np
import pytest

from ventsource.chemistry.species import INDEX, SPECIES
from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Measurement
from ventsource.inference.priors import parse_prior
from ventsource.inference.window.sampling import infer_window

ct = pytest.importorskip("cantera")
ROOT = Path(__file__).resolve().parents[1]
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
TRUTH = dict(temperature_c=1150.0, dfmq=1.0, h2o_wt=4.0, co2_ppm=2000.0, s_ppm=2000.0)
QUENCH_C = 1000.0
SMC_SEED = 4
# Data seeds of the multi-seed check; 11 is the realisation the single-seed test used.
DATA_SEEDS = (11, 1, 2, 3, 4, 5)
# The dFMQ 90 % band must hold the truth in at least MIN_HOLDS of the len(DATA_SEEDS)
# windows. Binomial: a band that holds a fixed truth 90 % of the time passes with
# P = 0.984 (>= 4 of 6), one that holds it half the time with P = 0.34, 70 % with 0.74
# (scipy.stats.binom.sf). Measured: 4 of 6 (seeds 11 and 4 miss, at 1.01 and 1.02), mean
# P(M0) over the 42 magmatic rows 0.774, scrubbed rows 0.000 (docs/models.md). Re-measured
# on 0.4.1 (window main runs move by the jump rule): 4 of 6 again (11 and 4 miss at 1.01
# and 1.02), mean 0.775, scrubbed 0.000; noise-free 0.91-1.18, mean 0.848 (quench "none"
# 1.04-1.20). On 0.4.2 (the ridge move rule): 4 of 6 (11 and 4 miss at 1.00 and 1.03),
# mean 0.776, scrubbed 0.000; noise-free 0.91-1.18, mean 0.849.
MIN_HOLDS = 4
MIN_MEAN_P_MAGMATIC = 0.75   # the target, on the magmatic rows of all seeds pooled
MAX_P_SCRUBBED = 0.1


def _prior(quench):
    data = tomllib.loads((ROOT / "priors" / "arc_basalt.toml").read_text())
    data["window"] = {"pressure_rows": "pooled"}
    data["models"]["quench"] = quench
    if quench == "none":
        for name in ("quench_temperature_c", "h2_retained_log10"):
            data["parameters"].pop(name)
    return parse_prior(data, f"arc_basalt_{quench}.toml")


def _vent_gas(pressure):
    """The truth's gas at depth (the package) re-equilibrated at 1 bar, QUENCH_C (Cantera)."""
    spec = _prior("none")
    rows = [dict(TRUTH, pressure_bar=p, scrubbed_so2=0.0) for p in pressure]
    theta = np.array([[r[n] for n in spec.parameter_names] for r in rows])
    deep = ForwardModel(spec, NAMES).state(theta)["deep_gas"]
    assert np.all(np.isfinite(deep))
    from ventsource.bench.speed import cantera_reference_gas
    gas = cantera_reference_gas()
    order = [gas.species_index(s) for s in SPECIES]
    vent = np.empty_like(deep)
    for i, x in enumerate(deep):
        gas.TPX = QUENCH_C + 273.15, 1e5, dict(zip(SPECIES, x))
        gas.equilibrate("TP")
        vent[i] = gas.X[order]
    return vent


def _window_data(n_rows=14, seed=11, noise=True, with_co=False):
    """Measurements, scrubbed fractions and pressures of one window; the pressures'
    order and the noise both come from `seed`. with_co adds CO/CO2 (its noise drawn
    after the others', so the three ratios keep theirs)."""
    rng = np.random.default_rng(seed)
    pressure = np.exp(np.linspace(np.log(50.0), np.log(1500.0), n_rows))
    rng.shuffle(pressure)
    vent = _vent_gas(pressure)
    scrubbed = np.r_[np.zeros(n_rows // 2), np.full(n_rows - n_rows // 2, 0.7)]
    vent[:, INDEX["SO2"]] *= 1.0 - scrubbed
    top = np.column_stack([vent[:, INDEX["SO2"]], vent[:, INDEX["H2S"]], vent[:, INDEX["H2O"]]])
    bottom = np.column_stack([vent[:, INDEX["CO2"]], vent[:, INDEX["SO2"]], vent[:, INDEX["CO2"]]])
    obs = top / bottom
    names = NAMES
    if noise:
        obs = obs * np.exp(np.log1p(0.15) * rng.standard_normal(obs.shape))
    if with_co:
        co = vent[:, INDEX["CO"]] / vent[:, INDEX["CO2"]]
        if noise:
            co = co * np.exp(np.log1p(0.15) * rng.standard_normal(co.shape))
        obs, names = np.column_stack([obs, co]), NAMES + ("CO/CO2",)
    return [Measurement(names, obs[i], 0.15, label=f"q{i}") for i in range(n_rows)], scrubbed, pressure


def _summary(res):
    p = np.array([r.p_magmatic for r in res.rows])
    dfmq = res.shared_draws[..., res.shared_names.index("dfmq")].ravel()
    return p, np.quantile(dfmq, [0.05, 0.5, 0.95])


def _line(label, p, band, scrubbed, flags):
    return (f"{label:28s} dFMQ 5/50/95 % {band.round(2)}  P(M0) magmatic mean {p[scrubbed == 0].mean():.3f} "
            f"(min {p[scrubbed == 0].min():.3f}), scrubbed max {p[scrubbed > 0].max():.3f}; flags {flags}")


def test_package_quench_reproduces_the_cantera_vent_gas():
    # the data's premise: the model inverted can make the data. The package's gas-buffered
    # quench of the truth's deep gas against Cantera's (measured 1e-4 relative at most,
    # H2S/SO2); the limit, 1 %, is a fifteenth of the 15 % noise
    pressure = np.exp(np.linspace(np.log(50.0), np.log(1500.0), 14))
    reference = _vent_gas(pressure)
    spec = _prior("gas_buffered")
    rows = [dict(TRUTH, pressure_bar=p, scrubbed_so2=0.0, quench_temperature_c=QUENCH_C,
                 h2_retained_log10=0.0) for p in pressure]
    theta = np.array([[r[n] for n in spec.parameter_names] for r in rows])
    ours = ForwardModel(spec, NAMES).state(theta)["magmatic_gas"]
    for top, bottom in (("SO2", "CO2"), ("H2S", "SO2"), ("H2O", "CO2"), ("H2", "H2O"), ("CO", "CO2")):
        rel = (ours[:, INDEX[top]] / ours[:, INDEX[bottom]]) / (reference[:, INDEX[top]] / reference[:, INDEX[bottom]])
        assert np.all(np.abs(rel - 1.0) < 0.01), (top, bottom, rel)
    for name, value in TRUTH.items():   # the truth inside the prior
        d = spec.distributions[name]
        assert d.lower <= value <= d.upper, name
    d = spec.distributions["quench_temperature_c"]
    assert d.lower <= QUENCH_C <= d.upper


@pytest.mark.slow
def test_noise_free_window_recovers_the_magma(capsys):
    # no noise: what is left is the model and the prior. Measured: gas-buffered 0.93-1.18,
    # magmatic mean 0.847 (min 0.789), scrubbed 0.000; quench none 1.04-1.20 (misses), 0.849
    meas, scrubbed, _ = _window_data(noise=False)
    out = {}
    for quench in ("gas_buffered", "none"):
        res = infer_window(meas, _prior(quench), seed=SMC_SEED)
        out[quench] = (*_summary(res), res.flags)
    with capsys.disabled():
        print(f"\nnoise-free window, true dFMQ {TRUTH['dfmq']}, quench {QUENCH_C} C at 1 bar (Cantera)")
        for quench, (p, band, flags) in out.items():
            print(_line(f"quench={quench}", p, band, scrubbed, flags))
    p, band, _ = out["gas_buffered"]
    assert band[0] <= TRUTH["dfmq"] <= band[2], band
    assert p[scrubbed == 0].mean() >= MIN_MEAN_P_MAGMATIC, p
    assert np.all(p[scrubbed > 0] <= MAX_P_SCRUBBED), p


@pytest.mark.slow
def test_noisy_windows_recover_the_magma_in_most_seeds(capsys):
    holds, p_magmatic, p_scrubbed, lines = 0, [], [], []
    for seed in DATA_SEEDS:
        meas, scrubbed, _ = _window_data(seed=seed)
        res = infer_window(meas, _prior("gas_buffered"), seed=SMC_SEED)
        p, band = _summary(res)
        holds += int(band[0] <= TRUTH["dfmq"] <= band[2])
        p_magmatic.append(p[scrubbed == 0])
        p_scrubbed.append(p[scrubbed > 0])
        lines.append(_line(f"seed {seed} gas_buffered", p, band, scrubbed, res.flags))
        if seed == DATA_SEEDS[0]:   # the same data with quench none, side by side
            p0, band0 = _summary(res0 := infer_window(meas, _prior("none"), seed=SMC_SEED))
            lines.append(_line(f"seed {seed} none", p0, band0, scrubbed, res0.flags))
    mean_p = float(np.concatenate(p_magmatic).mean())
    with capsys.disabled():
        print(f"\ntrue dFMQ {TRUTH['dfmq']}, quench {QUENCH_C} C at 1 bar (Cantera), {len(DATA_SEEDS)} noise seeds")
        print("\n".join(lines))
        print(f"band holds the truth in {holds} of {len(DATA_SEEDS)}; magmatic rows' mean P(M0), "
              f"all seeds: {mean_p:.3f}")
    assert holds >= MIN_HOLDS, holds
    assert mean_p >= MIN_MEAN_P_MAGMATIC, mean_p
    assert np.all(np.concatenate(p_scrubbed) <= MAX_P_SCRUBBED), p_scrubbed


@pytest.mark.slow
def test_co_co2_identifies_the_quench_temperature(capsys):
    # the cause of the drag, shown: with CO/CO2 measured as well (the same 15 % noise),
    # the quench temperature, its prior again with three ratios, is identified. Measured
    # on seed 11: quench 997-1014 C (truth 1000); dFMQ 1.004 / 1.084 / 1.179 against
    # 1.01 / 1.14 / 1.25 with three ratios: the drag shrinks but this realisation still
    # misses the truth by 0.004, so the band is printed, not asserted; magmatic mean
    # P(M0) 0.734 (the row at 185 bar, 0.083: its noise reads as scrubbing); scrubbed 0.000
    meas, scrubbed, _ = _window_data(seed=DATA_SEEDS[0], with_co=True)
    res = infer_window(meas, _prior("gas_buffered"), seed=SMC_SEED)
    p, band = _summary(res)
    t_q = np.quantile(res.shared_draws[..., res.shared_names.index("quench_temperature_c")].ravel(), [0.05, 0.95])
    with capsys.disabled():
        print("\n" + _line(f"seed {DATA_SEEDS[0]} + CO/CO2", p, band, scrubbed, res.flags)
              + f"; quench 90 % {t_q.round(0)} C")
    # three ratios: 626-1085 C over the six seeds, the prior's own 90 % (625-1075)
    assert t_q[0] <= QUENCH_C <= t_q[1] and t_q[1] - t_q[0] < 100.0, t_q
    assert np.all(p[scrubbed > 0] <= MAX_P_SCRUBBED), p
