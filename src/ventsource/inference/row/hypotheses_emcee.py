"""Three hypotheses with the emcee engine: released stored sulfur (M2) as a third run.

M0 and M1 run as without a release prior (one_measurement). M2 samples the free
parameters of M0 (scrubbed_so2 fixed to 0) and the released fraction r
(`released_so2`, prior from the prior file's [hypotheses] table): the forward gas's
SO2 is multiplied by 1 + r (release_marginal.released_gas) before the ratios, and the
same emcee sampling, bridge-sampling evidence and predictive check as for M0 and M1
give its log evidence and its check. P(M0), P(M1), P(M2) = pi_k Z_k / sum_j pi_j Z_j
with delta-method errors (model_choice.posterior_model_probabilities), the prior
probabilities from ReleasePrior.probabilities(pi0). M2 draws from its own random
stream, so M0 and M1 keep the numbers they have without a release prior.

Budget draws (per draw: hypothesis, magmatic SO2/CO2, SO2 factor 1, 1 - s or 1 + r)
come from the three posteriors mixed in the proportions P(Mk | data), with the
magmatic gas recomputed by the forward model for the picked draws.
"""
from __future__ import annotations

import numpy as np

from ventsource.ascent import observables
from ventsource.chemistry.species import INDEX
from ventsource.inference.engines.emcee_engine import SamplerError
from ventsource.inference.hypotheses.model_choice import posterior_model_probabilities
from ventsource.inference.row.emcee_model import _run_model
from ventsource.inference.row.result import InferenceError, ModelRun
from ventsource.inference.hypotheses.release_marginal import released_gas

RELEASE_NAME = "released_so2"
NAMES = ["M0 magmatic", "M1 scrubbed", "M2 released"]
_SO2, _CO2 = INDEX["SO2"], INDEX["CO2"]


class ReleaseExtendedPrior:
    """M2's prior: the free parameters of the M0 prior, then r with the release prior."""

    def __init__(self, prior0, release):
        self.prior0, self.dist = prior0, release.distribution
        self.name = f"{getattr(prior0, 'name', '')} + {RELEASE_NAME}"
        self.free_names = tuple(prior0.free_names) + (RELEASE_NAME,)
        self.parameter_names = tuple(prior0.parameter_names) + (RELEASE_NAME,)
        self.likelihood = getattr(prior0, "likelihood", {})

    @property
    def free_bounds(self):
        return np.vstack([np.asarray(self.prior0.free_bounds, dtype=float).reshape(-1, 2),
                          [[self.dist.lower, self.dist.upper]]])

    def sample(self, rng, n):
        return np.column_stack([self.prior0.sample(rng, n), self.dist.sample(rng, n)])

    def log_prob(self, theta):
        th = np.atleast_2d(np.asarray(theta, dtype=float))
        return self.prior0.log_prob(th[:, :-1]) + self.dist.log_pdf(th[:, -1])

    def full(self, theta):
        th = np.atleast_2d(np.asarray(theta, dtype=float))
        return np.column_stack([self.prior0.full(th[:, :-1]), th[:, -1]])

    def to_dict(self):
        out = self.prior0.to_dict()
        out["model"] = f"M2: {RELEASE_NAME} sampled with the [hypotheses] prior"
        return out


class ReleasedForward:
    """Ratios of the forward gas with SO2 x (1 + r); r is the last column of the input."""

    def __init__(self, forward):
        if not hasattr(forward, "state"):
            raise InferenceError("infer: the released-sulfur hypothesis (M2) needs a forward "
                                 "model with state() (ventsource.forward.model.ForwardModel)")
        self.forward = forward
        self.ratio_names = tuple(forward.ratio_names)

    def gas(self, full0):
        """Forward gas of M0 parameter rows; NaN rows where the magma gave no gas."""
        st = self.forward.state(full0, saturation=getattr(self.forward, "style", "closed") == "open")
        return np.where((st["status"] != 0)[:, None], np.nan, st["gas"])

    def ratios(self, full):
        full = np.atleast_2d(np.asarray(full, dtype=float))
        gas = self.gas(full[:, :-1])
        return observables.ratios(released_gas(gas, full[:, -1]), self.ratio_names)


def run_release_model(prior, forward, lik, seed, opt) -> ModelRun:
    """M2: emcee, bridge sampling and predictive check; Z2 = 0 when no state is finite."""
    prior2 = ReleaseExtendedPrior(prior.with_fixed(opt["scrub_name"], 0.0), prior.release)
    fw2 = ReleasedForward(forward)
    seeds = [int(x) for x in np.random.SeedSequence([int(seed), 0xE2]).generate_state(3)]
    try:
        return _run_model("M2", prior2, fw2, lik, seeds, opt)
    except SamplerError:
        return ModelRun("M2", prior2, None, None, None, -np.inf, 0.0)
    except ValueError as e:  # e.g. bridge sampling with too few usable draws
        raise InferenceError(f"infer: model M2: {str(e).splitlines()[0]}") from None


def three_hypotheses(runs, prior, pi0) -> dict:
    """The `hypotheses` summary of InferenceResult (same keys as the smc engine's, less
    the per-run ones, plus the log evidences)."""
    keys = ("M0", "M1", "M2")
    pis = prior.release.probabilities(pi0)
    lz = [runs[k].log_z for k in keys]
    lz_err = [runs[k].log_z_error for k in keys]
    p, err = posterior_model_probabilities(lz, lz_err, pis)
    run2 = runs["M2"]
    q = [float("nan")] * 3
    if run2.sample is not None:
        q = [float(x) for x in np.quantile(run2.sample.chain[:, :, -1], [0.05, 0.5, 0.95])]
    return {"names": list(NAMES), "p": p.tolist(), "error": err.tolist(),
            "prior": [float(x) for x in pis],
            "log_evidence": [[float(a), float(b)] for a, b in zip(lz, lz_err)],
            "released_so2_if_released": q,
            "m2_reproduces": bool(run2.check is not None and run2.check.reproduces)}


def budget_draws(runs, p, prior, forward, scrub_name, seed, max_draws=1000):
    """Per draw: hypothesis, magmatic SO2/CO2 (mol/mol), SO2 factor; None without draws.

    runs: ModelRun per "M0", "M1" (and "M2"); p: their posterior probabilities."""
    keys = ("M0", "M1", "M2")[:len(p)]
    p = np.nan_to_num(np.asarray(p, dtype=float))
    if not p.sum() > 0 or not hasattr(forward, "state"):
        return None
    rng = np.random.default_rng([int(seed), 0xB2])
    counts = rng.multinomial(max_draws, p / p.sum())
    j_s = tuple(prior.free_names).index(scrub_name)
    theta0, factor, model = [], [], []
    for k, (key, n) in enumerate(zip(keys, counts)):
        s = runs[key].sample
        if n == 0 or s is None:
            continue
        flat = s.chain.reshape(-1, s.chain.shape[-1])[rng.integers(0, s.chain.shape[0] * s.chain.shape[1], n)]
        if key == "M1":
            t, f = np.delete(flat, j_s, axis=1), 1.0 - flat[:, j_s]
        elif key == "M2":
            t, f = flat[:, :-1], 1.0 + flat[:, -1]
        else:
            t, f = flat, np.ones(n)
        theta0.append(t)
        factor.append(f)
        model.append(np.full(n, k))
    if not theta0:
        return None
    order = rng.permutation(sum(len(m) for m in model))
    theta0, factor, model = (np.concatenate(a)[order] for a in (theta0, factor, model))
    prior0 = prior.with_fixed(scrub_name, 0.0)
    gas = ReleasedForward(forward).gas(prior0.full(theta0))
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = gas[:, _SO2] / gas[:, _CO2]
    return {"model": model.astype(int), "so2_co2_magmatic": ratio, "so2_factor": factor}
