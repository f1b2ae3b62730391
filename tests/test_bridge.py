"""Bridge-sampling evidence against the analytic linear-Gaussian evidence, dynesty's nested
sampling and brute-force prior Monte Carlo."""
import numpy as np
import pytest

from toy_models import (LinearLogForward, ScrubToyForward, ToyPrior, gaussian_evidence,
                        scrub_toy_prior)
from ventsource.inference.evidence.bridge import Transform, bridge_sampling, prior_monte_carlo_evidence, support_bounds
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.engines.emcee_engine import LogPosterior, sample_posterior

A = [0.1, -0.3, 1.0]
B = [[1.0, 0.5], [0.2, -1.0], [0.7, 0.7]]
MU0, SD0 = [0.0, 0.5], [1.0, 0.7]
Y = np.array([0.8, -0.9, 1.6])
REL = 0.2


def _linear():
    pr = ToyPrior({"x": ("normal", MU0[0], SD0[0]), "w": ("normal", MU0[1], SD0[1])})
    fw = LinearLogForward(pr, A, B, ("A", "B", "C"))
    return pr, fw, Measurement(("A", "B", "C"), np.exp(Y), REL)


def _bridge(pr, fw, m, seed, target_ess=2000, kind="normal", dof=4.0, proposal="mixture"):
    lik = Likelihood(m, kind=kind, dof=dof, prediction_names=fw.ratio_names)
    s = sample_posterior(pr, fw, lik, seed=seed, target_ess=target_ess)
    lp = LogPosterior(pr, fw, lik)
    return bridge_sampling(s.chain, lambda th: lp.evaluate(th)[0], support_bounds(pr), seed=seed + 1,
                           log_target_chain=s.log_posterior, proposal=proposal)


@pytest.mark.parametrize("proposal", ["mixture", "normal"])
def test_bridge_matches_analytic_gaussian_evidence(proposal):
    # reference: Gaussian marginal likelihood (Bishop 2006, eq. 2.115; from memory)
    pr, fw, m = _linear()
    ref = gaussian_evidence(Y, np.full(3, np.log1p(REL)), A, B, MU0, SD0)
    b = _bridge(pr, fw, m, seed=1, proposal=proposal)
    assert b.converged
    assert b.transform == "identity,identity"
    assert abs(b.log_z - ref) < 4 * b.log_z_error + 0.01, (b.log_z, ref, b.log_z_error)


def test_prior_monte_carlo_matches_analytic_gaussian_evidence():
    pr, fw, m = _linear()
    ref = gaussian_evidence(Y, np.full(3, np.log1p(REL)), A, B, MU0, SD0)
    lz, err = prior_monte_carlo_evidence(m, pr, fw, n=200_000, seed=3)
    assert abs(lz - ref) < 4 * err, (lz, ref, err)
    assert err < 0.03


def test_bridge_error_estimate_is_not_optimistic():
    # spread of independent bridge estimates (new MCMC run each) vs the reported error;
    # loose: the sd over 6 runs must not exceed 3x the mean reported error + 0.003
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    m = Measurement(fw.ratio_names, [0.9, 0.2, 20.0], 0.15)
    res = [_bridge(pr, fw, m, seed=s, target_ess=800) for s in range(10, 16)]
    lz = np.array([r.log_z for r in res])
    err = np.mean([r.log_z_error for r in res])
    assert lz.std(ddof=1) < 3 * err + 0.003, (lz, err)


def test_transform_roundtrip_and_jacobian():
    tr = Transform(np.array([[0.0, 2.0], [1.0, np.inf], [-np.inf, 3.0], [-np.inf, np.inf]]))
    rng = np.random.default_rng(0)
    u = rng.normal(size=(50, 4))
    th, lj = tr.inverse(u)
    np.testing.assert_allclose(tr.forward(th), u, atol=1e-9)
    # Jacobian against central finite differences of each axis (transform is diagonal)
    h = 1e-6
    num = np.zeros(50)
    for j in range(4):
        e = np.zeros(4)
        e[j] = h
        num += np.log((tr.inverse(u + e)[0][:, j] - tr.inverse(u - e)[0][:, j]) / (2 * h))
    np.testing.assert_allclose(lj, num, atol=1e-6)


def test_support_bounds_from_prior():
    pr = scrub_toy_prior(s_max=0.9)
    np.testing.assert_allclose(support_bounds(pr), [[0.0, 1.0], [0.0, 0.9]])


@pytest.mark.parametrize("kind", ["normal", "student_t"])
def test_bridge_matches_dynesty_nested_sampling(kind):
    # reference library: dynesty static nested sampling (Speagle 2020, MNRAS 493:3132)
    # on a bounded 2-parameter toy with a censored value and a no-gas region
    import dynesty

    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr, no_gas_above=0.95)
    m = Measurement(fw.ratio_names, [0.8, 0.5, 25.0], [0.15, 0.2, 0.15], [0, -1, 0])
    lik = Likelihood(m, kind=kind, dof=4.0, prediction_names=fw.ratio_names)
    b = _bridge(pr, fw, m, seed=21, kind=kind)
    assert b.transform == "logit,logit"

    def loglike(x):
        v = lik(fw.ratios(pr.full(x[None, :])))[0]
        return v if np.isfinite(v) else -1e300

    def ptform(u):
        return np.array([u[0] * 1.0, u[1] * 0.9])

    ns = dynesty.NestedSampler(loglike, ptform, 2, nlive=400, rstate=np.random.default_rng(5))
    ns.run_nested(dlogz=0.01, print_progress=False)
    res = ns.results
    lz_ns, err_ns = float(res.logz[-1]), float(res.logzerr[-1])
    lz_mc, err_mc = prior_monte_carlo_evidence(m, pr, fw, n=200_000, seed=9, kind=kind)
    tol = 3 * np.hypot(b.log_z_error, err_ns) + 0.02
    assert abs(b.log_z - lz_ns) < tol, (b.log_z, lz_ns, err_ns, b.log_z_error)
    assert abs(b.log_z - lz_mc) < 4 * np.hypot(b.log_z_error, err_mc) + 0.01, (b.log_z, lz_mc, err_mc)
