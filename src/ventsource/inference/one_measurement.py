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

import json
from dataclasses import dataclass, field

import numpy as np

from ventsource.inference.evidence.bridge import BridgeResult, bridge_sampling, prior_monte_carlo_evidence, support_bounds, _likelihood_options
from ventsource.inference.likelihood import Likelihood, Measurement, MeasurementError
from ventsource.inference.option_rules import OptionError, check_options
from ventsource.inference.model_choice import (PredictiveCheck, model_flags, posterior_model_probability,
                           predictive_check, probability_below, release_flags)
from ventsource.inference.engines.emcee_engine import LogPosterior, SampleResult, SamplerError, sample_posterior
from ventsource.inference.engines.run_rhat import between_run_rhat

__all__ = ["infer", "InferenceResult", "ModelRun", "prior_monte_carlo_evidence", "CAUTION",
           "PARAMETER_UNITS", "InferenceError"]

CAUTION = ("Model- and prior-dependent; supports, never replaces, the observatory's assessment "
           "and official warnings.")

PARAMETER_UNITS = {
    "pressure_bar": "bar", "pressure_pool_centre": "standard normal score (window model)",
    "pressure_pool_spread": "1 = independent rows (window model)", "temperature_c": "degC", "dfmq": "log10 units relative to FMQ",
    "scrubbed_so2": "fraction of SO2 removed", "scrubbed_h2s": "fraction of H2S removed",
    "h2s_return": "fraction", "h2o_wt": "wt%", "co2_ppm": "ppm by mass", "s_ppm": "ppm by mass",
    "s_partition": "dimensionless (wt frac S in gas / wt frac S in melt)",
    "exsolved_gas_wt": "wt%",
}

_DEFAULTS = dict(kind=None, dof=None, epsilon=0.05, pi0=None, n_walkers=None, target_ess=1000.0,
                 max_steps=20000, alpha=0.01, n_prior_draws=2000, scrub_name="scrubbed_so2",
                 n_proposal=20000, model_choice=True, space="unbounded", burn_factor=3.0, min_tau_factor=30.0,
                 chunk=200, max_error_p=0.05, rhat_max=1.05, moves="de", init="importance",
                 n_init_draws=None, rhat_target=1.05, bridge_proposal="mixture",
                 engine="smc", n_particles=500, n_runs=4, ess_target=0.5, max_moves=30,
                 smc_rhat_max=1.01)
ENGINES = ("smc", "emcee")
# SMC options checked before any sampling: name -> (types, min, max, wording)

class InferenceError(ValueError):
    """Inference cannot be run with these inputs; one-line message."""


@dataclass
class ModelRun:
    name: str
    prior: object
    sample: SampleResult | None
    bridge: BridgeResult | None
    check: PredictiveCheck | None
    log_z: float
    log_z_error: float


def _safe_var(name: str) -> str:
    return name.replace("/", "_").replace(" ", "_")


def _units(name: str) -> str:
    return PARAMETER_UNITS.get(name, "")


@dataclass
class InferenceResult:
    """Result of infer(); see attributes and summary()/corner_plot()."""

    measurement: Measurement
    p_magmatic: float | None
    p_magmatic_error: float | None
    p_scrubbed_below_epsilon: float | None
    p_scrubbed_below_epsilon_error: float | None
    epsilon: float
    pi0: float | None
    flags: list
    idata: object
    idata_m0: object | None
    runs: dict = field(default_factory=dict)
    engine: str = "emcee"
    scrubbed_model_averaged: tuple | None = None  # (q05, median, q95), point mass at 0 of weight P(M0)
    diagnostics: dict = field(default_factory=dict)
    hypotheses: dict | None = None     # with a release prior: P(M0), P(M1), P(M2), errors
    budget_draws: dict | None = None   # per-draw hypothesis, magmatic SO2/CO2, SO2 factor

    @property
    def log_evidence(self) -> dict:
        return {k: (r.log_z, r.log_z_error) for k, r in self.runs.items()}

    def summary(self, model: str = "M1"):
        """pandas DataFrame: median, 5%, 95%, mean, sd, r_hat, ess_bulk, ess_tail per parameter."""
        import arviz as az
        import pandas as pd
        idata = self.idata if model == "M1" else self.idata_m0
        if idata is None:
            raise InferenceError(f"no posterior for model {model!r}")
        post = idata.posterior
        rhat = _rhat_by_parameter(post, self.engine)
        ess_b = az.ess(post, method="bulk")
        ess_t = az.ess(post, method="tail")
        rows = []
        for v in post.data_vars:
            x = post[v].values.reshape(-1)
            rows.append({"parameter": v, "units": post[v].attrs.get("units", ""),
                         "median": float(np.median(x)), "5%": float(np.quantile(x, 0.05)),
                         "95%": float(np.quantile(x, 0.95)), "mean": float(x.mean()),
                         "sd": float(x.std(ddof=1)), "r_hat": rhat[v],
                         "ess_bulk": float(ess_b[v]), "ess_tail": float(ess_t[v])})
        return pd.DataFrame(rows).set_index("parameter")

    def corner_plot(self, model: str = "M1", **kwargs):
        """Corner plot of the posterior (corner package) with the caution footnote."""
        import corner
        idata = self.idata if model == "M1" else self.idata_m0
        if idata is None:
            raise InferenceError(f"no posterior for model {model!r}")
        post = idata.posterior
        names = list(post.data_vars)
        x = np.column_stack([post[v].values.reshape(-1) for v in names])
        labels = [f"{v} [{post[v].attrs.get('units', '')}]" if post[v].attrs.get("units") else v
                  for v in names]
        kwargs.setdefault("quantiles", [0.05, 0.5, 0.95])
        fig = corner.corner(x, labels=labels, **kwargs)
        fig.text(0.01, 0.005, CAUTION, fontsize=7, ha="left", va="bottom")
        return fig

    def to_dict(self) -> dict:
        return {"measurement": self.measurement.to_dict(), "p_magmatic": self.p_magmatic,
                "p_magmatic_error": self.p_magmatic_error,
                "p_scrubbed_below_epsilon": self.p_scrubbed_below_epsilon,
                "p_scrubbed_below_epsilon_error": self.p_scrubbed_below_epsilon_error,
                "epsilon": self.epsilon, "pi0": self.pi0, "flags": list(self.flags),
                "engine": self.engine,
                "scrubbed_so2_model_averaged": (None if self.scrubbed_model_averaged is None else
                                                dict(zip(("q05", "median", "q95"),
                                                         self.scrubbed_model_averaged))),
                "diagnostics": self.diagnostics,
                "log_evidence": {k: [float(a), float(b)] for k, (a, b) in self.log_evidence.items()},
                "caution": CAUTION}


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


def _run_model(name, prior, forward, lik, seeds, opt) -> ModelRun:
    """Sample, bridge and check one model; seeds: 3 ints (sampler, bridge, check)."""
    free = tuple(prior.free_names)
    if len(free) == 0:
        # nothing to sample: the evidence is the likelihood at the fixed point
        th = np.zeros((1, 0))
        pred = forward.ratios(prior.full(th))
        ll = float(lik(pred)[0])
        chk = predictive_check(lik, np.repeat(pred, 4000, axis=0), np.random.default_rng(seeds[2]), opt["alpha"])
        return ModelRun(name, prior, None, None, chk, ll, 0.0)
    s = sample_posterior(prior, forward, lik, seed=seeds[0], n_walkers=opt["n_walkers"],
                         target_ess=opt["target_ess"], max_steps=opt["max_steps"], chunk=opt["chunk"],
                         burn_factor=opt["burn_factor"], min_tau_factor=opt["min_tau_factor"],
                         space=opt["space"], moves=opt["moves"], init=opt["init"],
                         n_init_draws=opt["n_init_draws"], rhat_target=opt["rhat_target"])
    lp = LogPosterior(prior, forward, lik)
    b = bridge_sampling(s.chain, lambda th: lp.evaluate(th)[0], support_bounds(prior), seed=seeds[1],
                        n_proposal=opt["n_proposal"], log_target_chain=s.log_posterior,
                        proposal=opt["bridge_proposal"])
    s.stats["n_forward_evals_bridge"] = lp.n_forward_evals
    s.stats["n_failed_states_bridge"] = lp.n_failed
    chk = predictive_check(lik, s.predictions, np.random.default_rng(seeds[2]), opt["alpha"])
    return ModelRun(name, prior, s, b, chk, b.log_z, b.log_z_error)


def _to_idata(run: ModelRun, lik: Likelihood, measurement: Measurement, rng, n_prior_draws: int):
    import arviz as az
    s = run.sample
    prior = run.prior
    names = tuple(prior.free_names)
    post = {n: s.chain[:, :, j] for j, n in enumerate(names)}
    prior_draws = np.asarray(prior.sample(rng, n_prior_draws), dtype=float)
    prior_grp = {n: prior_draws[None, :, j] for j, n in enumerate(names)}
    obs_names = lik.observed_names
    vars_ = [_safe_var(n) for n in obs_names]
    W, T = s.log_posterior.shape
    pred = s.predictions.reshape(W * T, -1)
    y_rep = np.exp(lik.simulate_log(pred, rng)).reshape(W, T, -1)
    pp = {v: y_rep[:, :, j] for j, v in enumerate(vars_)}
    pw = lik.pointwise(pred).reshape(W, T, -1)
    loglik = {v: pw[:, :, j] for j, v in enumerate(vars_)}
    observed = {v: np.array([np.exp(lik.y[j])]) for j, v in enumerate(vars_)}
    stats = {"lp": s.log_posterior, "total_log_likelihood": s.log_likelihood}
    idata = az.from_dict(posterior=post, prior=prior_grp, posterior_predictive=pp,
                         log_likelihood=loglik, observed_data=observed, sample_stats=stats)
    units = {n: _units(n) for n in names}
    for n in names:
        idata.posterior[n].attrs["units"] = units[n]
        idata.prior[n].attrs["units"] = units[n]
    cens_text = {-1: "upper limit (<x)", 0: "exact", 1: "lower limit (>x)"}
    for j, (v, n) in enumerate(zip(vars_, obs_names)):
        for grp in (idata.posterior_predictive, idata.observed_data, idata.log_likelihood):
            grp[v].attrs["long_name"] = n
        idata.posterior_predictive[v].attrs["units"] = "mol/mol"
        idata.observed_data[v].attrs["units"] = "mol/mol"
        idata.observed_data[v].attrs["relative_sigma"] = float(np.expm1(lik.s[j]))
        idata.observed_data[v].attrs["censoring"] = cens_text[int(lik.c[j])]
        idata.log_likelihood[v].attrs["units"] = "log density of ln(ratio)"
    idata.posterior.attrs["units"] = json.dumps(units)
    idata.posterior.attrs["model"] = run.name
    idata.posterior.attrs["caution"] = CAUTION
    idata.posterior.attrs["measurement"] = json.dumps(measurement.to_dict())
    idata.posterior.attrs["likelihood"] = json.dumps({"kind": lik.kind, "dof": lik.dof,
                                                      "sigma_ln": "ln(1 + relative_sigma)"})
    try:
        idata.posterior.attrs["prior"] = json.dumps(prior.to_dict(), default=str)
    except Exception:  # provenance only; never fail the inversion on it
        idata.posterior.attrs["prior"] = str(getattr(prior, "name", ""))
    ss = idata.sample_stats
    ss["lp"].attrs["units"] = "log density"
    for k, v in s.stats.items():
        ss.attrs[k] = int(v) if isinstance(v, (bool, np.bool_)) else v
    ss.attrs["tau"] = np.asarray(s.tau, dtype=float)
    ss.attrs["acceptance_fraction"] = np.asarray(s.acceptance_fraction, dtype=float)
    ss.attrs["log_evidence"] = float(run.log_z)
    ss.attrs["log_evidence_error"] = float(run.log_z_error)
    return idata


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
        from ventsource.inference.smc_inference import infer_smc
        return _with_calibration_flag(infer_smc(measurement, prior, forward, lik, pi0, seed, opt), prior)
    if do_choice and scrub not in tuple(prior.free_names):
        raise InferenceError(
            f"infer: prior {getattr(prior, 'name', '')!r} has no free parameter {scrub!r}; "
            f"pass model_choice=False to sample without the M0/M1 comparison")
    return _with_calibration_flag(_infer_emcee(measurement, prior, forward, lik, pi0, seed, opt), prior)


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
            from ventsource.inference.hypotheses_emcee import run_release_model
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
    from ventsource.inference import hypotheses_emcee
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


def _rhat_by_parameter(post, engine):
    """R-hat per parameter: split R-hat over emcee chains, between-run R-hat over SMC runs
    (whose particles are exchangeable, engines/run_rhat.py)."""
    import arviz as az
    if engine != "smc":
        rh = az.rhat(post)
        return {v: float(rh[v]) for v in post.data_vars}
    return {v: between_run_rhat(post[v].values.reshape(post.sizes["chain"], post.sizes["draw"], 1))
            for v in post.data_vars}

