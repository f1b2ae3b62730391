"""Compiled per-row evidences of the window model (ventsource.inference.window.kernels).

log Phi is checked against scipy.special.log_ndtr (reference library) over the body and
both tails; the compiled row evidences against the NumPy path of the same window, which
tests/test_so2_marginal.py checks against brute-force quadrature of the forward model.
"""
from pathlib import Path

import numpy as np
import pytest
from scipy import special

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors import load_prior_file
from ventsource.inference.window.target import WindowTarget, _log_sum_weighted
from ventsource.inference.window.kernels import log_diff_ndtr, log_ndtr, log_ndtr_table
from ventsource.workflow.demo import DEMO_RELEASE_PRIOR

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def test_log_ndtr_against_scipy_in_the_body_and_both_tails():
    x = np.r_[np.linspace(-60.0, 40.0, 4001), -19.999, -20.0, -20.001, 0.0]
    ours = np.array([log_ndtr(v) for v in x])
    ref = special.log_ndtr(x)
    rel = np.abs(ours - ref) / np.maximum(1.0, np.abs(ref))
    assert rel.max() < 1e-12, x[np.argmax(rel)]
    tiny = np.linspace(3.0, 8.0, 51)   # log Phi(x) ~ -Phi(-x): relative accuracy where it is tiny
    assert np.allclose([log_ndtr(v) for v in tiny], special.log_ndtr(tiny), rtol=1e-12, atol=0)


def test_tabulated_log_ndtr_against_scipy_to_1e_10_nats():
    x = np.r_[np.linspace(-25.0, 12.0, 200001), -20.0, 8.6]
    ours = np.array([log_ndtr_table(v) for v in x])
    assert np.abs(ours - special.log_ndtr(x)).max() < 1e-10


def test_log_diff_ndtr_against_scipy():
    rng = np.random.default_rng(3)
    a = rng.uniform(-40.0, 40.0, 3000)
    b = a + rng.exponential(2.0, a.size)
    ours = np.array([log_diff_ndtr(x, y) for x, y in zip(a, b)])
    # reference: the mirrored side of scipy's log_ndtr where both bounds are positive
    hi = np.where(a > 0, special.log_ndtr(-a), special.log_ndtr(b))
    lo = np.where(a > 0, special.log_ndtr(-b), special.log_ndtr(a))
    ref = hi + np.log1p(-np.exp(lo - hi))
    ok = np.isfinite(ref)
    close = (b - a) < 1.0   # computed exactly
    assert np.allclose(ours[ok & close], ref[ok & close], rtol=1e-12, atol=1e-15)
    # wider bounds read log Phi from the table: what a log-sum of terms needs is the
    # absolute error in nats
    assert np.abs(ours[ok] - ref[ok]).max() < 1e-9
    assert log_diff_ndtr(1.0, 1.0) == -np.inf


@pytest.fixture(scope="module")
def window_rows():
    spec = load_prior_file(ROOT / "priors" / "arc_basalt.toml")
    forward = ForwardModel(spec, ratio_names=NAMES)
    rng = np.random.default_rng(5)
    theta = np.repeat(spec.sample(rng, 1), 5, axis=0)
    names = list(spec.free_names)
    theta[:, names.index("pressure_bar")] = [60.0, 150.0, 400.0, 900.0, 1400.0]
    theta[:, names.index("scrubbed_so2")] = [0.0, 0.0, 0.5, 0.8, 0.0]
    pred = forward.ratios(spec.full(theta))
    pred[4, 0] *= 3.0   # released SO2 in the last row
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    liks = [Likelihood(Measurement(NAMES, o, 0.15), kind="normal", prediction_names=NAMES) for o in obs]
    return spec, forward, liks


@pytest.mark.parametrize("release,pooled", [(False, False), (True, False), (False, True)])
def test_compiled_row_evidences_match_the_numpy_path(window_rows, tmp_path, release, pooled):
    spec, forward, liks = window_rows
    text = (ROOT / "priors" / "arc_basalt.toml").read_text(encoding="utf-8")
    if release:  # loguniform release prior: the tabulated Gauss-Legendre average
        text += "\n[hypotheses]\n" + DEMO_RELEASE_PRIOR.read_text(encoding="utf-8").split(
            "\n[hypotheses]\n", 1)[1]
    if pooled:   # per-draw pressure weights (draws, K)
        text += '\n[window]\npressure_rows = "pooled"\n'
    if release or pooled:
        path = tmp_path / "variant.toml"
        path.write_text(text, encoding="utf-8")
        spec = load_prior_file(path)
    target = WindowTarget(spec, forward, liks, 0.5)
    assert len(target._compiled_rows) == 5
    psi = target.shared_prior.sample(np.random.default_rng(1), 300)
    compiled = target.row_evidences(psi)
    gas, h2s, edges = target.gas_on_grid(psi)
    numpy_path = [_log_sum_weighted(ll, target.log_weights(psi, edges)).T
                  for ll in target.row_log_likelihoods(gas, h2s)]
    assert len(compiled) == (3 if release else 2)
    for got, ref in zip(compiled, numpy_path):
        assert np.array_equal(np.isfinite(got), np.isfinite(ref))
        f = np.isfinite(ref)
        near = f & (ref > np.max(np.where(f, ref, -np.inf), axis=0) - 60.0)  # terms that count
        # closed form: rounding only; table: its linear interpolation, ~1e-4 nats
        assert np.max(np.abs(got[near] - ref[near])) < (2e-4 if release else 1e-9)


def test_censored_rows_take_the_numpy_path(window_rows):
    spec, forward, liks = window_rows
    cens = Likelihood(Measurement(NAMES, [0.5, 0.05, 30.0], 0.15, censoring=[0, -1, 0]),
                      kind="normal", prediction_names=NAMES)
    target = WindowTarget(spec, forward, liks[:2] + [cens], 0.5)
    assert target._compiled_rows == [0, 1] and target._numpy_rows == [2]
    psi = target.shared_prior.sample(np.random.default_rng(2), 50)
    gas, h2s, edges = target.gas_on_grid(psi)
    ref = [_log_sum_weighted(ll, target.log_weights(psi, edges)).T for ll in target.row_log_likelihoods(gas, h2s)]
    for got, r in zip(target.row_evidences(psi), ref):
        f = np.isfinite(r)
        assert np.allclose(got[f], r[f], rtol=0, atol=1e-9)
