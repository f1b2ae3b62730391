"""Acceptance (slow): a window of gas made at depth and re-equilibrated at 1 bar by an
independent Gibbs minimiser, inverted with the gas-buffered quench.

Gas at depth: this package's degassing + speciation (arc_basalt, one magma source,
14 pressures 50-1500 bar). Re-equilibrated at 1 bar and 1000 C by Cantera's
`equilibrate('TP')` at fixed elements (ideal gas, NASA Glenn data bundled with Cantera),
not by the package; half the rows then lose 70 % of their SO2 (plain loss); 15 %
log-normal noise, seeded. Inverted by the window model with the shipped arc_basalt
(gas_buffered) and pooled window pressures; the same data with quench = "none" is
printed beside it (no assertion: what the quench stage changes).
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
TRUTH = dict(temperature_c=1150.0, dfmq=1.0, h2o_wt=4.0, co2_ppm=2000.0, s_ppm=2000.0, s_partition=100.0)
QUENCH_C = 1000.0


def _prior(quench):
    data = tomllib.loads((ROOT / "priors" / "arc_basalt.toml").read_text())
    data["window"] = {"pressure_rows": "pooled"}
    data["models"]["quench"] = quench
    if quench == "none":
        for name in ("quench_temperature_c", "h2_retained_log10"):
            data["parameters"].pop(name)
    return parse_prior(data, f"arc_basalt_{quench}.toml")


def _window_data(n_rows=14, seed=11):
    spec = _prior("none")
    rng = np.random.default_rng(seed)
    pressure = np.exp(np.linspace(np.log(50.0), np.log(1500.0), n_rows))
    rng.shuffle(pressure)
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
    scrubbed = np.r_[np.zeros(n_rows // 2), np.full(n_rows - n_rows // 2, 0.7)]
    vent[:, INDEX["SO2"]] *= 1.0 - scrubbed
    top = np.column_stack([vent[:, INDEX["SO2"]], vent[:, INDEX["H2S"]], vent[:, INDEX["H2O"]]])
    bottom = np.column_stack([vent[:, INDEX["CO2"]], vent[:, INDEX["SO2"]], vent[:, INDEX["CO2"]]])
    clean = top / bottom
    obs = clean * np.exp(np.log1p(0.15) * rng.standard_normal(clean.shape))
    return [Measurement(NAMES, obs[i], 0.15, label=f"q{i}") for i in range(n_rows)], scrubbed


def _summary(res, scrubbed):
    p = np.array([r.p_magmatic for r in res.rows])
    dfmq = res.shared_draws[..., res.shared_names.index("dfmq")].ravel()
    return p, np.quantile(dfmq, [0.05, 0.5, 0.95])


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="open item, measured with the 0.3.0 priors (capacity, "
                   "evolving redox, gas-buffered quench): dFMQ band 1.02-1.25 just misses the truth "
                   "1.0, every scrubbed row has P(M0) 0.000, the magmatic rows' mean P(M0) is 0.732 "
                   "(one row 0.21), below the 0.75 asked; quench none: 1.10-1.31, 0.732. Before the "
                   "redox and sulfur laws: 0.79-1.55 (holds), 0.687. 0.4.0 (pooled pressures on each "
                   "draw's own range, exact copula masses: quadrature errors 0.19 nats at most in log "
                   "Z0): 1.03-1.25, mean 0.734 (one row 0.209), scrubbed 0.000; quench none 1.10-1.29, "
                   "0.733: the quadrature was not what held it back")
def test_window_of_quenched_gas_recovers_the_magma(capsys):
    meas, scrubbed = _window_data()
    out = {}
    for quench in ("gas_buffered", "none"):
        spec = _prior(quench)
        res = infer_window(meas, spec, seed=4)
        out[quench] = (_summary(res, scrubbed), res.flags)
    with capsys.disabled():
        print(f"\ntrue dFMQ {TRUTH['dfmq']}, quench {QUENCH_C} C at 1 bar (Cantera)")
        for quench, ((p, band), flags) in out.items():
            print(f"quench={quench:12s} dFMQ 5/50/95 % {band.round(2)}  P(M0) magmatic rows mean "
                  f"{p[scrubbed == 0].mean():.3f} (min {p[scrubbed == 0].min():.3f}), scrubbed rows max "
                  f"{p[scrubbed > 0].max():.3f}; flags {flags}")
    (p, band), _ = out["gas_buffered"]
    assert band[0] <= TRUTH["dfmq"] <= band[2], band
    assert p[scrubbed == 0].mean() >= 0.75, p
    assert np.all(p[scrubbed > 0] <= 0.1), p
