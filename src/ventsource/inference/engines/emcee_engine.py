"""Posterior sampling with emcee's affine-invariant ensemble sampler.

Generic over a prior object (sample, log_prob, full, free_names) and a forward object
(ratios(theta_full) -> (n, m), NaN rows for failures).  Sampling happens in the prior's
own free-parameter space; emcee handles bounded supports because log_prob is -inf
outside (Foreman-Mackey et al. 2013, PASP 125:306).  The stretch move is affine
invariant (Goodman and Weare 2010, CAMCoS 5:65), so no rescaling is needed.

Run length: the chain grows in chunks; after each chunk the integrated
autocorrelation time tau is estimated (emcee.autocorr, Sokal 1997 windowing).  Burn-in
is burn_factor * tau; sampling stops when the post-burn ensemble holds target_ess
effective draws (n_walkers * n_kept / tau) and the chain is at least min_tau_factor
* tau long (a shorter chain cannot estimate tau reliably, emcee documentation), or
when max_steps is reached (then converged = False).  In addition the ArviZ split
R-hat over walkers must be <= rhat_target and the ArviZ bulk ESS of every parameter
>= target_ess (Vehtari et al. 2021, Bayesian Analysis 16:667), because the per-walker
tau of emcee does not see walkers stuck in different parts of a degenerate posterior.

Moves (default "de"): differential-evolution proposals (ter Braak 2006, Statistics
and Computing 16:239) mixed 80/20 with the snooker update (ter Braak and Vrugt 2008,
Statistics and Computing 18:435), both as implemented in emcee 3.  On the real
forward model (8 parameters, 3 ratios) the posterior is a thin curved sheet; the
stretch move's tau was ~200 steps with 64 walkers, DE+snooker ~60-110 steps with 256
walkers, ~120-250 with 128 and ~130-175 with 64 (the default for 8 parameters), i.e.
about 2x more ESS per forward evaluation than the stretch move (measured).  The snooker move loops over walkers in Python and
costs ~1-2 ms per call at 128 walkers.  rhat_target
defaults to 1.05, not 1.01: split R-hat over 128-256 short walkers reached 1.01 on the
real model only after ~20,000 steps (measured), i.e. minutes per measurement.

Initialisation (default "importance"): n_init_draws prior draws are weighted by the
square root of their likelihood (a posterior at temperature 2) and the walkers are drawn
from them without replacement with probability proportional to the weight (sampling-importance-resampling, Rubin 1988, Bayesian
Statistics 3:395, without replacement so that walkers are distinct and slightly
over-dispersed, as R-hat needs; Gelman and Rubin 1992, Statistical Science 7:457).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import emcee
import numpy as np

from ventsource.inference.likelihood import Likelihood
from ventsource.inference.engines.snooker_move import VectorSnookerMove

__all__ = ["SampleResult", "LogPosterior", "sample_posterior", "initial_walkers",
           "SamplerError"]


class SamplerError(RuntimeError):
    """The sampler could not start or run; one-line message."""


class LogPosterior:
    """Vectorised unnormalised log posterior log p(theta) + log L(theta).

    Counts forward evaluations and failed states (rows whose predictions contain NaN,
    i.e. no gas or solver failure).  __call__ returns an (n, 2 + m) array: column 0 the
    log posterior, column 1 the log-likelihood, then the m predicted ratios, so emcee
    stores likelihood and predictions as blobs (no recomputation afterwards).
    """

    def __init__(self, prior, forward, likelihood: Likelihood):
        self.prior = prior
        self.forward = forward
        self.likelihood = likelihood
        self.n_forward_evals = 0
        self.n_failed = 0
        self.m = likelihood.n_predicted

    def evaluate(self, theta):
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        n = theta.shape[0]
        lp = np.asarray(self.prior.log_prob(theta), dtype=float).reshape(n)
        ll = np.full(n, -np.inf)
        pred = np.full((n, self.m), np.nan)
        ok = np.isfinite(lp)
        if ok.any():
            full = self.prior.full(theta[ok])
            p = np.asarray(self.forward.ratios(full), dtype=float).reshape(ok.sum(), self.m)
            self.n_forward_evals += int(ok.sum())
            self.n_failed += int(np.isnan(p).any(axis=1).sum())
            pred[ok] = p
            ll[ok] = self.likelihood(p)
        post = lp + ll
        post[~np.isfinite(post)] = -np.inf
        return post, ll, pred

    def __call__(self, theta):
        post, ll, pred = self.evaluate(theta)
        return np.column_stack([post, post, ll, pred])


class TransformedLogPosterior(LogPosterior):
    """The same posterior in the unbounded space u = T(theta) (logit for two-sided bounds,
    log for one-sided), density p(theta(u)) |d theta / d u|.  The stretch move is affine
    invariant but not invariant under nonlinear maps; on [0, 1] fractions and log-uniform
    nuisance parameters the unbounded space removes hard walls and long one-sided tails
    (common practice, no source).  __call__ returns [log p_u, log p_theta, log L, pred]."""

    def __init__(self, prior, forward, likelihood, transform):
        super().__init__(prior, forward, likelihood)
        self.transform = transform

    def __call__(self, u):
        u = np.atleast_2d(np.asarray(u, dtype=float))
        theta, logj = self.transform.inverse(u)
        post, ll, pred = self.evaluate(theta)
        return np.column_stack([post + logj, post, ll, pred])


@dataclass
class SampleResult:
    """Post-burn-in ensemble draws and run statistics."""

    free_names: tuple
    chain: np.ndarray          # (n_walkers, n_draws, d) free parameters
    log_posterior: np.ndarray  # (n_walkers, n_draws)
    log_likelihood: np.ndarray  # (n_walkers, n_draws)
    predictions: np.ndarray    # (n_walkers, n_draws, m)
    tau: np.ndarray            # (d,) integrated autocorrelation time, steps
    burn: int
    n_steps: int
    thin: int
    converged: bool
    acceptance_fraction: np.ndarray
    n_forward_evals: int
    n_failed_states: int
    n_init_failed: int
    stats: dict = field(default_factory=dict)

    @property
    def flat(self) -> np.ndarray:
        return self.chain.reshape(-1, self.chain.shape[-1])


def initial_walkers(prior, logpost: LogPosterior, n_walkers: int, rng: np.random.Generator,
                    max_draws: int = 200_000, n_draws: int | None = None, method: str = "importance"):
    """Walker start points in the prior's space and the number of failed prior draws.

    method "prior": the first n_walkers prior draws with a finite posterior.
    method "importance": at least n_draws prior draws (default 20 per walker, at least
    2000), then n_walkers of the finite ones drawn without replacement with probability
    proportional to the square root of the likelihood (see module doc).
    """
    if method not in ("prior", "importance"):
        raise SamplerError(f"initialisation {method!r} unknown; use 'importance' or 'prior'")
    want = n_walkers if method == "prior" else max(n_walkers, int(n_draws or max(20 * n_walkers, 2000)))
    keep, keep_ll, n_bad, n_drawn = [], [], 0, 0
    batch = max(4 * n_walkers, 64) if method == "prior" else want
    while sum(len(k) for k in keep) < n_walkers or n_drawn < want:
        if n_drawn >= max(max_draws, want):
            raise SamplerError(
                f"only {sum(len(k) for k in keep)} of {n_drawn} prior draws have a finite likelihood "
                f"(need {n_walkers} walkers); the measurement is outside what this prior and model can produce")
        th = np.asarray(prior.sample(rng, batch), dtype=float)
        post, ll, _ = logpost.evaluate(th)
        good = np.isfinite(post)
        n_bad += int((~good).sum())
        n_drawn += batch
        keep.append(th[good])
        keep_ll.append(ll[good])
        batch = max(4 * n_walkers, 64)
    th = np.concatenate(keep)
    if method == "prior":
        return th[:n_walkers], n_bad
    ll = np.concatenate(keep_ll)
    # tempered weights L^(1/2): the start is the posterior at temperature 2, over-dispersed
    # on purpose (Gelman and Rubin 1992); with L^1 the differential-evolution ensemble
    # started too narrow and a linear-Gaussian posterior sd came out 6 % small (measured)
    w = np.exp(0.5 * (ll - ll.max()))
    # without replacement needs at least n_walkers non-zero weights
    w = np.maximum(w, 1e-300)
    idx = rng.choice(th.shape[0], n_walkers, replace=False, p=w / w.sum())
    return th[idx], n_bad


def _diagnostics(chain_twd, rhat_target=np.inf):
    """(max split R-hat, min bulk ESS) over parameters; chain (steps, walkers, d).
    The ESS is skipped (NaN) when R-hat already fails rhat_target: the run goes on
    either way, and the ESS of the final draws is reported by the summary."""
    import arviz as az
    x = np.swapaxes(np.asarray(chain_twd), 0, 1)
    if x.shape[1] < 4:
        return np.inf, 0.0
    ds = az.convert_to_dataset(x)
    rhat = float(np.nanmax(az.rhat(ds)["x"].values))
    if rhat > rhat_target:
        return rhat, float("nan")
    return rhat, float(np.nanmin(az.ess(ds, method="bulk")["x"].values))


def _moves(moves):
    if moves is None or (isinstance(moves, str) and moves == "de"):
        return [(emcee.moves.DEMove(), 0.8), (VectorSnookerMove(), 0.2)]
    if isinstance(moves, str):
        if moves == "stretch":
            return None
        if moves == "kde":
            return [(emcee.moves.KDEMove(), 0.5), (emcee.moves.DEMove(), 0.5)]
        raise SamplerError(f"moves {moves!r} unknown; use 'de', 'stretch', 'kde' or a list of emcee moves")
    return moves


def sample_posterior(prior, forward, likelihood: Likelihood, seed: int = 0, n_walkers: int | None = None,
                     target_ess: float = 2000.0, max_steps: int = 20000, chunk: int = 200,
                     burn_factor: float = 3.0, min_tau_factor: float = 30.0, moves="de",
                     space: str = "unbounded", init: str = "importance", n_init_draws: int | None = None,
                     rhat_target: float = 1.05) -> SampleResult:
    """Run emcee until the target ESS is reached (or max_steps).

    seed seeds both the initial positions (numpy Generator) and emcee's own RandomState.
    space: "unbounded" (walk in u = logit/log of the bounded parameters, bounds from
    bridge.support_bounds; identity where unknown) or "prior" (walk in the prior's own
    space, -inf outside the support).  Draws are always returned in the prior's space.
    moves: "de" (default), "stretch", "kde" or an emcee moves list.  init: "importance"
    (default) or "prior"; n_init_draws prior draws for "importance".  rhat_target: stop
    only when the split R-hat of every parameter is at most this (see module doc).
    """
    from ventsource.inference.evidence.bridge import Transform, support_bounds
    rng = np.random.default_rng(seed)
    d = len(prior.free_names)
    n_walkers = _walker_count(n_walkers, d)
    if space not in ("unbounded", "prior"):
        raise SamplerError(f"sampling space {space!r} unknown; use 'unbounded' or 'prior'")
    tr = Transform(support_bounds(prior)) if space == "unbounded" else None
    logpost = LogPosterior(prior, forward, likelihood) if tr is None else \
        TransformedLogPosterior(prior, forward, likelihood, tr)
    p0, n_init_bad = initial_walkers(prior, logpost, n_walkers, rng, n_draws=n_init_draws, method=init)
    n_init_evals = logpost.n_forward_evals
    if tr is not None:
        p0 = tr.forward(p0)
        if not np.all(np.isfinite(p0)):
            raise SamplerError("a prior draw lies exactly on a support bound; cannot map it to the unbounded space")
    sampler = emcee.EnsembleSampler(n_walkers, d, logpost, vectorize=True, moves=_moves(moves))
    # emcee draws its proposals from its own RandomState: seed it from our Generator
    sampler.random_state = np.random.RandomState(int(rng.integers(2**32 - 1))).get_state()
    progress = _run_in_chunks(sampler, p0, max_steps, chunk, burn_factor, min_tau_factor, target_ess,
                              rhat_target)
    info = {"n_init_failed": n_init_bad, "n_init_evals": n_init_evals, "moves": str(moves), "init": init,
            "seed": seed, "space": space}
    return _sample_result(prior, sampler, logpost, tr, likelihood.n_predicted, progress, burn_factor, info)


def _walker_count(n_walkers, d):
    """The ensemble size: the default for d free parameters, made even, at least 2 d."""
    if d == 0:
        raise SamplerError("prior has no free parameters to sample")
    if n_walkers is None:
        # the R-hat stop needs ~5000 steps on the real model whatever the ensemble size
        # (measured: 64, 128, 256 walkers), so the cost grows with the walkers: 8 per
        # parameter, at least 48: with 32 walkers on a 3-parameter reduction of the real
        # model the 200-replicate SBC rank test of scrubbed_so2 failed (p = 0.006), with 48 it
        # passed (measured)
        n_walkers = max(48, 8 * d)
    n_walkers = int(n_walkers) + int(n_walkers) % 2
    if n_walkers < 2 * d:
        raise SamplerError(f"n_walkers={n_walkers} must be at least twice the number of free parameters ({d})")
    return n_walkers


def _run_in_chunks(sampler, state, max_steps, chunk, burn_factor, min_tau_factor, target_ess, rhat_target):
    """Run the ensemble chunk by chunk until the ESS and R-hat targets hold (or max_steps);
    returns n_steps, tau, rhat, ess_min and converged."""
    n_walkers, d = sampler.nwalkers, sampler.ndim
    converged = False
    tau = np.full(d, np.nan)
    n_steps = 0
    rhat = np.inf
    ess_min = 0.0
    while n_steps < max_steps:
        step = min(chunk, max_steps - n_steps)
        state = sampler.run_mcmc(state, step, progress=False)
        n_steps += step
        tau = sampler.get_autocorr_time(tol=0, quiet=True)
        tmax = float(np.nanmax(tau)) if np.all(np.isfinite(tau)) else np.inf
        # grow the chunk with the chain so the diagnostic cost stays modest
        chunk = max(chunk, n_steps // 4)
        if not np.isfinite(tmax):
            continue
        burn = int(np.ceil(burn_factor * tmax))
        ess = n_walkers * max(n_steps - burn, 0) / tmax
        if ess >= target_ess and n_steps >= min_tau_factor * tmax:
            rhat, ess_min = _diagnostics(sampler.get_chain(discard=burn), rhat_target)
            if rhat <= rhat_target and ess_min >= target_ess:
                converged = True
                break
    return {"n_steps": n_steps, "tau": tau, "rhat": rhat, "ess_min": ess_min, "converged": converged}


def _sample_result(prior, sampler, logpost, tr, m, progress, burn_factor, info) -> SampleResult:
    """Draws after burn-in, mapped back to the prior's space, with their blobs and statistics."""
    n_walkers, d = sampler.nwalkers, sampler.ndim
    tau, n_steps, converged = progress["tau"], progress["n_steps"], progress["converged"]
    tmax = float(np.nanmax(tau)) if np.all(np.isfinite(tau)) else float(n_steps) / 10.0
    burn = min(int(np.ceil(burn_factor * tmax)), n_steps // 2)
    chain = np.swapaxes(sampler.get_chain(discard=burn), 0, 1)
    if tr is not None:
        chain = tr.inverse(chain.reshape(-1, d))[0].reshape(chain.shape)
    blobs = np.asarray(sampler.get_blobs(discard=burn), dtype=float).reshape(-1, n_walkers, 2 + m)
    lpost = blobs[:, :, 0].T   # log posterior density in the prior's space
    ll = blobs[:, :, 1].T
    pred = np.swapaxes(blobs[:, :, 2:], 0, 1)
    ess_est = n_walkers * (n_steps - burn) / tmax
    stats = {"n_forward_evals": logpost.n_forward_evals, "n_failed_states": logpost.n_failed,
             "n_init_failed": info["n_init_failed"], "n_init_evals": info["n_init_evals"], "tau_max": tmax,
             "rhat_max": progress["rhat"], "ess_bulk_min": progress["ess_min"], "moves": info["moves"],
             "init": info["init"], "burn": burn, "n_steps": n_steps,
             "n_walkers": n_walkers, "ess_estimate": ess_est, "converged": converged,
             "mean_acceptance": float(np.mean(sampler.acceptance_fraction)), "seed": info["seed"],
             "space": info["space"]}
    return SampleResult(free_names=tuple(prior.free_names), chain=chain, log_posterior=lpost,
                        log_likelihood=ll, predictions=pred, tau=np.asarray(tau), burn=burn,
                        n_steps=n_steps, thin=1, converged=converged,
                        acceptance_fraction=np.asarray(sampler.acceptance_fraction),
                        n_forward_evals=logpost.n_forward_evals, n_failed_states=logpost.n_failed,
                        n_init_failed=info["n_init_failed"], stats=stats)
