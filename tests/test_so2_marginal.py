"""The scrubbed SO2 fraction integrated out (so2_marginal.ScrubbingMarginal) against brute
quadrature through the real forward model.

Reference: log L1 = log integral p(s) L(ratios(scrub(x, s))) ds computed directly, with
the package's scrub() and Likelihood applied to every point of a 200,000-point grid in
v = ln(1 - s) (composite trapezoid rule, numpy.trapezoid), over the same support
[ln 1e-6, ln(1 - s_min)] the marginal uses. Each integration path is exercised:
closed form (product "loss", normal likelihood, uniform prior), Gauss-Legendre
(beta prior), the coarse + fine grid (h2s_sulfate with Student-t; a censored value).

Gases: magmatic gas of prior draws of the shipped prior files; the measurement is one of
them scrubbed at s = 0.6 plus log-normal noise (seeded). Only gases whose log L1 lies
within LOG_L_WINDOW of the best one are compared: they carry the posterior mass;
farther gases (log L1 of -1e3 to -1e4) are discussed beside the censored test.
"""
from pathlib import Path

import numpy as np
import pytest

from ventsource.ascent import observables
from ventsource.ascent.scrubbing import scrub
from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors import load_prior_file
from ventsource.inference.priors.distributions import Beta
from ventsource.inference.hypotheses.so2_marginal import ScrubbingMarginal

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
PRIORS = Path(__file__).resolve().parents[1] / "priors"
N_BRUTE = 200_000
LOG_L_WINDOW = 200.0
MAX_COMPARED = 8
H2S_RETURN = 0.5  # the H2S returned to the gas in the h2s_sulfate cases


def _gases(prior_name, n_gas, seed):
    spec = load_prior_file(PRIORS / f"{prior_name}.toml")
    fw = ForwardModel(spec, ratio_names=NAMES)
    rng = np.random.default_rng(seed)
    st = fw.state(spec.full(spec.sample(rng, n_gas)))
    return spec, fw, st["magmatic_gas"][st["status"] == 0], rng


def _measured(gas, product, rel, rng, h2s_factor=1.0):
    y = observables.ratios(scrub(gas[:1], 0.6, product, 0.0, H2S_RETURN), NAMES)[0]
    y = y * np.exp(np.log1p(rel) * rng.standard_normal(y.size))
    y[1] *= h2s_factor  # an H2S/SO2 outlier: the integrand in v gets two peaks
    return y


def brute_log_l1(gas, lik, product, dist, v_lo, v_hi, h2s_return):
    """log of the trapezoid integral over v of L(scrub(x, 1 - e^v)) p_s(1 - e^v) e^v."""
    v = np.linspace(v_lo, v_hi, N_BRUTE)
    s = -np.expm1(v)
    out = np.empty(gas.shape[0])
    for i, x in enumerate(gas):
        g = scrub(np.repeat(x[None, :], N_BRUTE, axis=0), s, product, 0.0, h2s_return)
        f = lik(observables.ratios(g, NAMES)) + dist.log_pdf(s) + v
        f = np.where(np.isnan(f), -np.inf, f)
        top = f.max()
        out[i] = top + np.log(np.trapezoid(np.exp(f - top), v))
    return out


def _compare(prior_name, kind, rel, dist=None, censoring=None, h2s_factor=1.0, seed=0, n_gas=40,
             product=None):
    spec, fw, gas, rng = _gases(prior_name, n_gas, seed)
    product = product or fw.product  # the scrubbing product under test (default: the prior's)
    y = _measured(gas, product, rel, rng, h2s_factor)
    lik = Likelihood(Measurement(NAMES, y, rel, censoring), kind=kind, dof=4.0,
                     prediction_names=NAMES)
    dist = dist or spec.distributions["scrubbed_so2"]
    marg = ScrubbingMarginal(lik, NAMES, product, dist)
    ll0, ll1 = marg.log_likelihoods(gas, H2S_RETURN)
    keep = ll1 > ll1.max() - LOG_L_WINDOW
    keep &= ll1 >= np.sort(ll1[keep])[::-1][:MAX_COMPARED][-1]  # the best few: keeps it fast
    ref = brute_log_l1(gas[keep], lik, product, dist, marg.v_lo, marg.v_hi, H2S_RETURN)
    # M0 needs no integral: log L0 is the likelihood of the unscrubbed gas itself
    np.testing.assert_allclose(ll0, lik(observables.ratios(gas, NAMES)), rtol=0, atol=1e-9)
    return marg, ll1[keep], ref


@pytest.mark.parametrize("rel", [0.05, 0.15])
def test_closed_form_uniform_prior(rel):
    marg, ll1, ref = _compare("arc_basalt", "normal", rel)
    assert marg.fast and marg.uniform
    assert ll1.size >= 2
    # measured: 3e-14 at the best gas, up to 7e-5 (relative < 1e-6) at gases 100-200 below it
    np.testing.assert_allclose(ll1, ref, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("rel", [0.05, 0.15])
def test_gauss_legendre_beta_prior(rel):
    marg, ll1, ref = _compare("arc_basalt", "normal", rel, dist=Beta(2.0, 5.0))
    assert marg.fast and not marg.uniform
    assert ll1.size >= 2
    # 24 Gauss-Legendre nodes; measured up to 7.6e-4 (5 %) and 6.5e-4 (15 %)
    np.testing.assert_allclose(ll1, ref, rtol=0, atol=2e-3)


# Grid path (coarse 64 + fine 96 trapezoid). Measured over seeds 0-3, gases within 200 of the
# best: at the best gas <= 1e-3; elsewhere up to 2.5 (5 % errors) and 0.17 (15 %). The
# large errors sit where the integrand is narrower than the fine step (5 % errors) or
# peaks at s = 0 with a steep slope, or has a second peak the coarse grid only samples.
GRID_TOL = {0.05: (2e-3, 3.0), 0.15: (2e-3, 0.25)}


@pytest.mark.parametrize("rel", [0.05, 0.15])
@pytest.mark.parametrize("h2s_factor", [1.0, 0.3])
def test_grid_path_h2s_sulfate_student_t(rel, h2s_factor):
    marg, ll1, ref = _compare("demo_mount_kerrow_fast", "student_t", rel, h2s_factor=h2s_factor,
                              seed=2, product="h2s_sulfate")
    assert not marg.fast and marg.product == "h2s_sulfate"
    best, rest = GRID_TOL[rel]
    i = np.argmax(ref)
    assert abs(ll1[i] - ref[i]) <= best, (ll1[i], ref[i])
    np.testing.assert_allclose(ll1, ref, rtol=0, atol=rest)


@pytest.mark.parametrize("rel", [0.05, 0.15])
def test_grid_path_censored_so2_co2(rel):
    # SO2/CO2 reported as an upper limit: a CDF term, which leaves the closed form
    marg, ll1, ref = _compare("arc_basalt", "normal", rel, censoring=(-1, 0, 0), seed=0)
    assert not marg.fast
    best, rest = GRID_TOL[rel]
    i = np.argmax(ref)
    assert abs(ll1[i] - ref[i]) <= best, (ll1[i], ref[i])
    np.testing.assert_allclose(ll1, ref, rtol=0, atol=rest)


def test_gauss_legendre_far_tail_is_finite():
    # Gases whose H2S/SO2 asks for "negative scrubbing" far beyond s = 0: brute quadrature
    # gives a finite log L1 (about -5e3 here); the Gauss-Legendre nodes must not collapse
    # onto s = 0, where a beta(2, 5) density vanishes.
    spec, fw, gas, rng = _gases("arc_basalt", 8, 0)
    y = _measured(gas, fw.product, 0.05, rng)
    lik = Likelihood(Measurement(NAMES, y, 0.05), prediction_names=NAMES)
    dist = Beta(2.0, 5.0)
    marg = ScrubbingMarginal(lik, NAMES, fw.product, dist)
    _, ll1 = marg.log_likelihoods(gas)
    ref = brute_log_l1(gas, lik, fw.product, dist, marg.v_lo, marg.v_hi, 1.0)
    assert np.all(np.isfinite(ref))
    assert np.all(np.isfinite(ll1)), np.c_[ll1, ref]
    np.testing.assert_allclose(ll1, ref, rtol=1e-3)
