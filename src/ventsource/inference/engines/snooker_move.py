"""emcee's differential-evolution snooker move, vectorised over walkers.

The proposal is the one of emcee.moves.DESnookerMove (Ter Braak and Vrugt 2008,
Statistics and Computing 18:435-446, as implemented in emcee 3: one partner
from each of the three other quarters of the ensemble, shuffled into z, z1, z2;
the step along x - z scaled by its length; the Metropolis factor
0.5 (d - 1) ln(|q - z| / |x - z|)). emcee builds it walker by walker in a
Python loop; here the whole half-step is built with array operations, which
matters at the batch sizes the forward model prefers. The random draws differ
from emcee's, so chains differ, not their distribution.
"""
import numpy as np
from emcee.moves.red_blue import RedBlueMove


class VectorSnookerMove(RedBlueMove):
    def __init__(self, gammas=1.7, **kwargs):
        self.gammas = gammas
        kwargs["nsplits"] = 4
        super().__init__(**kwargs)

    def get_proposal(self, s, c, random):
        n_s, n_dim = s.shape
        partners = np.stack([c[j][random.randint(len(c[j]), size=n_s)] for j in range(3)], axis=1)
        order = np.argsort(random.rand(n_s, 3), axis=1)
        partners = np.take_along_axis(partners, order[:, :, None], axis=1)
        z, z1, z2 = partners[:, 0], partners[:, 1], partners[:, 2]
        delta = s - z
        norm = np.sqrt(np.einsum("ij,ij->i", delta, delta))
        u = delta / np.sqrt(norm)[:, None]
        q = s + u * (self.gammas * np.einsum("ij,ij->i", u, z1 - z2))[:, None]
        gap = q - z
        metropolis = np.log(np.sqrt(np.einsum("ij,ij->i", gap, gap))) - np.log(norm)
        return q, 0.5 * (n_dim - 1.0) * metropolis
