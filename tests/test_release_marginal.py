"""SO2 multiplier marginals (released sulfur, scrubbing) against brute quadrature.

The reference is scipy.integrate.quad of L(ratios(gas with SO2 x multiplier)) times the
prior density of the parameter, computed straight from the Likelihood on the forward
model's ratio weights, with no shared code path beyond the Likelihood itself.
"""
import numpy as np
import pytest
from scipy import integrate

from ventsource.ascent import observables
from ventsource.chemistry.species import INDEX, SPECIES
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors.distributions import LogUniform, Uniform
from ventsource.inference.hypotheses.release_marginal import ReleaseMarginal
from ventsource.inference.hypotheses.so2_marginal import ScrubbingMarginal

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def _gas(rng, n):
    gas = np.zeros((n, len(SPECIES)))
    gas[:, INDEX["H2O"]] = rng.uniform(0.6, 0.9, n)
    gas[:, INDEX["CO2"]] = rng.uniform(0.05, 0.2, n)
    gas[:, INDEX["SO2"]] = rng.uniform(0.005, 0.05, n)
    gas[:, INDEX["H2S"]] = rng.uniform(0.001, 0.01, n)
    return gas / gas.sum(axis=1, keepdims=True)


def _brute(lik, gas_row, dist, multiplier, lo, hi):
    """log of integral p(x) L(ratios(gas with SO2 times multiplier(x))) dx by adaptive quadrature."""
    def f(x):
        g = gas_row.copy()
        g[INDEX["SO2"]] *= multiplier(x)
        pred = observables.ratios(g[None, :], NAMES)
        return float(np.exp(lik(pred)[0] + dist.log_pdf(np.array([x]))[0]))
    val, _ = integrate.quad(f, lo, hi, limit=400, epsabs=0.0, epsrel=1e-10, points=None)
    return np.log(val)


@pytest.mark.parametrize("dist", [Uniform(0.0, 9.0), LogUniform(0.1, 10.0)], ids=["uniform", "loguniform"])
@pytest.mark.parametrize("censored", [False, True], ids=["exact", "censored_h2s"])
def test_release_marginal_matches_brute_quadrature(dist, censored):
    rng = np.random.default_rng(3)
    gas = _gas(rng, 4)
    observed = observables.ratios(gas[:1], NAMES)[0] * np.array([2.5, 0.4, 1.0])  # SO2 released: x2.5
    cens = [0, -1 if censored else 0, 0]
    lik = Likelihood(Measurement(NAMES, observed, 0.15, cens), prediction_names=NAMES)
    marg = ReleaseMarginal(lik, NAMES, "loss", dist)
    assert marg.fast == (not censored)
    ll0, ll2 = marg.log_likelihoods(gas)
    for i in range(gas.shape[0]):
        ref = _brute(lik, gas[i], dist, lambda r: 1.0 + r, dist.lower, dist.upper)
        # fast path (Gaussian in v): quadrature-exact; grid path (censored ratio): the
        # composite trapezoid on 64 + 96 points, measured up to 0.06 in log L on these gases
        assert ll2[i] == pytest.approx(ref, abs=0.08 if censored else 2e-3)
        assert ll0[i] == pytest.approx(lik(observables.ratios(gas[i:i + 1], NAMES))[0], rel=1e-12)


def test_scrubbing_marginal_still_matches_brute_quadrature():
    rng = np.random.default_rng(4)
    gas = _gas(rng, 3)
    observed = observables.ratios(gas[:1], NAMES)[0] * np.array([0.4, 2.5, 1.0])  # 60 % scrubbed
    lik = Likelihood(Measurement(NAMES, observed, 0.15), prediction_names=NAMES)
    dist = Uniform(0.0, 1.0)
    marg = ScrubbingMarginal(lik, NAMES, "loss", dist)
    _, ll1 = marg.log_likelihoods(gas)
    for i in range(gas.shape[0]):
        ref = _brute(lik, gas[i], dist, lambda s: 1.0 - s, 0.0, 1.0 - 1e-9)
        assert ll1[i] == pytest.approx(ref, abs=2e-3)


def test_release_draws_follow_the_conditional_posterior():
    """Draws of r given one gas: their mean equals the quadrature mean of p(r | gas, data)."""
    rng = np.random.default_rng(5)
    gas = _gas(rng, 1)
    observed = observables.ratios(gas, NAMES)[0] * np.array([3.0, 1 / 3.0, 1.0])
    lik = Likelihood(Measurement(NAMES, observed, 0.15), prediction_names=NAMES)
    dist = LogUniform(0.1, 10.0)
    marg = ReleaseMarginal(lik, NAMES, "loss", dist)
    draws = marg.sample(np.repeat(gas, 20000, axis=0), np.random.default_rng(6))

    def weight(r, power):
        g = gas[0].copy()
        g[INDEX["SO2"]] *= 1.0 + r
        ll = lik(observables.ratios(g[None, :], NAMES))[0]
        return r ** power * np.exp(ll + dist.log_pdf(np.array([r]))[0])
    z = integrate.quad(weight, 0.1, 10.0, args=(0,), limit=400)[0]
    mean = integrate.quad(weight, 0.1, 10.0, args=(1,), limit=400)[0] / z
    assert np.all((draws >= 0.1) & (draws <= 10.0))
    assert draws.mean() == pytest.approx(mean, rel=0.02)  # 20000 draws: MC error ~0.3 %
