"""Differential-evolution proposal from a frozen population (per run).

u' = u + gamma (u_a - u_b) + e, with a != b drawn from the population as it was at
the start of the stage (so the proposal is symmetric given that population: ter
Braak 2006, Statistics and Computing 16:239), gamma = 2.38 / sqrt(2 d), and small
jitter e ~ N(0, (1e-4)^2) that keeps the chain irreducible; every tenth particle
proposes gamma = 1 (a jump between modes, as ter Braak suggests).
"""
import numpy as np


def propose_de(u, run_of, frozen, active, n_per_run, rngs):
    """Proposals (n, d); frozen (n, d) holds the stage-start particles in the same order."""
    d = u.shape[1]
    out = np.empty_like(u)
    gamma0 = 2.38 / np.sqrt(2.0 * d)
    for k, r in enumerate(active):
        rows = np.flatnonzero(run_of == r)
        base = frozen[k * n_per_run:(k + 1) * n_per_run]
        rng = rngs[r]
        a = rng.integers(0, n_per_run, rows.size)
        b = (a + rng.integers(1, n_per_run, rows.size)) % n_per_run
        gamma = np.where(rng.random(rows.size) < 0.1, 1.0, gamma0)[:, None]
        out[rows] = u[rows] + gamma * (base[a] - base[b]) + 1e-4 * rng.standard_normal((rows.size, d))
    return out
