"""The vectorised snooker move proposes what emcee's DESnookerMove proposes.

Reference: emcee 3 (emcee.moves.DESnookerMove), the same ensemble halves,
many independent proposals; the distributions of the proposed points and of
the Metropolis factors must agree (two-sample Kolmogorov-Smirnov, scipy).
"""
import emcee
import numpy as np
from scipy import stats

from ventsource.inference.engines.snooker_move import VectorSnookerMove


def test_proposals_match_emcee_in_distribution():
    rng = np.random.default_rng(0)
    s = rng.normal(size=(8, 4))
    c = [rng.normal(size=(8, 4)) * (1 + j) for j in range(3)]
    ours, ref = VectorSnookerMove(), emcee.moves.DESnookerMove()
    r1, r2 = np.random.RandomState(1), np.random.RandomState(2)
    q_ours, f_ours, q_ref, f_ref = [], [], [], []
    for _ in range(600):
        q, f = ours.get_proposal(s, c, r1)
        q_ours.append(q)
        f_ours.append(f)
        q, f = ref.get_proposal(s, c, r2)
        q_ref.append(q)
        f_ref.append(f)
    q_ours, q_ref = np.array(q_ours), np.array(q_ref)
    f_ours, f_ref = np.array(f_ours), np.array(f_ref)
    for walker in (0, 3, 7):
        assert stats.ks_2samp(f_ours[:, walker], f_ref[:, walker]).pvalue > 1e-3
        for dim in range(4):
            assert stats.ks_2samp(q_ours[:, walker, dim], q_ref[:, walker, dim]).pvalue > 1e-3


def test_the_check_can_fail():
    # a snooker with another step scale must be told apart by the same check
    rng = np.random.default_rng(0)
    s = rng.normal(size=(8, 4))
    c = [rng.normal(size=(8, 4)) for _ in range(3)]
    wide, ref = VectorSnookerMove(gammas=3.0), emcee.moves.DESnookerMove()
    r1, r2 = np.random.RandomState(1), np.random.RandomState(2)
    a = np.array([wide.get_proposal(s, c, r1)[0][0, 0] for _ in range(600)])
    b = np.array([ref.get_proposal(s, c, r2)[0][0, 0] for _ in range(600)])
    assert stats.ks_2samp(a, b).pvalue < 1e-3
