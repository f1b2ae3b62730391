"""infer() with the SMC engine: P(M0), evidences, both posteriors, flags.

Diagnostics follow the engine's nature: rank-normalised R-hat across the
independent runs, not split (engines/run_rhat.py; Vehtari et al. 2021; flag above
smc_rhat_max = 1.01), distinct particles and the last stage's Kish ESS per run
(not the ArviZ ESS of a resampled population, which overstates it), and the
P(M0) Monte Carlo error from the between-run spread (sd / sqrt(runs)).
"""
from __future__ import annotations

import numpy as np

from ventsource.inference.sulfur_flags import melt_at_pressure

from ventsource.inference.engines.emcee_engine import SampleResult
from ventsource.inference.engines.run_rhat import between_run_rhat
from ventsource.inference.engines.smc_engine import SMCError
from ventsource.inference.hypotheses.model_choice import (model_flags, predictive_check, probability_below,
                                               release_flags)
from ventsource.inference.row.result import InferenceError, InferenceResult, ModelRun, _to_idata
from ventsource.inference.row.hypotheses_smc import (budget_draws, log_evidences, log_priors,
                                                 probabilities_with_errors, release_draws,
                                                 responsibilities)
from ventsource.inference.row.smc_measurement import (model_averaged_quantiles, model_draws,
                                                  model_probabilities, run_smc)

MIN_DISTINCT_SHARE = 0.25   # fewer distinct particles than this share of N: flag
MIN_MODEL_ESS = 100.0       # Kish ESS of a model's reweighted population below this: flag


def _as_sample(draws, names, res, stats):
    R, N, d = draws.theta.shape
    return SampleResult(free_names=tuple(names), chain=draws.theta, log_posterior=draws.log_post,
                        log_likelihood=draws.log_like, predictions=draws.predictions,
                        tau=np.ones(d), burn=0, n_steps=N, thin=1, converged=True,
                        acceptance_fraction=np.full(R, float(np.mean(res.acceptance or [0.0]))),
                        n_forward_evals=res.n_evals, n_failed_states=res.n_failed, n_init_failed=0,
                        stats=dict(stats))


def infer_smc(measurement, prior, forward, lik, pi0, seed, opt):
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(4)]
    try:
        res, target = run_smc(prior, forward, lik, pi0, seeds[0], opt["n_particles"], opt["n_runs"],
                              opt["scrub_name"], opt["ess_target"], opt["max_moves"])
    except SMCError as exc:
        raise InferenceError(f"infer: {exc}") from None
    p0_runs, r0, log_z0, log_z1 = model_probabilities(res, pi0)
    three = _three_hypotheses(res, target, seed) if target.release is not None else None
    if three is not None:  # M0, M1 from the three-way responsibilities
        p0_runs, r0 = three["per_run"][:, 0], three["resp"][:, :, 0]
        log_z0, log_z1 = three["log_z"][:, 0], three["log_z"][:, 1]
    R = p0_runs.size
    p_mag = float(p0_runs.mean())
    p_err = float(p0_runs.std(ddof=1) / np.sqrt(R)) if R > 1 else float("nan")
    rng = np.random.default_rng(seeds[1])
    r0_scrub = r0 if three is None else 1.0 - three["resp"][:, :, 1]  # weight 1 - r0_scrub = r1
    d1 = model_draws(res, target, r0_scrub, prior, rng, scrubbed=True, scrub_name=opt["scrub_name"])
    d0 = model_draws(res, target, r0, prior, rng, scrubbed=False, scrub_name=opt["scrub_name"])
    diag = {"engine": "smc", "n_runs": R, "n_particles": int(opt["n_particles"]),
            "n_forward_evals": int(res.n_evals), "n_failed_states": int(res.n_failed),
            "stages": res.n_stages.tolist(), "kish_ess_last_stage": res.kish_ess_last.round(1).tolist(),
            "distinct_particles": res.distinct.tolist(), "p_magmatic_per_run": p0_runs.tolist(),
            "log_z_per_run": res.log_z.tolist(), "kish_ess_if_scrubbed": d1.kish_ess.round(1).tolist(),
            "kish_ess_magmatic": d0.kish_ess.round(1).tolist(),
            "rhat_max": between_run_rhat(res.theta)}
    flags = _flags(diag, p_err, opt, res)
    check1 = predictive_check(lik, d1.predictions, np.random.default_rng(seeds[2]), opt["alpha"])
    check0 = predictive_check(lik, d0.predictions, np.random.default_rng(seeds[3]), opt["alpha"])
    flags += model_flags(check0, check1)
    melt_flags, melt = melt_at_pressure(forward, prior, d1.theta, seed)  # capacity / evolving only
    flags += melt_flags
    if melt is not None:
        diag["melt_at_pressure"] = melt
    if three is not None:
        flags = _release_check(three, lik, flags, seed, opt["alpha"])
    names1, names0 = tuple(prior.free_names), tuple(target.prior0.free_names)
    err = lambda z: float(np.std(z, ddof=1) / np.sqrt(R)) if R > 1 else float("nan")  # noqa: E731
    run1 = ModelRun("M1", prior, _as_sample(d1, names1, res, diag), None, check1,
                    float(np.mean(log_z1)), err(log_z1))
    run0 = ModelRun("M0", target.prior0, _as_sample(d0, names0, res, diag), None, check0,
                    float(np.mean(log_z0)), err(log_z0))
    idata1 = _to_idata(run1, lik, measurement, rng, opt["n_prior_draws"])
    idata0 = _to_idata(run0, lik, measurement, rng, opt["n_prior_draws"])
    s_draws = d1.theta[:, :, names1.index(opt["scrub_name"])]
    p_below, p_below_err = probability_below(s_draws, opt["epsilon"], float(np.sum(d1.kish_ess)))
    averaged = tuple(model_averaged_quantiles(p_mag, s_draws))
    for idata in (idata0, idata1):
        idata.sample_stats.attrs["p_magmatic"] = p_mag
        idata.sample_stats.attrs["p_magmatic_error"] = p_err
    idata1.posterior.attrs["label"] = "posterior if scrubbed (model M1 only)"
    return InferenceResult(measurement=measurement, p_magmatic=p_mag, p_magmatic_error=p_err,
                           p_scrubbed_below_epsilon=p_below,
                           p_scrubbed_below_epsilon_error=p_below_err,
                           epsilon=float(opt["epsilon"]), pi0=pi0, flags=flags, idata=idata1,
                           idata_m0=idata0, runs={"M1": run1, "M0": run0}, engine="smc",
                           scrubbed_model_averaged=averaged, diagnostics=diag,
                           hypotheses=None if three is None else three["summary"],
                           budget_draws=_budget(res, target, three, seed))


def _three_hypotheses(res, target, seed):
    """P(M0), P(M1), P(M2) with errors, M2 draws; own random stream (the two-hypothesis
    numbers keep theirs)."""
    resp = responsibilities(res, target)
    p, err, per_run = probabilities_with_errors(resp)
    rng = np.random.default_rng([int(seed), 2])
    pred2, r_draws = release_draws(res, target, resp[:, :, 2], rng)
    q = np.quantile(r_draws[np.isfinite(r_draws)], [0.05, 0.5, 0.95]) if np.isfinite(r_draws).any() \
        else np.full(3, np.nan)
    summary = {"names": ["M0 magmatic", "M1 scrubbed", "M2 released"], "p": p.tolist(),
               "error": err.tolist(), "p_per_run": per_run.tolist(),
               "prior": np.exp(log_priors(target)).tolist(),
               "released_so2_if_released": [float(x) for x in q]}
    return {"resp": resp, "per_run": per_run, "log_z": log_evidences(res, target, per_run),
            "pred2": pred2, "summary": summary}


def _release_check(three, lik, flags, seed, alpha):
    """The predictive check of M2: a gas none of the three hypotheses reproduces is flagged."""
    pred2 = three["pred2"].reshape(-1, three["pred2"].shape[-1])
    check2 = predictive_check(lik, pred2[np.isfinite(pred2).all(axis=1)],
                              np.random.default_rng([int(seed), 3]), alpha)
    three["summary"]["m2_reproduces"] = bool(check2.reproduces)
    return release_flags(flags, check2)


def _budget(res, target, three, seed):
    resp = three["resp"] if three is not None else responsibilities(res, target)
    return budget_draws(res, target, resp, np.random.default_rng([int(seed), 4]))


def _flags(diag, p_err, opt, res):
    flags = []
    if np.isfinite(p_err) and p_err > opt["max_error_p"]:
        flags.append("p_magmatic_error_large")
    if diag["rhat_max"] > opt["smc_rhat_max"]:
        flags.append("rhat_high")
    if min(diag["distinct_particles"]) < MIN_DISTINCT_SHARE * opt["n_particles"]:
        flags.append("few_distinct_particles")
    if res.n_failed > 0.5 * max(res.n_evals, 1):
        flags.append("many_failed_states")
    return flags
