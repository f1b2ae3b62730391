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


def test_persistence_integrated_out_matches_scipy_quad():
    """rho uniform on [0, 1] integrated out on the logit grid: log of the integral of L(rho)
    against scipy.integrate.quad of the exact forward likelihood, for short random windows
    and for 60 decisive rows whose states switch 0, 3 and 12 times (a peaked posterior
    of rho near 1); the prefix likelihoods and the next row's odds from the same grid."""
    from scipy import integrate
    rng = np.random.default_rng(6)
    log_pis = np.log([0.5, 0.5])
    cases = [2.0 * rng.normal(size=(2, 10)) for _ in range(3)]
    for switches in (0, 3, 12):
        state = np.zeros(60, int)
        for c in np.sort(rng.choice(np.arange(1, 60), switches, replace=False)):
            state[c:] = 1 - state[c:]
        lz = np.zeros((2, 60))
        lz[1 - state, np.arange(60)] = -3.0
        cases.append(lz)
    for lz in cases:
        one = lz[None]
        top = hp.log_likelihood(one, log_pis, np.array([0.5]))[0]
        f = lambda r: np.exp(hp.log_likelihood(one, log_pis, np.array([r]))[0] - top)
        ref = np.log(integrate.quad(f, 0.0, 1.0, limit=200, points=[0.5, 0.9, 0.99])[0]) + top
        assert hp.marginal_log_likelihood(one, log_pis)[0] == pytest.approx(ref, abs=0.02)
        cum = hp.marginal_cumulative(one, log_pis)[0]
        assert cum[-1] == pytest.approx(hp.marginal_log_likelihood(one, log_pis)[0], abs=1e-10)
        appended = np.concatenate([one, np.zeros((1, 2, 1))], axis=2)
        np.testing.assert_allclose(np.exp(hp.marginal_next_row_log_pis(one, log_pis))[0],
                                   hp.marginal_state_probabilities(appended, log_pis)[0, -1], atol=1e-9)


def test_integrated_state_probabilities_weigh_each_rho_by_its_posterior():
    """P(h_i | rows) with rho integrated out = the integral of P(h_i | rows, rho) L(rho)
    over the integral of L(rho) (scipy.integrate.quad, both)."""
    from scipy import integrate
    rng = np.random.default_rng(9)
    lz = 1.5 * rng.normal(size=(1, 2, 7))
    log_pis = np.log([0.4, 0.6])
    top = hp.log_likelihood(lz, log_pis, np.array([0.5]))[0]
    like = lambda r: np.exp(hp.log_likelihood(lz, log_pis, np.array([r]))[0] - top)
    z = integrate.quad(like, 0.0, 1.0)[0]
    got = hp.marginal_state_probabilities(lz, log_pis)[0, :, 0]
    for i in range(7):
        num = integrate.quad(lambda r: like(r) * hp.state_probabilities(lz, log_pis, np.array([r]))[0, i, 0],
                             0.0, 1.0)[0]
        assert got[i] == pytest.approx(num / z, abs=2e-4)
