"""Differential-evolution snooker update for emcee, vectorised over walkers.

Ter Braak and Vrugt (2008), Statistics and Computing 18:435-446: for walker x,
pick three other walkers z, z1, z2 from the complementary half; project
z1 - z2 on the unit vector e along x - z and propose
q = x + gamma e (e . (z1 - z2)). The proposal is accepted with the factor
(|q - z| / |x - z|)^(d - 1). All walkers of a half-step are updated with
array operations, so the move costs no Python loop per walker.
"""
import numpy as np
from emcee.moves.red_blue import RedBlueMove


class SnookerMove(RedBlueMove):
    def __init__(self, gamma=1.7, **kwargs):
        self.gamma = gamma
        super().__init__(**kwargs)

    def get_proposal(self, s, c, random):
        pool = np.concatenate(c, axis=0)
        n_s, n_dim = s.shape
        # three distinct partners per walker
        picks = np.argsort(random.rand(n_s, pool.shape[0]), axis=1)[:, :3]
        z, z1, z2 = pool[picks[:, 0]], pool[picks[:, 1]], pool[picks[:, 2]]
        delta = s - z
        norm = np.sqrt(np.einsum("ij,ij->i", delta, delta))
        norm = np.where(norm > 0, norm, np.finfo(float).tiny)
        e = delta / norm[:, None]
        step = self.gamma * np.einsum("ij,ij->i", e, z1 - z2)
        q = s + e * step[:, None]
        new_norm = np.sqrt(np.einsum("ij,ij->i", q - z, q - z))
        log_factor = (n_dim - 1.0) * (np.log(np.maximum(new_norm, np.finfo(float).tiny))
                                      - np.log(norm))
        return q, log_factor
