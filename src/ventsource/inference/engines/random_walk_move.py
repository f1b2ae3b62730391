"""Random-walk Metropolis proposal with the particles' own covariance (per run).

u' = u + scale_r L_r z, z ~ N(0, I), with L_r the Cholesky factor of run r's
particle covariance; symmetric, so the Metropolis ratio is the target ratio
(Roberts and Rosenthal 2001, Statistical Science 16:351, for the 2.38/sqrt(d)
starting scale).
"""
import numpy as np


def propose_random_walk(u, run_of, chol, scale, rngs):
    """Proposals (n, d) for particles u (n, d); run_of (n,) gives each particle's run."""
    out = np.empty_like(u)
    for r, lower in chol.items():
        rows = run_of == r
        z = rngs[r].standard_normal((int(rows.sum()), u.shape[1]))
        out[rows] = u[rows] + scale[r] * z @ lower.T
    return out
