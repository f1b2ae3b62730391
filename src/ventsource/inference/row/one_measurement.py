"""One-call Bayesian inversion of a gas measurement: posterior, evidences, P(magmatic).

infer(measurement, prior, forward) runs, for the full model M1 (scrubbing free) and the
nested model M0 (scrubbed_so2 fixed to 0 via prior.with_fixed), and with a release prior
([hypotheses]) for M2 (hypotheses_emcee.py: M0 plus the released fraction r):
  emcee posterior sampling -> bridge-sampling evidence -> posterior predictive check,
then combines them into P(M0 | data) (and P(M1), P(M2); see model_choice.py), and packs
the M1 posterior into an ArviZ InferenceData with units in attributes. engine="smc"
(the default) goes to smc_inference.py instead.
"""
from __future__ import annotations

import numpy as np

from ventsource.inference.evidence.bridge import prior_monte_carlo_evidence, _likelihood_options
from ventsource.inference.likelihood import Likelihood, Measurement, MeasurementError
from ventsource.inference.option_rules import OptionError, check_options
from ventsource.inference.row.data_information import attach_information
from ventsource.inference.hypotheses.model_choice import (model_flags, posterior_model_probability,
                                                          probability_below, release_flags)
from ventsource.inference.engines.emcee_engine import SamplerError
from ventsource.inference.row.emcee_model import _run_model
from ventsource.inference.row.result import (CAUTION, PARAMETER_UNITS, InferenceError, InferenceResult,
                                             ModelRun, _to_idata)

__all__ = ["infer", "InferenceResult", "ModelRun", "prior_monte_carlo_evidence", "CAUTION",
           "PARAMETER_UNITS", "InferenceError"]

_DEFAULTS = dict(kind=None, dof=None, epsilon=0.05, pi0=None, n_walkers=None, target_ess=1000.0,
                 max_steps=20000, alpha=0.01, n_prior_draws=2000, scrub_name="scrubbed_so2",
                 n_proposal=20000, model_choice=True, space="unbounded", burn_factor=3.0, min_tau_factor=30.0,
                 chunk=200, max_error_p=0.05, rhat_max=1.05, moves="de", init="importance",
                 n_init_draws=None, rhat_target=1.05, bridge_proposal="mixture",
                 engine="smc", n_particles=500, n_runs=4, ess_target=0.5, max_moves=30,
                 smc_rhat_max=1.01)
ENGINES = ("smc", "emcee")
# SMC options checked before any sampling: name -> (types, min, max, wording)


def _check_options(options: dict) -> dict:
    unknown = sorted(set(options) - set(_DEFAULTS))
    if unknown:
        raise InferenceError(f"infer: unknown option(s) {unknown}; known: {sorted(_DEFAULTS)}")
    out = dict(_DEFAULTS)
    try:  # type and range of each option: the table in option_rules
        out.update(check_options(options, _DEFAULTS))
    except OptionError as exc:
        raise InferenceError(f"infer: {exc}") from None
    return out


def _check_call(measurement, prior, seed):
    if not isinstance(measurement, Measurement):
        raise InferenceError(f"infer: measurement must be a ventsource.inference.likelihood.Measurement, got {type(measurement).__name__}")
    if not all(hasattr(prior, a) for a in ("free_names", "sample", "log_prob", "with_fixed")):
        raise InferenceError(f"infer: prior must be a PriorSpec (see load_prior_file), got {type(prior).__name__}")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InferenceError(f"infer: seed must be a whole number >= 0, got {seed!r}")


def infer(measurement: Measurement, prior, forward=None, seed: int = 0, **options) -> InferenceResult:
    """Posterior of the degassing/scrubbing parameters and P(purely magmatic | data).

    options (defaults): kind/dof (from prior.likelihood, else "normal"/4), epsilon=0.05
    (threshold for P(scrubbed < epsilon | data, M1)), pi0 (prior.p_magmatic, else 0.5),
    n_walkers (default 8 per free parameter, at least 48), target_ess=1000 (ArviZ bulk ESS of every
    parameter), rhat_target=1.05 (split R-hat stop criterion), moves="de" (DE + snooker;
    "stretch", "kde" or an emcee moves list), init="importance" (likelihood-weighted prior
    draws; or "prior"), n_init_draws (default 20 per walker), max_steps=20000, alpha=0.01 (predictive check level),
    n_prior_draws=2000, scrub_name="scrubbed_so2", n_proposal=20000 (bridge proposal draws),
    bridge_proposal="mixture" (Student-t mixture; or "normal", one multivariate normal),
    model_choice=True, space="unbounded" (sampler space, see sampler.sample_posterior),
    burn_factor=3, min_tau_factor=30, chunk=200, max_error_p=0.05 and rhat_max=1.05 (flag
    thresholds).

    The measurement carries its own relative 1-sigma per ratio (Measurement defaults to
    0.15); the prior file's likelihood.relative_sigma is not applied here - readers of
    measurement files use it when a file gives no uncertainty.
    """
    _check_call(measurement, prior, seed)
    opt = _check_options(options)
    if forward is None:
        from ventsource.forward.model import ForwardModel  # lazy: the physics is heavy and optional for tests
        forward = ForwardModel(prior, ratio_names=measurement.ratio_names)
    kind, dof = _likelihood_options(prior, opt["kind"], opt["dof"])
    try:
        lik = Likelihood(measurement, kind=kind, dof=dof,
                         prediction_names=getattr(forward, "ratio_names", None))
    except MeasurementError as e:
        raise InferenceError(str(e)) from None
    pi0 = opt["pi0"] if opt["pi0"] is not None else float(getattr(prior, "p_magmatic", 0.5))
    scrub = opt["scrub_name"]
    do_choice = bool(opt["model_choice"])
    if opt["engine"] == "smc":
        if not do_choice or scrub not in tuple(prior.free_names):
            raise InferenceError(f"infer: prior {getattr(prior, 'name', '')!r} has no free parameter "
                                 f"{scrub!r} (the smc engine integrates it out); use engine='emcee' "
                                 f"with model_choice=False to sample without the M0/M1 comparison")
        from ventsource.inference.row.smc_inference import infer_smc
        result = infer_smc(measurement, prior, forward, lik, pi0, seed, opt)
        return attach_information(_with_calibration_flag(result, prior), scrub)
    if do_choice and scrub not in tuple(prior.free_names):
        raise InferenceError(
            f"infer: prior {getattr(prior, 'name', '')!r} has no free parameter {scrub!r}; "
            f"pass model_choice=False to sample without the M0/M1 comparison")
    result = _infer_emcee(measurement, prior, forward, lik, pi0, seed, opt)
    return attach_information(_with_calibration_flag(result, prior), scrub)


def _with_calibration_flag(result, prior):
    """Adds `outside_calibration` (inference/calibration_flag.py) to the result's flags."""
    from ventsource.inference.calibration_flag import calibration_flags
    result.flags = list(result.flags) + calibration_flags(prior, result.idata)
    return result


def _infer_emcee(measurement, prior, forward, lik, pi0, seed, opt) -> InferenceResult:
    """infer() with the emcee engine, after the checks: the models, their posteriors and flags."""
    do_choice = bool(opt["model_choice"])
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(8)]
    flags = []
    runs = _run_models(prior, forward, lik, seed, seeds, opt, flags)
    run1, run0 = runs["M1"], runs.get("M0")
    rng = np.random.default_rng(seeds[6])
    idata1 = _to_idata(run1, lik, measurement, rng, opt["n_prior_draws"])
    idata0 = None
    if run0 is not None and run0.sample is not None:
        idata0 = _to_idata(run0, lik, measurement, rng, opt["n_prior_draws"])

    p_mag = p_err = p_below = p_below_err = hyp = budget = None
    if do_choice:
        p_mag, p_err, hyp, budget = _model_probabilities(runs, prior, forward, pi0, seed, opt)
        j = tuple(prior.free_names).index(opt["scrub_name"])
        import arviz as az
        ess = float(az.ess((run1.sample.chain[:, :, j] < opt["epsilon"]).astype(float)))  # ESS of the indicator
        p_below, p_below_err = probability_below(run1.sample.chain[:, :, j], opt["epsilon"], ess)
        if p_err is not None and p_err > opt["max_error_p"]:
            flags.append("p_magmatic_error_large")
    flags = _run_flags(flags, runs, idata1, opt)
    return InferenceResult(measurement=measurement, p_magmatic=p_mag, p_magmatic_error=p_err,
                           p_scrubbed_below_epsilon=p_below, p_scrubbed_below_epsilon_error=p_below_err,
                           epsilon=float(opt["epsilon"]), pi0=pi0 if do_choice else None,
                           flags=flags, idata=idata1, idata_m0=idata0, runs=runs,
                           hypotheses=hyp, budget_draws=budget)


def _run_models(prior, forward, lik, seed, seeds, opt, flags) -> dict:
    """{"M1": ...} and, with model choice, "M0" (and "M2" with a release prior); a model
    without a valid state adds its flag to `flags`."""
    try:
        run1 = _run_model("M1", prior, forward, lik, seeds[0:3], opt)
    except SamplerError as e:
        raise InferenceError(f"infer: model M1: {e}") from None
    except ValueError as e:  # e.g. bridge sampling with too few usable draws
        raise InferenceError(f"infer: model M1: {str(e).splitlines()[0]}") from None
    runs = {"M1": run1}
    if bool(opt["model_choice"]):
        prior0 = prior.with_fixed(opt["scrub_name"], 0.0)
        try:
            run0 = _run_model("M0", prior0, forward, lik, seeds[3:6], opt)
        except SamplerError:
            # no M0 state reproduces anything finite: Z0 = 0
            run0 = ModelRun("M0", prior0, None, None, None, -np.inf, 0.0)
            flags.append("m0_no_valid_state")
        runs["M0"] = run0
        if getattr(prior, "release", None) is not None:  # third hypothesis: released sulfur
            from ventsource.inference.row.hypotheses_emcee import run_release_model
            runs["M2"] = run_release_model(prior, forward, lik, seed, opt)
    return runs


def _run_flags(flags, runs, idata1, opt) -> list:
    """flags plus those of the predictive checks, the samplers, the bridges and R-hat."""
    run0, run1 = runs.get("M0"), runs["M1"]
    flags += model_flags(run0.check if run0 is not None else None, run1.check)
    if "M2" in runs:
        flags = release_flags(flags, runs["M2"].check)
        if runs["M2"].sample is None:
            flags.append("m2_no_valid_state")
    for r in runs.values():
        if r.sample is not None:
            if not r.sample.converged:
                flags.append(f"{r.name.lower()}_not_converged")
            n_ev = max(r.sample.n_forward_evals, 1)
            if r.sample.n_failed_states / n_ev > 0.5:
                flags.append(f"{r.name.lower()}_many_failed_states")
        if r.bridge is not None and not r.bridge.converged:
            flags.append(f"{r.name.lower()}_bridge_not_converged")
    import arviz as az
    rh = az.rhat(idata1.posterior)
    # ensemble walkers are short, correlated chains, so split R-hat over walkers is noisier
    # than over independent chains; 1.05 rather than 1.01 (Vehtari et al. 2021, Bayesian
    # Analysis 16:667) is used as the flag level (common practice for ensembles, no source)
    if max(float(rh[v]) for v in rh.data_vars) > opt["rhat_max"]:
        flags.append("m1_rhat_high")
    return flags


def _model_probabilities(runs, prior, forward, pi0, seed, opt):
    """(P(M0), its error, the three-hypothesis summary or None, budget draws or None)."""
    from ventsource.inference.row import hypotheses_emcee
    run0, run1 = runs["M0"], runs["M1"]
    if "M2" in runs:
        hyp = hypotheses_emcee.three_hypotheses(runs, prior, pi0)
        p_mag, p_err, probs = hyp["p"][0], hyp["error"][0], hyp["p"]
    else:
        hyp = None
        p_mag, p_err = posterior_model_probability(run0.log_z, run0.log_z_error, run1.log_z,
                                                   run1.log_z_error, pi0)
        probs = [p_mag, 1.0 - p_mag]
    budget = hypotheses_emcee.budget_draws(runs, probs, prior, forward, opt["scrub_name"], seed)
    return p_mag, p_err, hyp, budget


