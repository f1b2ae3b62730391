"""Pooled per-row pressures of the window model (ventsource.inference.window.pooled_pressure).

The copula must leave each row's prior exactly the prior file's: checked against the
file's own pressure distribution by Monte Carlo over the copula's centre and spread,
and by the identity at spread 1 (independent rows). The window-level benefit is
checked on synthetic rows from the package's forward model (slow).
"""
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.window.pooled_pressure import (PooledPrior, ScoreTable, cell_log_masses, normal_scores,
                                                         pooled_log_weights, pooled_range)
from ventsource.inference.priors import load_prior_file
from ventsource.inference.window.target import WindowTarget, pressure_grid

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


@pytest.fixture(scope="module")
def basalt(tmp_path_factory):
    """arc_basalt with [window] pressure_rows = "pooled" (the default is independent)."""
    path = tmp_path_factory.mktemp("pooled") / "arc_basalt_pooled.toml"
    path.write_text((ROOT / "priors" / "arc_basalt.toml").read_text(encoding="utf-8")
                    + '\n[window]\npressure_rows = "pooled"\n', encoding="utf-8")
    spec = load_prior_file(path)
    return spec, ForwardModel(spec, ratio_names=NAMES)


def test_normal_scores_of_the_grid_are_standard_normal_quantiles(basalt):
    spec, _ = basalt
    _, p_quad, log_w = pressure_grid(spec.distributions["pressure_bar"])
    z = normal_scores(log_w)
    w = np.exp(log_w)
    # the grid's own weights, mapped through z, reproduce Normal(0, 1)'s mean and variance
    assert abs(np.sum(w * z)) < 0.02 and abs(np.sum(w * z * z) - 1.0) < 0.05
    # and z is Phi^-1 of the prior's CDF at the nodes (scipy's norm.ppf, mid-cell convention)
    u = np.cumsum(w) - 0.5 * w
    assert np.allclose(z, stats.norm.ppf(u), atol=1e-9)


def test_spread_one_is_the_independent_model(basalt):
    spec, _ = basalt
    _, _, log_w = pressure_grid(spec.distributions["pressure_bar"])
    z = normal_scores(log_w)
    theta = np.array([[0.0, 1.0], [2.5, 1.0], [-4.0, 1.0]])
    assert np.allclose(pooled_log_weights(log_w, z, theta), log_w[None, :], atol=1e-12)


def test_each_rows_prior_is_the_prior_files_pressure_prior(basalt):
    """Averaged over the copula's centre and spread (their priors), one row's pressure
    weights are the prior file's: 160,000 Monte Carlo draws, within 0.01 of total mass
    (the Monte Carlo noise of this distance is about 0.01 at 40,000 draws, 0.005-0.006
    at 160,000: measured over three seeds)."""
    spec, _ = basalt
    _, _, log_w = pressure_grid(spec.distributions["pressure_bar"])
    z = normal_scores(log_w)
    prior = PooledPrior(spec.with_fixed("pressure_bar", 100.0).with_fixed("scrubbed_so2", 0.0))
    hyper = prior.sample(np.random.default_rng(4), 160000)[:, -2:]
    mean = np.exp(pooled_log_weights(log_w, z, hyper)).mean(axis=0)
    assert 0.5 * np.abs(mean - np.exp(log_w)).sum() < 0.01


@pytest.mark.slow
def test_rows_at_one_pressure_pool_and_recover_the_source(basalt):
    """10 unscrubbed rows made at 150-180 bar from one arc_basalt source: the pooled model
    finds the rows alike (spread median below 0.3) and keeps the true dFMQ and pressure
    inside their 90 % bands."""
    from ventsource.inference.window.sampling import infer_window
    spec, forward = basalt
    rng = np.random.default_rng(21)
    names = list(spec.free_names)
    theta = np.repeat(spec.sample(rng, 1), 10, axis=0)
    theta[:, names.index("pressure_bar")] = np.linspace(150.0, 180.0, 10)
    theta[:, names.index("scrubbed_so2")] = 0.0
    pred = forward.ratios(spec.full(theta))
    assert np.all(np.isfinite(pred))
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    meas = [Measurement(NAMES, o, 0.15, label=f"r{i}") for i, o in enumerate(obs)]
    res = infer_window(meas, spec, forward=forward, seed=3, split_check=False)
    draws = res.shared_draws.reshape(-1, res.shared_draws.shape[2])
    spread = draws[:, res.shared_names.index("pressure_pool_spread")]
    dfmq = draws[:, res.shared_names.index("dfmq")]
    lo, hi = np.quantile(dfmq, [0.05, 0.95])
    true_dfmq = theta[0, names.index("dfmq")]
    assert np.median(spread) < 0.3, np.median(spread)
    assert lo <= true_dfmq <= hi, (lo, true_dfmq, hi)
    inside = [r.pressure_bar[0] <= p <= r.pressure_bar[2] for r, p in zip(res.rows, theta[:, 0])]
    assert np.mean(inside) >= 0.8, [r.pressure_bar for r in res.rows]


def test_pooled_target_adds_the_copula_to_the_shared_parameters(basalt):
    spec, forward = basalt
    lik = Likelihood(Measurement(NAMES, [0.5, 0.1, 30.0], 0.15), prediction_names=NAMES)
    target = WindowTarget(spec, forward, [lik, lik], 0.5)
    assert target.pooled and target.shared_prior.free_names[-2:] == ("pressure_pool_centre",
                                                                       "pressure_pool_spread")
    psi = target.shared_prior.sample(np.random.default_rng(0), 7)
    assert target.log_weights(psi).shape == (7, target.p_quad.size)
    assert np.all(np.isfinite(target.shared_prior.log_prob(psi)))


@pytest.mark.parametrize("centre,spread", [(0.5, 0.1), (-1.0, 0.5), (2.0, 0.03), (0.0, 1.0)])
def test_each_draws_range_and_cell_masses_match_monte_carlo(basalt, centre, spread):
    """A draw's own pressure range and its points' masses (pooled_pressure.py) against
    200,000 direct draws of one row's pressure given c and s: z ~ Normal(sqrt(1 - s^2) c,
    s^2), P = F^-1(Phi(z)) with F the prior file's uniform 1-3000 bar (scipy.stats.uniform,
    scipy.stats.norm). Every draw inside the range; each cell's share within 4 binomial
    standard errors + 1e-3 of its computed mass."""
    spec, _ = basalt
    dist = spec.distributions["pressure_bar"]
    table = ScoreTable(dist)
    theta = np.array([[centre, spread]])
    lo, hi = pooled_range(table, theta)
    ln_p = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, 95)
    mass = np.exp(cell_log_masses(table, ln_p, theta))[0]
    z = stats.norm.rvs(np.sqrt(1 - spread ** 2) * centre, spread, size=200_000, random_state=7)
    pressure = stats.uniform.ppf(stats.norm.cdf(z), loc=dist.lower, scale=dist.upper - dist.lower)
    ln_x = np.log(pressure)
    assert np.all((ln_x >= lo[0] - 1e-9) & (ln_x <= hi[0] + 1e-9))
    bounds = np.r_[ln_p[0, 0], 0.5 * (ln_p[0, 1:] + ln_p[0, :-1]), ln_p[0, -1]]
    share = np.histogram(ln_x, bounds)[0] / ln_x.size
    tol = 4 * np.sqrt(mass * (1 - mass) / ln_x.size) + 1e-3
    assert abs(mass.sum() - 1.0) < 1e-6
    assert np.all(np.abs(share - mass) < tol), np.max(np.abs(share - mass) - tol)
