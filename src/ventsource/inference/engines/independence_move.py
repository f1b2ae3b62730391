"""Independence Metropolis-Hastings proposal from a Student-t fitted to the population.

At the start of a stage the run's resampled particles (unbounded space) give a mean m
and covariance S = L L^T; a proposal u' = m + L z / sqrt(w / nu), z ~ N(0, I),
w ~ chi2(nu), does not depend on the current particle, so one accepted move gives a
particle a fresh draw of the fitted distribution (South, Pettitt and Drovandi 2019,
Bayesian Analysis 14:753, fit independent proposals to the SMC population; their
mixture/copula fit is replaced here by one multivariate t; from memory). The t's
heavier tails (nu = 5) keep the importance ratio q(u) / q(u') bounded where the
target's tails outreach a normal fit. The proposal density enters the acceptance ratio:
log q(u) - log q(u') is returned with the proposals. A proposal that the frozen fit
makes depends only on the population at the start of the stage, so the move leaves
that stage's target invariant.
"""
import numpy as np

NU = 5.0


def log_density(u, mean, lower):
    """log q(u) up to a constant (the constant cancels in q(u) / q(u'))."""
    z = np.linalg.solve(lower, (u - mean).T)
    return -0.5 * (NU + u.shape[1]) * np.log1p(np.sum(z * z, axis=0) / NU)


def propose_independent(u, run_of, fits, rngs):
    """(proposals (n, d), log q(u) - log q(u') (n,)); fits: run -> (mean (d,), L (d, d))."""
    out = np.empty_like(u)
    log_corr = np.empty(u.shape[0])
    d = u.shape[1]
    for r, (mean, lower) in fits.items():
        rows = run_of == r
        n = int(rows.sum())
        z = rngs[r].standard_normal((n, d))
        w = rngs[r].chisquare(NU, n)
        out[rows] = mean + (z / np.sqrt(w / NU)[:, None]) @ lower.T
        log_corr[rows] = log_density(u[rows], mean, lower) - log_density(out[rows], mean, lower)
    return out, log_corr
