"""A pressure sweep of one magma (the window model's solves per draw) starts each state
from its neighbour's solution with evolving redox (magma/degassing.py, _warm_sweep_step).

Check: the same states solved in shuffled order, where no state has its own magma as a
neighbour and each starts cold, give the same status everywhere and the same gas to the
solver tolerances (common practice, no source: a warm start must not change the root).
Sweeps run from gas-rich low pressures through each magma's saturation pressure into
no-gas states, and both ways, so that the gas/no-gas decision is checked at the edge.
"""
import numpy as np

from ventsource.forward.model import ForwardModel
from ventsource.inference.priors import load_prior_file
from ventsource.inference.priors.shipped import shipped_prior_path


def _sweeps(spec, n_draws, n_pressures, seed):
    rng = np.random.default_rng(seed)
    j = {k: i for i, k in enumerate(spec.parameter_names)}
    draws = spec.full(spec.sample(rng, n_draws))
    ln_p = np.linspace(np.log(5.0), np.log(20000.0), n_pressures)
    rep = np.repeat(draws, n_pressures, axis=0)
    up = np.tile(ln_p, n_draws)
    down = np.tile(ln_p[::-1], n_draws)
    half = n_draws // 2 * n_pressures
    rep[:, j["pressure_bar"]] = np.exp(np.concatenate([up[:half], down[half:]]))
    return rep


def _solved(model, theta, order):
    st = model.state(theta[order], saturation=False)
    back = np.argsort(order)
    return {k: st[k][back] for k in ("status", "gas", "dfmq_at_pressure", "sulfur_phase")}


def test_warm_pressure_sweep_matches_cold_states():
    for name in ("demo_mount_kerrow_fast_release", "arc_basalt"):
        spec = load_prior_file(shipped_prior_path(name))
        model = ForwardModel(spec)
        assert model.redox is not None, f"{name}: expected evolving redox"
        theta = _sweeps(spec, 40, 30, seed=7)
        warm = _solved(model, theta, np.arange(len(theta)))
        cold = _solved(model, theta, np.random.default_rng(1).permutation(len(theta)))
        assert np.array_equal(warm["status"], cold["status"]), name
        counts = np.bincount(warm["status"], minlength=3)
        assert counts[0] > 0.2 * len(theta) and counts[1] > 0.02 * len(theta), (name, counts)
        assert np.array_equal(warm["sulfur_phase"], cold["sulfur_phase"]), name
        gas = warm["status"] == 0
        rel = np.abs(warm["gas"][gas] - cold["gas"][gas]) / np.maximum(cold["gas"][gas], 1e-12)
        big = cold["gas"][gas] > 1e-8  # traces below 1e-8 mole fraction: absolute check only
        assert np.max(rel[big]) < 1e-6, (name, np.max(rel[big]))
        assert np.max(np.abs(warm["gas"][gas] - cold["gas"][gas])) < 1e-9, name
        d = np.abs(warm["dfmq_at_pressure"] - cold["dfmq_at_pressure"])
        assert np.nanmax(d[gas]) < 1e-6, name


def test_quench_of_a_sweep_starts_from_its_neighbour_and_finds_the_same_root():
    """The gas-buffered quench (ascent/quench.py) starts a gas from the previous gas's root
    when their element ratios are close: in sweep order it needs fewer Newton iterations
    than in shuffled order (iteration counts, not time), and the roots agree to the solver
    tolerance (a warm start must not change the root; common practice, no source)."""
    from ventsource.ascent.quench import gas_buffered
    spec = load_prior_file(shipped_prior_path("arc_basalt"))
    theta = np.repeat(spec.full(spec.sample(np.random.default_rng(3), 40)), 48, axis=0)
    # 48 pressures per magma over 50-1000 bar: the density of a window draw's solves
    theta[:, spec.parameter_names.index("pressure_bar")] = np.tile(np.geomspace(50.0, 1000.0, 48), 40)
    deep = ForwardModel(spec).state(theta, saturation=False)
    deep = deep["deep_gas"][deep["status"] == 0]
    assert len(deep) > 200
    x, ok, iters = gas_buffered(deep, 900.0, 1.0)
    order = np.random.default_rng(2).permutation(len(deep))
    x_cold, ok_cold, iters_cold = gas_buffered(deep[order], 900.0, 1.0)
    assert ok.all() and ok_cold.all()
    back = np.argsort(order)
    big = x > 1e-8
    assert np.max(np.abs(x_cold[back][big] / x[big] - 1.0)) < 1e-9
    assert np.mean(iters) < 0.85 * np.mean(iters_cold), (np.mean(iters), np.mean(iters_cold))
