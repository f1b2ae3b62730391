"""Three hypotheses on one SMC population: magmatic (M0), scrubbed (M1), released (M2).

The SMC target pi0 L0 + pi1 L1 + pi2 L2 (smc_measurement.ModelAveragedTarget) sums the
hypothesis indicator out exactly, so P(Mk | data) is the posterior mean of each
particle's responsibility pi_k L_k / sum_j pi_j L_j (Rao-Blackwellised); each run gives
its own estimate and their spread the Monte Carlo error, as for P(M0) alone.

Budget draws: per particle one hypothesis is drawn from its responsibilities, and the
factor its emitted SO2 bears to the magmatic SO2 (1, 1 - s or 1 + r, s and r from their
conditional posteriors given the particle's gas); with the particle's magmatic SO2/CO2
these are all a sulfur budget needs (ventsource.workflow.sulfur_budget).
"""
from __future__ import annotations

import numpy as np

from ventsource.ascent import observables
from ventsource.chemistry.species import INDEX
from ventsource.inference.hypotheses.release_marginal import released_gas

_SO2, _CO2 = INDEX["SO2"], INDEX["CO2"]


def log_priors(target):
    logs = [target.log_pi0, target.log_pi1]
    if target.release is not None:
        logs.append(target.log_pi2)
    return np.array(logs)


def responsibilities(res, target):
    """(R, N, H) responsibilities of the H = 2 or 3 hypotheses per particle."""
    keys = ("ll0", "ll1", "ll2")[:2 + (target.release is not None)]
    logs = np.stack([res.aux[k] for k in keys], axis=-1) + log_priors(target)
    top = np.max(logs, axis=-1, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    w = np.exp(logs - top)
    total = w.sum(axis=-1, keepdims=True)
    return np.where(total > 0, w / np.where(total > 0, total, 1.0), 0.0)


def probabilities_with_errors(resp):
    """Per hypothesis: mean over runs of the mean responsibility, and sd / sqrt(runs)."""
    per_run = resp.mean(axis=1)                     # (R, H)
    R = per_run.shape[0]
    err = per_run.std(axis=0, ddof=1) / np.sqrt(R) if R > 1 else np.full(per_run.shape[1], np.nan)
    return per_run.mean(axis=0), err, per_run


def log_evidences(res, target, per_run):
    """(R, H) log Z_k = log Z + log P(Mk | data) - log pi_k per run."""
    with np.errstate(divide="ignore"):
        return res.log_z[:, None] + np.log(per_run) - log_priors(target)[None, :]


def release_draws(res, target, r2, rng):
    """M2 posterior: particles resampled by their M2 responsibility, r from p(r | gas, data).

    Returns (predicted ratios (R, N, m), r (R, N))."""
    from ventsource.inference.row.smc_measurement import _resample_rows
    R, N, _ = res.theta.shape
    preds, rs = [], []
    for r in range(R):
        idx, _ = _resample_rows(r2[r], rng)
        gas = res.aux["gas"][r, idx]
        ok = np.isfinite(gas).all(axis=1)
        g = np.where(ok[:, None], gas, 1.0)
        rr = target.release.sample(g, rng)
        pred = observables.ratios(released_gas(g, rr), target.forward.ratio_names)
        pred[~ok] = np.nan
        preds.append(pred)
        rs.append(rr)
    return np.stack(preds), np.stack(rs)


def budget_draws(res, target, resp, rng, max_draws=1000):
    """Per particle (thinned to max_draws): hypothesis, magmatic SO2/CO2 (mol/mol), SO2 factor."""
    R, N, H = resp.shape
    gas = res.aux["gas"].reshape(R * N, -1)
    p = resp.reshape(R * N, H)
    pick = np.sort(rng.choice(R * N, size=min(max_draws, R * N), replace=False))
    gas, p = gas[pick], p[pick]
    ok = np.isfinite(gas).all(axis=1)
    g = np.where(ok[:, None], gas, 1.0)
    cum = np.cumsum(p, axis=1)
    model = np.minimum((cum < rng.random(len(pick))[:, None] * cum[:, -1:]).sum(axis=1), H - 1)
    full = target.prior0.full(res.theta.reshape(R * N, -1)[pick])
    factor = np.ones(len(pick))
    s = target.marginal.sample(g, rng, target.h2s_return(full))
    factor = np.where(model == 1, 1.0 - s, factor)
    if target.release is not None:
        factor = np.where(model == 2, 1.0 + target.release.sample(g, rng), factor)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = g[:, _SO2] / g[:, _CO2]
    ratio = np.where(ok, ratio, np.nan)
    return {"model": model.astype(int), "so2_co2_magmatic": ratio, "so2_factor": factor}
