"""Where a draw's gas ends inside the window model's pressure grid (saturation_edge.py)."""
from pathlib import Path

import numpy as np
from scipy import stats

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors import load_prior_file
from ventsource.inference.priors.distributions import LogUniform
from ventsource.inference.window.saturation_edge import edge_nodes, edge_positions, trapezoid_log_weights
from ventsource.inference.window.target import WindowTarget, pressure_grid

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def test_edge_nodes_only_where_the_gas_ends_for_good():
    good = np.array([[1, 1, 1, 1], [1, 1, 0, 0], [1, 0, 1, 1], [0, 0, 0, 0], [1, 0, 0, 0]], dtype=bool)
    # gas to the top: no edge; ends after node 1; a gap below gas again: the top has gas;
    # no gas at all; ends after node 0 (common practice, no source: by construction)
    assert edge_nodes(good).tolist() == [-1, 1, -1, -1, 0]


def test_weights_at_an_edge_hold_the_prior_mass_below_it():
    """Log-uniform pressure prior: the density is flat in ln P, so the trapezoid is exact
    and the weights of a draw whose gas ends at P_e sum to F(P_e), scipy's loguniform CDF;
    the full grid sums to 1."""
    dist = LogUniform(1.0, 3000.0)
    _, p_quad, log_w = pressure_grid(dist, 48, 2)
    ln_quad = np.log(p_quad)
    raw = trapezoid_log_weights(ln_quad[None, :], dist.log_pdf, 0.0)[0]
    log_norm = np.logaddexp.reduce(raw)
    assert np.allclose(raw - log_norm, log_w, atol=1e-12)
    j = np.array([10, 30, 46])
    ln_solve = np.log(pressure_grid(dist, 48, 2)[0])
    ln_edge = 0.5 * (ln_solve[j] + ln_solve[j + 1])
    ln_p = edge_positions(ln_quad, 2, j, ln_edge)
    assert np.all(np.diff(ln_p, axis=1) >= 0) and np.allclose(ln_p.max(axis=1), ln_edge)
    mass = np.exp(trapezoid_log_weights(ln_p, dist.log_pdf, log_norm)).sum(axis=1)
    assert np.allclose(mass, stats.loguniform(1.0, 3000.0).cdf(np.exp(ln_edge)), atol=1e-12)


def test_edge_found_by_bisection_matches_the_saturation_pressure():
    """The edge of each draw lies within 1/32 of a solve interval (in ln P) below the
    saturation pressure the forward model finds by its own 50-step bisection, and the
    gas there is the gas of a direct solve at that pressure (to the solver's tolerance)."""
    spec = load_prior_file(ROOT / "priors" / "arc_basalt.toml")
    forward = ForwardModel(spec, ratio_names=NAMES)
    lik = Likelihood(Measurement(NAMES, [0.5, 0.1, 30.0], 0.15), prediction_names=NAMES)
    # the fixed grid: with pooled pressures (the default) every draw has its own points in edges
    target = WindowTarget(spec, forward, [lik], 0.5, adaptive=False)
    psi = target.shared_prior.sample(np.random.default_rng(3), 200)
    gas, _, edges = target.gas_on_grid(psi)
    e, ln_p = edges
    assert e.size >= 5
    full = target.shared_prior.full(psi[e])
    p_sat = forward.state(full, saturation=True)["saturation_pressure_bar"]
    ln_edge = ln_p[:, -1]
    step = np.log(target.p_solve[1] / target.p_solve[0])
    assert np.all(ln_edge <= np.log(p_sat) + 1e-9)
    assert np.all(np.log(p_sat) - ln_edge < step / 32 + 1e-9)
    full[:, target._j_p] = np.exp(ln_edge)
    direct = forward.state(full, saturation=False)["gas"]
    top = np.argmax(ln_p == ln_edge[:, None], axis=1)   # the first slot at the edge
    # the grid's sweep starts each state from its neighbour's solution, so it agrees with a
    # cold solve to the speciation solver's tolerance, not bit for bit (measured <= 5e-9)
    assert np.allclose(gas[e, top], direct, rtol=1e-8, atol=0)
    # no gas above the edge: the last point has none unless the edge lies in the last solve
    # interval (then every point up to the last one is spread below or onto the edge)
    in_last = ln_edge >= np.log(target.p_solve[-2]) - 1e-12
    assert np.all(np.isnan(gas[e, -1]).all(axis=1) | (top == ln_p.shape[1] - 1) | in_last)
