"""The window's answers about its own assumptions: "one source against each row its
own" (a log10 Bayes factor; with persistent hypotheses against the window's evidence
under independent hypotheses) and the posterior of the hypotheses' persistence.

May import what window/sampling.py may.
"""
from __future__ import annotations

import numpy as np
from scipy import special


def persistence_summary(target, res):
    """The persistence's posterior (mean, 5 %, median, 95 %), rho integrated out on its
    grid in every draw, so the quantiles are read from the draws' averaged node weights
    (interpolated in logit rho); None with independent hypotheses."""
    if not target.persistent:
        return None
    from ventsource.inference.window.hypothesis_persistence import rho_posterior
    R, N, _ = res.theta.shape
    lz = np.stack([res.aux[f"lz{k}"].reshape(R * N, -1) for k in range(target.n_hypotheses)], axis=1)
    rho, w = rho_posterior(lz, target.log_pis)
    w = np.nan_to_num(w).mean(axis=0)
    cdf = np.cumsum(w) / w.sum()
    u = special.logit(rho)
    q = [float(special.expit(np.interp(p, cdf, u))) for p in (0.05, 0.5, 0.95)]
    return {"mean": float(np.sum(w * rho) / w.sum()), "q05": q[0], "median": q[1], "q95": q[2]}


def independent_log_z(target, log_z, lz, log_w):
    """log Z of the window with each row's hypothesis drawn on its own, from a run with
    persistent hypotheses: Z_ind = Z E_post[L_ind / L] over the run's weighted draws
    (importance sampling; the persistence's prior integrates to 1). The check "one source
    against each row its own" then compares like with like: a lone row has no neighbour
    to persist with. log_z unchanged for independent hypotheses."""
    if not target.persistent:
        return log_z
    lz_t = tuple(lz[:, k] for k in range(lz.shape[1]))
    mix = target.row_mixture(*lz_t)
    l_ind = np.where(np.isnan(mix), -np.inf, mix).sum(axis=1)
    l_hmm = target.window_log_likelihood(lz_t)
    with np.errstate(invalid="ignore"):
        ratio = np.where(np.isfinite(l_hmm), l_ind - l_hmm, -np.inf)
    return float(log_z + special.logsumexp(ratio + log_w))


def shared_source_log10_bf(target, log_z_window, rng, n):
    """log10 [Z(one source) / prod_i Z_i(own source)], Z_i by prior Monte Carlo over psi."""
    psi = target.shared_prior.sample(rng, n)
    mix = target.row_mixture(*target.row_evidences(psi))
    mix = np.where(np.isfinite(mix), mix, -np.inf)
    log_zi = special.logsumexp(mix, axis=0) - np.log(n)
    return float((log_z_window - log_zi.sum()) / np.log(10.0))
