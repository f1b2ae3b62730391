"""A multivariate Student-t mixture fitted to weighted draws: a proposal density g.

Used as the bridge-sampling proposal on the sampler's unbounded space u (bridge.py),
where a single normal fitted to a curved posterior overlaps it poorly.  The components are fitted by weighted EM for a Gaussian
mixture (Dempster, Laird and Rubin 1977, JRSS B 39:1; weighted form, e.g. Bishop 2006,
Pattern Recognition and Machine Learning, sec. 9.2) and then given Student-t tails with
dof degrees of freedom: an importance or independence proposal must have heavier tails
than the target, or the weights have infinite variance (Geweke 1989, Econometrica
57:1317; common practice, no source, for the t choice).  A defensive share of the
weight goes to one broad component covering all draws (Hesterberg 1995, Technometrics
37:185).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg, special

__all__ = ["StudentTMixture", "fit_mixture"]


@dataclass
class StudentTMixture:
    log_weights: np.ndarray   # (k,)
    means: np.ndarray         # (k, d)
    chols: np.ndarray         # (k, d, d) lower Cholesky factors of the scale matrices
    dof: float

    @property
    def n_components(self) -> int:
        return self.means.shape[0]

    def logpdf(self, u) -> np.ndarray:
        u = np.atleast_2d(np.asarray(u, dtype=float))
        n, d = u.shape
        nu = self.dof
        const = (special.gammaln(0.5 * (nu + d)) - special.gammaln(0.5 * nu)
                 - 0.5 * d * np.log(nu * np.pi))
        out = np.empty((self.n_components, n))
        for j in range(self.n_components):
            # an 8x8 inverse and one matrix product beat a triangular solve per call
            inv = linalg.solve_triangular(self.chols[j], np.eye(d), lower=True, check_finite=False)
            z = (u - self.means[j]) @ inv.T
            maha = np.sum(z * z, axis=1)
            log_det = np.sum(np.log(np.diag(self.chols[j])))
            out[j] = (self.log_weights[j] + const - log_det
                      - 0.5 * (nu + d) * np.log1p(maha / nu))
        return special.logsumexp(out, axis=0)

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        d = self.means.shape[1]
        comp = rng.choice(self.n_components, size=n, p=np.exp(self.log_weights))
        z = rng.standard_normal((n, d))
        scale = np.sqrt(self.dof / rng.chisquare(self.dof, size=n))
        out = np.empty((n, d))
        for j in range(self.n_components):
            sel = comp == j
            if sel.any():
                out[sel] = self.means[j] + (z[sel] @ self.chols[j].T) * scale[sel, None]
        return out


def _weighted_cov(x, w, mean):
    dx = x - mean
    return (dx * w[:, None]).T @ dx / w.sum()


def _regularised_chol(cov, floor):
    d = cov.shape[0]
    cov = 0.5 * (cov + cov.T) + np.diag(floor)
    try:
        return np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        return np.linalg.cholesky(np.diag(np.maximum(np.diag(cov), floor)))


def fit_mixture(u, weights, rng: np.random.Generator, n_components: int = 6, dof: float = 6.0,
                defensive: float = 0.05, n_iter: int = 15,
                max_points: int = 1500) -> StudentTMixture:
    """Fit a k-component mixture to draws u (n, d) with importance weights (n,).

    Starts from k means picked by weighted k-means++ seeding (Arthur and Vassilvitskii
    2007), then weighted EM on a Gaussian mixture; covariances get a floor of 1e-3 of the
    overall per-axis variance so a component never collapses.  A last component with
    weight `defensive` has the overall mean and twice the overall covariance.
    """
    u = np.asarray(u, dtype=float)
    w = np.asarray(weights, dtype=float)
    keep = np.isfinite(w) & (w > 0) & np.all(np.isfinite(u), axis=1)
    u, w = u[keep], w[keep] / w[keep].sum()
    if u.shape[0] > max_points:
        u, w = _weighted_subset(u, w, rng, max_points)
    n, d = u.shape
    mean_all = w @ u
    cov_all = _weighted_cov(u, w, mean_all)
    floor = 1e-3 * np.maximum(np.diag(cov_all), 1e-12)
    n_eff = 1.0 / np.sum(w * w)
    # no more components than the weighted draws can pin down (~ 5 d effective draws each)
    k = int(max(1, min(n_components, n_eff // (5 * d))))
    idx = _kmeanspp_seeds(u, w, np.diag(cov_all), k, rng)
    k = len(idx)
    means = u[idx].copy()
    covs = np.repeat(cov_all[None] / k ** (2.0 / d), k, axis=0)
    means, covs, log_pi = _weighted_em(u, w, means, covs, floor, n_iter)
    chols = np.array([_regularised_chol(c, floor) for c in covs])
    log_w = np.log(1.0 - defensive) + log_pi
    means = np.vstack([means, mean_all[None]])
    chols = np.concatenate([chols, _regularised_chol(2.0 * cov_all, floor)[None]])
    log_w = np.append(log_w, np.log(defensive))
    return StudentTMixture(log_weights=log_w, means=means, chols=chols, dof=float(dof))


def _weighted_subset(u, w, rng, max_points):
    """max_points of the draws, picked by weight, each then weighing the same."""
    # EM cost is linear in n: a random subset, drawn by weight, keeps the fit unbiased
    # in expectation for equal weights and close for unequal ones
    # weighted sampling without replacement by random keys u^(1/w) (Efraimidis and
    # Spirakis 2006, Inf. Process. Lett. 97:181); numpy's choice(p=..., replace=False)
    # is far slower for large n
    keys = np.log(rng.random(u.shape[0])) / np.maximum(w, 1e-300)
    pick = np.argpartition(-keys, max_points)[:max_points]
    return u[pick], np.full(max_points, 1.0 / max_points)


def _kmeanspp_seeds(u, w, var_all, k, rng):
    """Indices of up to k starting means by weighted k-means++ seeding (distances scaled
    by the overall per-axis variance var_all)."""
    n = u.shape[0]
    idx = [rng.choice(n, p=w)]
    d2 = np.sum((u - u[idx[0]]) ** 2 / var_all, axis=1)
    for _ in range(1, k):
        p = w * d2
        if p.sum() <= 0:
            break
        idx.append(rng.choice(n, p=p / p.sum()))
        d2 = np.minimum(d2, np.sum((u - u[idx[-1]]) ** 2 / var_all, axis=1))
    return idx


def _weighted_em(u, w, means, covs, floor, n_iter):
    """Weighted EM for a Gaussian mixture from the given means and covariances; components
    that lose all weight are dropped. Returns (means, covs, log mixing weights)."""
    n, d = u.shape
    k = means.shape[0]
    log_pi = np.full(k, -np.log(k))
    prev = -np.inf
    for _ in range(n_iter):
        # E step (Gaussian components)
        log_r = np.empty((k, n))
        for j in range(k):
            c = _regularised_chol(covs[j], floor)
            inv = linalg.solve_triangular(c, np.eye(d), lower=True, check_finite=False)
            z = (u - means[j]) @ inv.T
            log_r[j] = (log_pi[j] - np.sum(np.log(np.diag(c))) - 0.5 * np.sum(z * z, axis=1)
                        - 0.5 * d * np.log(2 * np.pi))
        log_norm = special.logsumexp(log_r, axis=0)
        total = float(w @ log_norm)
        r = np.exp(log_r - log_norm) * w       # weighted responsibilities
        nk = r.sum(axis=1)
        alive = nk > 1e-8
        if not alive.all():
            means, covs, r, nk = means[alive], covs[alive], r[alive], nk[alive]
            k = int(alive.sum())
        log_pi = np.log(nk / nk.sum())
        for j in range(k):
            means[j] = r[j] @ u / nk[j]
            covs[j] = _weighted_cov(u, r[j], means[j])
        if abs(total - prev) < 1e-6 * max(1.0, abs(total)):
            break
        prev = total
    return means, covs, log_pi
