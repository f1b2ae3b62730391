"""Independence Metropolis-Hastings proposal from Student-t fitted to the population.

At the start of a stage the run's resampled particles (unbounded space) give a mean m
and covariance S = L L^T; a proposal u' = m + L z / sqrt(w / nu), z ~ N(0, I),
w ~ chi2(nu), does not depend on the current particle, so one accepted move gives a
particle a fresh draw of the fitted distribution (South, Pettitt and Drovandi 2019,
Bayesian Analysis 14:753, fit independent proposals to the SMC population; from
memory). The t's heavier tails (nu = 5) keep the importance ratio q(u) / q(u') bounded
where the target's tails outreach a normal fit. The proposal density enters the
acceptance ratio: log q(u) - log q(u') is returned with the proposals. A proposal that
the frozen fit makes depends only on the population at the start of the stage, so the
move leaves that stage's target invariant.

A fit may hold several components (fit_mixture): a mixture of t, one per k-means
cluster of the whitened particles (k-means++ seeding, Arthur and Vassilvitskii 2007,
Proc. 18th ACM-SIAM SODA 1027; Lloyd 1982, IEEE Trans. Inf. Theory 28:129), weighted
by the clusters' shares, each cluster's covariance shrunk toward the population's
(SHRINK). A mixture follows a curved posterior ridge that one t covers only with a
wide ellipsoid; South, Pettitt and Drovandi (2019) fit mixtures for the same reason.
"""
import numpy as np
from scipy import special

NU = 5.0
SHRINK = 0.2        # share of the population covariance in each cluster's covariance
KMEANS_SWEEPS = 20


def log_density(u, mean, lower):
    """log q(u) of one t component, up to a constant shared by every component."""
    z = np.linalg.solve(lower, (u - mean).T)
    return -np.sum(np.log(np.diag(lower))) - 0.5 * (NU + u.shape[1]) * np.log1p(np.sum(z * z, axis=0) / NU)


def mixture_log_density(u, fit):
    """log q(u) of a fit: (mean, L) for one t, or a list of (weight, mean, L)."""
    if isinstance(fit, tuple):
        return log_density(u, *fit)
    return special.logsumexp([np.log(w) + log_density(u, m, low) for w, m, low in fit], axis=0)


def _kmeans(z, k, rng):
    """Cluster labels of the rows of z: k-means++ seeding, then Lloyd's sweeps."""
    centres = [z[rng.integers(z.shape[0])]]
    for _ in range(k - 1):
        d2 = np.min(((z[:, None, :] - np.array(centres)[None]) ** 2).sum(axis=2), axis=1)
        centres.append(z[rng.choice(z.shape[0], p=d2 / d2.sum())] if d2.sum() > 0 else z[0])
    centres = np.array(centres)
    for _ in range(KMEANS_SWEEPS):
        labels = np.argmin(((z[:, None, :] - centres[None]) ** 2).sum(axis=2), axis=1)
        centres = np.array([z[labels == j].mean(axis=0) if np.any(labels == j) else centres[j]
                            for j in range(k)])
    return labels


def fit_mixture(u, lower, k, rng):
    """(mean, L) of the population when k == 1 (no random draws), else a list of
    (weight, mean, L), one per k-means cluster of at least d + 2 particles."""
    mean = u.mean(axis=0)
    if k <= 1:
        return mean, lower
    d = u.shape[1]
    labels = _kmeans(np.linalg.solve(lower, (u - mean).T).T, k, rng)
    cov_all = lower @ lower.T
    comps = []
    for j in range(k):
        x = u[labels == j]
        if x.shape[0] < d + 2:
            continue
        cov = (1.0 - SHRINK) * np.cov(x, rowvar=False) + SHRINK * cov_all
        comps.append((x.shape[0], x.mean(axis=0), np.linalg.cholesky(cov)))
    if not comps:
        return mean, lower
    total = sum(c[0] for c in comps)
    return [(n / total, m, low) for n, m, low in comps]


def _draw(fit, n, rng, d):
    z = rng.standard_normal((n, d))
    w = rng.chisquare(NU, n)
    z = z / np.sqrt(w / NU)[:, None]
    if isinstance(fit, tuple):
        return fit[0] + z @ fit[1].T
    pick = rng.choice(len(fit), size=n, p=np.array([c[0] for c in fit]))
    out = np.empty((n, d))
    for j, (_, m, low) in enumerate(fit):
        out[pick == j] = m + z[pick == j] @ low.T
    return out


def propose_independent(u, run_of, fits, rngs):
    """(proposals (n, d), log q(u) - log q(u') (n,)); fits: run -> fit_mixture's result."""
    out = np.empty_like(u)
    log_corr = np.empty(u.shape[0])
    for r, fit in fits.items():
        rows = run_of == r
        out[rows] = _draw(fit, int(rows.sum()), rngs[r], u.shape[1])
        log_corr[rows] = mixture_log_density(u[rows], fit) - mixture_log_density(out[rows], fit)
    return out, log_corr
