"""How much the data said (inference/information.py) against closed forms.

* Linear-Gaussian toy through the tempered SMC engine: prior N(0, tau^2 I), data
  y = A theta + N(0, sigma^2 I). The posterior is Gaussian with covariance
  S = (I / tau^2 + A'A / sigma^2)^-1 and mean S A' y / sigma^2 (the conjugate
  Bayesian linear model; Bishop 2006, Pattern Recognition and Machine Learning,
  eqs. 3.49-3.51, from memory). Contraction is 1 - diag(S) / tau^2, KL(post || prior)
  the two-Gaussian closed form, and the unresolved axis the top eigenvector of S / tau^2
  (scipy.linalg.eigh).
* KL of moment-matched Gaussians against a Monte Carlo average of
  scipy.stats.multivariate_normal log densities.
* The principal axis of draws against numpy.linalg.eigh of their known covariance.
"""
import numpy as np
import pytest
from scipy import linalg, stats

from ventsource.inference.engines.smc_engine import tempered_smc
from ventsource.inference.evidence.bridge import Transform
from ventsource.inference.information import (axis_words, contraction, gaussian_kl,
                                              information_summary, log_scaled, principal_axis)

TAU, SIGMA = 1.0, 0.1
A = np.array([[1.0, 1.0, 0.0], [0.0, 0.0, 1.0]])   # theta1 + theta2 and theta3 measured
Y = np.array([0.5, -0.3])


def _posterior_closed_form():
    cov = np.linalg.inv(np.eye(3) / TAU**2 + A.T @ A / SIGMA**2)
    mean = cov @ A.T @ Y / SIGMA**2
    return mean, cov


def _kl_closed(mean1, cov1, cov0):
    d = len(mean1)
    inv0 = np.linalg.inv(cov0)
    return 0.5 * (np.trace(inv0 @ cov1) + mean1 @ inv0 @ mean1 - d
                  + np.log(np.linalg.det(cov0) / np.linalg.det(cov1)))


def _smc_toy():
    box = 8.0 * TAU   # the engine needs a bounded support; 8 sd loses nothing measurable

    def log_prior(theta):
        inside = np.all(np.abs(theta) <= box, axis=1)
        return np.where(inside, stats.norm.logpdf(theta, 0.0, TAU).sum(axis=1), -np.inf)

    def log_like(theta):
        return stats.norm.logpdf(theta @ A.T, Y, SIGMA).sum(axis=1), {}

    def sample_prior(rng, n):
        return rng.normal(0.0, TAU, size=(n, 3))

    transform = Transform(np.column_stack([np.full(3, -box), np.full(3, box)]))
    return log_prior, log_like, sample_prior, transform


def test_linear_gaussian_through_smc_matches_closed_form():
    res = tempered_smc(*_smc_toy(), n_particles=1000, n_runs=4, seed=7)
    post = res.theta.reshape(-1, 3)
    prior = np.random.default_rng(1).normal(0.0, TAU, size=(20000, 3))
    info = information_summary(["a", "b", "c"], prior, post)
    mean, cov = _posterior_closed_form()
    expect = 1.0 - np.diag(cov) / TAU**2          # 0.4988, 0.4988, 0.9901
    got = np.array([info["contraction"][n] for n in "abc"])
    # Monte Carlo error of a variance ratio from ~1000 effective draws: sqrt(2/1000) ~ 4.5 %
    # of var_post, i.e. (1 - c) * 0.045; three times that, plus the prior draws' share
    tol = 3 * (1.0 - expect) * np.sqrt(2 / 1000) + 3 * np.sqrt(2 / 20000)
    assert np.all(np.abs(got - expect) < tol), (got, expect, tol)
    kl = _kl_closed(mean, cov, TAU**2 * np.eye(3))
    assert info["kl_gaussian_nats"] == pytest.approx(kl, abs=0.15), (info["kl_gaussian_nats"], kl)
    values, vectors = linalg.eigh(cov / TAU**2)
    axis = np.array([info["unresolved_axis"][n] for n in "abc"])
    assert abs(axis @ vectors[:, -1]) > 0.98
    assert info["unresolved_kept_share"] == pytest.approx(values[-1], rel=0.15)
    words = info["unresolved_words"]
    assert ("a and b trade off" in words or "b and a trade off" in words) and "c up" not in words and "c down" not in words
    assert ("a up, b down" in words or "b up, a down" in words or "a down, b up" in words
            or "b down, a up" in words), words


def test_gaussian_kl_matches_scipy_monte_carlo():
    rng = np.random.default_rng(4)
    cov0 = np.array([[2.0, 0.3], [0.3, 1.0]])
    cov1 = np.array([[0.2, -0.05], [-0.05, 0.1]])
    m1 = np.array([0.4, -0.7])
    x0 = rng.multivariate_normal(np.zeros(2), cov0, size=200000)
    x1 = rng.multivariate_normal(m1, cov1, size=200000)
    p1 = stats.multivariate_normal(m1, cov1)
    p0 = stats.multivariate_normal(np.zeros(2), cov0)
    kl_mc = np.mean(p1.logpdf(x1) - p0.logpdf(x1))
    assert gaussian_kl(x0, x1) == pytest.approx(kl_mc, abs=0.02)


def test_principal_axis_matches_eigh_of_known_covariance():
    rng = np.random.default_rng(2)
    cov = np.array([[1.0, 0.8, -0.3], [0.8, 1.2, -0.2], [-0.3, -0.2, 0.5]])
    post = rng.multivariate_normal(np.zeros(3), cov, size=100000)
    prior = rng.normal(size=(100000, 3))   # unit prior sd: the axis is that of cov itself
    v, share = principal_axis(prior, post)
    values, vectors = np.linalg.eigh(cov)
    assert abs(v @ vectors[:, -1]) > 0.999
    assert share == pytest.approx(values[-1], rel=0.02)


def test_contraction_of_unchanged_and_halved_spread():
    rng = np.random.default_rng(3)
    prior = rng.normal(size=(100000, 2))
    post = prior * np.array([1.0, np.sqrt(0.5)])   # variance kept, variance halved
    assert contraction(prior, post) == pytest.approx([0.0, 0.5], abs=1e-12)


def test_log_units_for_log_uniform_not_for_fractions():
    rng = np.random.default_rng(5)
    x = np.column_stack([10 ** rng.uniform(0, 3, 5000), rng.uniform(0, 1, 5000),
                         rng.normal(0, 1, 5000)])
    assert log_scaled(x).tolist() == [True, False, False]


def test_near_prior_rule_and_single_parameter_words():
    rng = np.random.default_rng(6)
    prior = rng.uniform(0, 1, size=(4000, 2))
    info = information_summary(["scrubbed_so2", "dfmq"], prior, prior[:2000], p_magmatic=0.52, pi0=0.5)
    assert info["near_prior"] and abs(info["p_magmatic_shift"] - 0.02) < 1e-12
    moved = np.column_stack([rng.uniform(0.4, 0.45, 2000), rng.uniform(0, 1, 2000)])
    info = information_summary(["scrubbed_so2", "dfmq"], prior, moved, p_magmatic=0.1, pi0=0.5)
    assert not info["near_prior"]
    assert axis_words(["x", "y"], np.array([1.0, 0.1]), 0.9).startswith("x is the least resolved")


def test_infer_result_carries_information_and_its_flag():
    """A real inversion (demo prior, tiny settings): every free parameter has a contraction,
    the P(M0) shift is P(M0) - pi0, and near_prior is flagged exactly when the rule says."""
    import ventsource
    m = ventsource.Measurement.from_strings({"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": 30},
                                            relative_sigma=0.15)
    r = ventsource.infer(m, "demo_mount_kerrow_fast", seed=3, n_particles=200, n_runs=2)
    info = r.information
    assert set(info["contraction"]) == set(r.idata.posterior.data_vars)
    assert info["p_magmatic_shift"] == pytest.approx(r.p_magmatic - r.pi0, abs=1e-12)
    rule = (abs(info["p_magmatic_shift"]) < 0.05) or (info["contraction"]["scrubbed_so2"] < 0.1)
    assert ("near_prior" in r.flags) == rule == info["near_prior"]
    assert r.to_dict()["information"]["unresolved_words"] == info["unresolved_words"]


def test_readme_notes_name_rows_and_flag():
    from ventsource.workflow.table_notes import information_notes
    rows = [{"id": "K1", "flags": "near_prior", "p_magmatic_shift": 0.01,
             "unresolved_direction": "x and y trade off"},
            {"id": "K2", "flags": "", "p_magmatic_shift": -0.3, "unresolved_direction": "z"}]
    text = "\n".join(information_notes(rows))
    assert "near_prior" in text and "1 of 2 (K1)" in text
    assert "- K2: P(M0) moved -0.300" in text
    assert not any(line.startswith("* ") for line in text.splitlines())  # not read back as files
    assert information_notes([{"id": "W1", "flags": ""}]) == []


def test_window_result_carries_shared_information_and_row_flags():
    """Window model, tiny settings: the shared parameters' contraction, and near_prior on
    exactly the rows whose P(M0) stayed within 0.05 of the prior's."""
    import ventsource
    rows = ventsource.read_measurements("examples/mount_kerrow_synthetic.csv").measurements[:3]
    w = ventsource.infer_window(rows, "demo_mount_kerrow_fast", seed=2, n_particles=40, n_runs=2,
                                split_check=False, n_source_check=200)
    assert set(w.information["contraction"]) <= set(w.shared_names)
    assert w.pi0 == pytest.approx(ventsource.load_prior("demo_mount_kerrow_fast").p_magmatic)
    for r in w.rows:
        assert ("near_prior" in r.flags) == (abs(r.p_magmatic - w.pi0) < 0.05)
