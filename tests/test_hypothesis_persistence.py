"""Persistent hypotheses of a window's rows (inference/window/hypothesis_persistence.py).

The forward algorithm and the forward-backward smoother are checked against the
definition itself: the sum over every path of hypotheses of a short window, enumerated
(a hidden Markov model's likelihood and state probabilities; Rabiner 1989, Proceedings
of the IEEE 77:257). rho = 0 must give the independent mixture, and each row's prior
must stay the prior odds (the chain's stationary distribution; common practice, no
source). The prior-file key is checked like every other [window] key.
"""
import itertools

import numpy as np
import pytest

from ventsource.inference.window import hypothesis_persistence as hp


def _enumerate(lz, log_pis, rho):
    """(log L, state probabilities (rows, H)) of one draw by summing over every path."""
    H, m = lz.shape
    pi = np.exp(log_pis)
    T = rho * np.eye(H) + (1.0 - rho) * pi[None, :]
    total, marg = 0.0, np.zeros((m, H))
    for path in itertools.product(range(H), repeat=m):
        p = pi[path[0]] * np.prod([T[path[i - 1], path[i]] for i in range(1, m)])
        p *= np.exp(sum(lz[path[i], i] for i in range(m)))
        total += p
        marg[np.arange(m), path] += p
    return np.log(total), marg / total


@pytest.mark.parametrize("H", [2, 3])
def test_forward_backward_matches_the_sum_over_every_path(H):
    rng = np.random.default_rng(4)
    lz = 3.0 * rng.normal(size=(4, H, 6))
    log_pis = np.log(rng.dirichlet(np.ones(H)))
    rho = np.array([0.0, 0.3, 0.8, 0.99])
    ll, states = hp.log_likelihood(lz, log_pis, rho), hp.state_probabilities(lz, log_pis, rho)
    cum = hp.filter_rows(lz, log_pis, rho)[0]
    for j in range(4):
        ref_ll, ref_states = _enumerate(lz[j], log_pis, rho[j])
        assert ll[j] == pytest.approx(ref_ll, abs=1e-10)
        np.testing.assert_allclose(states[j], ref_states, atol=1e-12)
        assert cum[j, 2] == pytest.approx(_enumerate(lz[j, :, :3], log_pis, rho[j])[0], abs=1e-10)


def test_no_persistence_is_the_independent_mixture():
    rng = np.random.default_rng(5)
    lz = rng.normal(size=(3, 2, 7))
    log_pis = np.log([0.5, 0.5])
    mix = np.logaddexp(log_pis[0] + lz[:, 0], log_pis[1] + lz[:, 1])
    np.testing.assert_allclose(hp.log_likelihood(lz, log_pis, np.zeros(3)), mix.sum(axis=1), atol=1e-12)
    np.testing.assert_allclose(hp.state_probabilities(lz, log_pis, np.zeros(3))[:, :, 0],
                               np.exp(log_pis[0] + lz[:, 0] - mix), atol=1e-12)


def test_each_rows_prior_stays_the_prior_odds_and_evidence_moves_the_next_row():
    """Without data every row's P(M0) is pi0 whatever rho; after magmatic-looking rows the
    next row's prior leans to M0 by rho (keep the state) + (1 - rho) pi0 (fresh draw)."""
    log_pis = np.log([0.3, 0.7])
    rho = np.array([0.0, 0.5, 0.95])
    none = hp.state_probabilities(np.zeros((3, 2, 5)), log_pis, rho)
    np.testing.assert_allclose(none[:, :, 0], 0.3, atol=1e-12)
    decisive = np.zeros((3, 2, 4))
    decisive[:, 1, :] = -50.0    # every earlier row certainly M0
    nxt = np.exp(hp.next_row_log_pis(decisive, log_pis, rho))
    np.testing.assert_allclose(nxt[:, 0], rho + (1.0 - rho) * 0.3, atol=1e-12)
    # and the prediction is the smoother's answer for a further row without evidence
    appended = np.concatenate([decisive, np.zeros((3, 2, 1))], axis=2)
    np.testing.assert_allclose(nxt, hp.state_probabilities(appended, log_pis, rho)[:, -1], atol=1e-12)


def test_impossible_rows_give_minus_infinity_not_nan():
    lz = np.zeros((2, 2, 3))
    lz[0, :, 1] = -np.inf
    lz[1, 0, 2] = np.nan
    ll = hp.log_likelihood(lz, np.log([0.5, 0.5]), np.array([0.5, 0.5]))
    assert ll[0] == -np.inf and np.isfinite(ll[1])


def test_persistence_prior_column_and_its_bounds():
    from ventsource.inference.priors.distributions import Uniform

    class Base:
        free_names = ("a",)
        parameter_names = ("a",)
        free_bounds = np.array([[0.0, 2.0]])

        def sample(self, rng, n):
            return rng.uniform(0, 2, n)[:, None]

        def log_prob(self, theta):
            return Uniform(0.0, 2.0).log_pdf(theta[:, 0])

        def full(self, theta):
            return theta

    prior = hp.PersistentPrior(Base())
    assert prior.free_names == ("a", hp.NAME)
    x = prior.sample(np.random.default_rng(1), 5)
    assert x.shape == (5, 2) and np.all((x[:, 1] >= 0) & (x[:, 1] <= 1))
    assert prior.log_prob(np.array([[1.0, 0.5], [1.0, 1.5]]))[1] == -np.inf
    assert prior.log_prob(np.array([[1.0, 0.5]]))[0] == pytest.approx(np.log(0.5))
    np.testing.assert_array_equal(prior.full(x), x[:, :1])
