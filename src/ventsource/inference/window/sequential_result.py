"""A WindowResult from a sequentially updated window population (sequential.py).

The same per-row summaries, flags and information fields as infer_window, drawn from
the population resampled to equal weights on its own stream; the change-of-source
checks (one source against each row its own, and against a change within the window)
are infer_window's own, run when the caller asks (they cost more than an update).
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from ventsource.inference.engines.run_rhat import between_run_rhat

from ventsource.inference.window.sampling import (WINDOW_DEFAULTS, WindowError, WindowResult, _likelihoods,
                                                  split_log10_bf,
                                                  _log_evidence, _row_results, _shared_information,
                                                  _window_flags, split_points)
from ventsource.inference.window.source_check import independent_log_z, shared_source_log10_bf
from ventsource.inference.window.target import WindowTarget


def window_likelihoods(measurements, forward, prior):
    kind = prior.likelihood.get("kind", "normal")
    dof = prior.likelihood.get("dof", 4.0)
    return _likelihoods(measurements, forward, kind, dof)


def source_checks(prior, forward, likelihoods, pi0, log_z, seed, between=None, draws=None, **options):
    """(log10 BF one source vs each row its own, log10 BF one source vs a change within
    the window, its error, whether the second check ran): infer_window's checks;
    between: called after each of the second check's runs; draws: the population's
    (lz (R N, H, rows), log weights (R, N)), needed with persistent hypotheses
    (source_check.independent_log_z)."""
    opt = dict(WINDOW_DEFAULTS, **options)
    target = WindowTarget(prior, forward, likelihoods, pi0)
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(2)]
    if draws is not None:
        lz, log_w = draws
        log_z = independent_log_z(target, log_z, lz, np.asarray(log_w).reshape(-1) - np.log(log_w.shape[0]))
    bf = shared_source_log10_bf(target, log_z, np.random.default_rng(seeds[0]), opt["n_source_check"])
    split_ran = bool(opt["split_check"] and len(likelihoods) >= opt["split_min_rows"])
    split_bf, split_err = np.nan, np.nan
    if split_ran:
        split_bf, split_err = _split_check(prior, forward, likelihoods, seeds[1], opt, between or (lambda: None))
    return bf, split_bf, split_err, split_ran


def _split_check(prior, forward, liks, seed, opt, between):
    """sampling._split_source_log10_bf's numbers (the same runs, seeds and combination),
    its runs one at a time with the caller's work between them."""
    cuts = split_points(len(liks))
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(1 + 2 * len(cuts))]
    try:
        lz_one, err_one = _log_evidence(prior, forward, liks, seeds[0], opt)
        between()
        parts = []
        for k, c in enumerate(cuts):
            pair = []
            for side, sd in zip((liks[:c], liks[c:]), seeds[1 + 2 * k:3 + 2 * k]):
                pair.append(_log_evidence(prior, forward, side, sd, opt))
                between()
            parts.append(pair)
    except WindowError:
        return np.nan, np.nan
    return split_log10_bf(lz_one, err_one, parts)


def window_result(pop, prior, forward, measurements, likelihoods, pi0, seed, checks=None, **options):
    """WindowResult of the population's rows; checks: source_checks' tuple or None (not run)."""
    opt = dict(WINDOW_DEFAULTS, **options)
    target = WindowTarget(prior, forward, likelihoods, pi0)
    theta, lz = pop.equal_weight_draws([int(seed), pop.n_rows, 2])
    R, N = theta.shape[:2]
    distinct = np.array([np.unique(theta[r], axis=0).shape[0] for r in range(R)])
    res = SimpleNamespace(theta=theta, distinct=distinct,
                          aux={f"lz{k}": lz[:, :, k] for k in range(lz.shape[2])})
    rows = _row_results(target, res, measurements, np.random.default_rng([int(seed), pop.n_rows, 3]), opt)
    bf, split_bf, split_err, split_ran = checks or (np.nan, np.nan, np.nan, False)
    rhat_max = between_run_rhat(theta)
    flags = _window_flags(res, rhat_max, bf, split_bf, opt, split_ran)
    log_z = float(np.mean(pop.log_z))
    log_z_err = float(np.std(pop.log_z, ddof=1) / np.sqrt(R)) if R > 1 else float("nan")
    prior_p0 = float(np.exp(target.log_pis[0]))
    diag = {"rhat_max": rhat_max, "distinct_particles": distinct.tolist(),
            "log_z_per_run": pop.log_z.tolist(), "source_checked": checks is not None}
    info = _shared_information(target.shared_prior, theta, rows, prior_p0, seed)
    return WindowResult(rows, tuple(target.shared_prior.free_names), theta, log_z, log_z_err, bf, flags,
                        diag, split_bf, split_err, prior_p0, info)
