"""One measurement by tempered SMC, the scrubbed fraction integrated out.

The sampled space holds every free parameter except scrubbed_so2. For each
particle one forward solve gives the magmatic gas, and from it L0 (no scrubbing)
and L1 (scrubbing, s integrated over its prior; see so2_marginal.py). The SMC
target is the model-averaged posterior

    p(phi | data) ~ pi(phi) [pi0 L0(phi) + (1 - pi0) L1(phi)],

whose evidence is pi0 Z0 + (1 - pi0) Z1. The model indicator is summed out
exactly, so P(M0 | data) is the posterior mean of each particle's responsibility
pi0 L0 / (pi0 L0 + (1 - pi0) L1) (a Rao-Blackwellised estimate), and log Z0, log Z1
follow from log Z and P(M0). Each of the independent runs gives its own P(M0);
their spread gives the Monte Carlo error. The "if scrubbed" posterior (M1) is the
population reweighted by 1 - responsibility, with s drawn from p(s | phi, data).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ventsource.inference.engines.smc_engine import SMCResult, tempered_smc
from ventsource.inference.evidence.bridge import Transform, support_bounds
from ventsource.inference.hypotheses.release_marginal import ReleaseMarginal
from ventsource.inference.hypotheses.so2_marginal import ScrubbingMarginal
from ventsource.ascent import observables
from ventsource.ascent.scrubbing import scrub


@dataclass
class MeasurementDraws:
    """Posterior draws of one model, shaped (runs, draws, ...)."""

    theta: np.ndarray        # free parameters of the full prior (M1 names, or M0 names)
    predictions: np.ndarray  # (R, N, m) predicted ratios (forward model's columns)
    log_like: np.ndarray     # (R, N)
    log_post: np.ndarray     # (R, N) log prior + log likelihood (prior space)
    kish_ess: np.ndarray     # (R,) Kish ESS of the reweighting that produced the draws


class ModelAveragedTarget:
    """log pi0 L0 + pi1 L1 [+ pi2 L2] for particles in the M0 parameter space (no s, no r).

    Without a release prior (prior.release None) pi1 = 1 - pi0 and the target is the
    two-hypothesis one, number for number; with it pi0, pi1, pi2 come from
    ReleasePrior.probabilities(pi0) and L2 integrates the released fraction r out."""

    def __init__(self, prior, forward, likelihood, pi0, scrub_name="scrubbed_so2"):
        self.prior0 = prior.with_fixed(scrub_name, 0.0)
        self.forward = forward
        self.marginal = ScrubbingMarginal(likelihood, forward.ratio_names, forward.product,
                                          prior.distributions[scrub_name])
        release = getattr(prior, "release", None)
        self.release = None
        if release is None:
            self.log_pi0, self.log_pi1 = np.log(pi0), np.log1p(-pi0)
        else:
            self.log_pi0, self.log_pi1, self.log_pi2 = np.log(release.probabilities(pi0))
            self.release = ReleaseMarginal(likelihood, forward.ratio_names, forward.product,
                                           release.distribution)
        names = tuple(self.prior0.parameter_names)
        self._h2s_return = names.index("h2s_return") if "h2s_return" in names else None

    def h2s_return(self, full):
        return full[:, self._h2s_return] if self._h2s_return is not None else 1.0

    def __call__(self, phi):
        full = self.prior0.full(phi)
        st = self.forward.state(full, saturation=self.forward.style == "open")
        gas = st["gas"]
        bad = st["status"] != 0
        ll0, ll1 = self.marginal.log_likelihoods(np.where(bad[:, None], 1.0, gas), self.h2s_return(full))
        ll0[bad] = -np.inf
        ll1[bad] = -np.inf
        mix = np.logaddexp(self.log_pi0 + ll0, self.log_pi1 + ll1)
        aux = {"ll0": ll0, "ll1": ll1, "gas": np.where(bad[:, None], np.nan, gas)}
        if self.release is not None:
            _, ll2 = self.release.log_likelihoods(np.where(bad[:, None], 1.0, gas))
            ll2[bad] = -np.inf
            mix = np.logaddexp(mix, self.log_pi2 + ll2)
            aux["ll2"] = ll2
        return mix, aux


def run_smc(prior, forward, likelihood, pi0, seed, n_particles, n_runs, scrub_name="scrubbed_so2",
            ess_target=0.5, max_moves=30):
    """SMC on the model-averaged target; returns (SMCResult, ModelAveragedTarget)."""
    target = ModelAveragedTarget(prior, forward, likelihood, pi0, scrub_name)
    p0 = target.prior0
    transform = Transform(support_bounds(p0))
    res = tempered_smc(p0.log_prob, target, p0.sample, transform, n_particles=n_particles,
                       n_runs=n_runs, seed=seed, ess_target=ess_target, max_moves=max_moves)
    return res, target


def model_probabilities(res: SMCResult, pi0):
    """Per run: P(M0 | data) (mean responsibility), log Z0, log Z1."""
    ll0, ll1 = res.aux["ll0"], res.aux["ll1"]
    log_r0 = np.log(pi0) + ll0 - np.logaddexp(np.log(pi0) + ll0, np.log1p(-pi0) + ll1)
    r0 = np.exp(np.where(np.isfinite(log_r0), log_r0, -np.inf))
    p0 = r0.mean(axis=1)
    with np.errstate(divide="ignore"):
        log_z0 = res.log_z + np.log(p0) - np.log(pi0)
        log_z1 = res.log_z + np.log1p(-p0) - np.log1p(-pi0)
    return p0, r0, log_z0, log_z1


def _resample_rows(weights, rng):
    """Systematic resampling of one run's particles by weights (any scale)."""
    w = np.where(np.isfinite(weights), weights, 0.0)
    total = w.sum()
    n = w.size
    if total <= 0:
        return np.arange(n), 0.0
    w = w / total
    c = np.cumsum(w)
    c[-1] = 1.0
    return np.searchsorted(c, (rng.random() + np.arange(n)) / n), float(1.0 / np.sum(w * w))


def model_draws(res, target, r0, prior, rng, scrubbed: bool, scrub_name="scrubbed_so2"):
    """Posterior draws of M1 ("if scrubbed", s drawn from its conditional) or of M0."""
    R, N, _ = res.theta.shape
    names = tuple(prior.free_names)
    j_s = names.index(scrub_name)
    thetas, preds, lls, lps, kish = [], [], [], [], []
    for r in range(R):
        idx, ess = _resample_rows(1.0 - r0[r] if scrubbed else r0[r], rng)
        phi, gas = res.theta[r, idx], res.aux["gas"][r, idx]
        full0 = target.prior0.full(phi)
        s = (target.marginal.sample(gas, rng, target.h2s_return(full0)) if scrubbed
             else np.zeros(N))
        theta = np.insert(phi, j_s, s, axis=1) if scrubbed else phi
        g = scrub(gas, s, target.forward.product, 0.0, target.h2s_return(full0)) if scrubbed else gas
        pred = observables.ratios(g, target.forward.ratio_names)
        ll = target.marginal.lik(pred)
        lp = (prior.log_prob(theta) if scrubbed else target.prior0.log_prob(phi)) + ll
        thetas.append(theta); preds.append(pred); lls.append(ll); lps.append(lp); kish.append(ess)
    perm = rng.permuted(np.tile(np.arange(N), (R, 1)), axis=1)  # resampled rows come sorted
    pick = lambda a: np.stack([a[r][perm[r]] for r in range(R)])  # noqa: E731
    return MeasurementDraws(pick(thetas), pick(preds), pick(lls), pick(lps), np.array(kish))


def model_averaged_quantiles(p_m0, scrubbed_draws, qs=(0.05, 0.5, 0.95)):
    """Quantiles of (point mass at 0 with weight P(M0)) + (1 - P(M0)) x M1 posterior of s."""
    x = np.sort(np.asarray(scrubbed_draws, dtype=float).reshape(-1))
    out = []
    for q in qs:
        if p_m0 is None or not np.isfinite(p_m0):
            out.append(float("nan"))
        elif q <= p_m0 or x.size == 0:
            out.append(0.0)
        else:
            out.append(float(np.quantile(x, (q - p_m0) / (1.0 - p_m0))))
    return out
