"""One model run with the emcee engine: sample, bridge-sample the evidence, check the
posterior predictive (used by one_measurement and hypotheses_emcee)."""
from __future__ import annotations

import numpy as np

from ventsource.inference.evidence.bridge import bridge_sampling, support_bounds
from ventsource.inference.hypotheses.model_choice import predictive_check
from ventsource.inference.engines.emcee_engine import LogPosterior, sample_posterior
from ventsource.inference.row.result import ModelRun


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
