"""What infer() returns: InferenceResult (posteriors as ArviZ InferenceData, P(M0),
flags), ModelRun (one model's sampler, bridge and check), InferenceError, the caution
text and the units of the parameters; the ArviZ packing of an emcee run (_to_idata).
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np

from ventsource.inference.evidence.bridge import BridgeResult
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.hypotheses.model_choice import PredictiveCheck
from ventsource.inference.engines.emcee_engine import SampleResult
from ventsource.inference.engines.run_rhat import between_run_rhat
from ventsource.inference.row.averaged import averaged_summary

CAUTION = ("Model- and prior-dependent; supports, never replaces, the observatory's assessment "
           "and official warnings.")

PARAMETER_UNITS = {
    "pressure_bar": "bar", "pressure_pool_centre": "standard normal score (window model)",
    "pressure_pool_spread": "1 = independent rows (window model)",
    "hypothesis_persistence": "probability that a row keeps the previous row's hypothesis (window model)",
    "temperature_c": "degC", "dfmq": "log10 units relative to FMQ",
    "scrubbed_so2": "fraction of SO2 removed", "scrubbed_h2s": "fraction of H2S removed",
    "h2s_return": "fraction", "h2o_wt": "wt%", "co2_ppm": "ppm by mass", "s_ppm": "ppm by mass",
    "s_partition": "dimensionless (wt frac S in gas / wt frac S in melt)",
    "exsolved_gas_wt": "wt%",
}


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


# other names of the hypotheses in summary() and posterior()
MODEL_NAMES = {"scrubbed": "M1", "magmatic": "M0"}


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
    information: dict | None = None    # how much the data said (inference/information.py)

    @property
    def log_evidence(self) -> dict:
        return {k: (r.log_z, r.log_z_error) for k, r in self.runs.items()}

    def posterior(self, model: str = "M1"):
        """ArviZ InferenceData of one hypothesis: "M1" (scrubbed; also "scrubbed") or
        "M0" (purely magmatic; also "magmatic")."""
        idata = {"M1": self.idata, "M0": self.idata_m0}.get(MODEL_NAMES.get(model, model))
        if idata is None:
            raise InferenceError(f"no posterior for model {model!r}; known: M0 (magmatic), M1 (scrubbed)")
        return idata

    def summary(self, model: str = "averaged"):
        """pandas DataFrame, one row per parameter.

        model="averaged" (the default): the posterior averaged over M0 and M1 with weights
        P(M0), 1 - P(M0) (scrubbed_so2 is 0 under M0): units, median, 5%, 95%, mean, sd.
        With a release prior the average is over M0 and M1 renormalised (M2 keeps no
        draws). model="M1" or "M0": that hypothesis' posterior with r_hat, ess_bulk and
        ess_tail as well.
        """
        if model == "averaged":
            return averaged_summary(self)
        import arviz as az
        import pandas as pd
        post = self.posterior(model).posterior
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
                "diagnostics": self.diagnostics, "information": self.information,
                "log_evidence": {k: [float(a), float(b)] for k, (a, b) in self.log_evidence.items()},
                "caution": CAUTION}


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
        # netCDF attributes hold numbers, strings and flat arrays: a table (the melt at
        # the degassing pressure, sulfur_flags) is kept as its JSON text, like the prior
        ss.attrs[k] = (int(v) if isinstance(v, (bool, np.bool_))
                       else json.dumps(v) if isinstance(v, dict) else v)
    ss.attrs["tau"] = np.asarray(s.tau, dtype=float)
    ss.attrs["acceptance_fraction"] = np.asarray(s.acceptance_fraction, dtype=float)
    ss.attrs["log_evidence"] = float(run.log_z)
    ss.attrs["log_evidence_error"] = float(run.log_z_error)
    return idata


def _rhat_by_parameter(post, engine):
    """R-hat per parameter: split R-hat over emcee chains, between-run R-hat over SMC runs
    (whose particles are exchangeable, engines/run_rhat.py)."""
    import arviz as az
    if engine != "smc":
        rh = az.rhat(post)
        return {v: float(rh[v]) for v in post.data_vars}
    return {v: between_run_rhat(post[v].values.reshape(post.sizes["chain"], post.sizes["draw"], 1))
            for v in post.data_vars}

