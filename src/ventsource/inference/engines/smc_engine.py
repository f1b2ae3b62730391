"""Adaptive tempered Sequential Monte Carlo with MCMC moves, several independent runs.

Targets pi(theta) L(theta)^beta for beta rising from 0 to 1 (Del Moral, Doucet and
Jasra 2006, J. R. Statist. Soc. B 68:411). The next beta is found by bisection so
that the conditional effective sample size of the incremental weights is a set
share of the particles (Zhou, Johansen and Aston 2016, J. Comput. Graph. Stat.
25:701); every stage resamples (systematic resampling, Kitagawa 1996) and then
rejuvenates with Metropolis moves in the unbounded space of the prior's support
(logit for two-sided bounds, log for one-sided ones, with the Jacobian): a random
walk with the particles' covariance, its scale adapted toward 0.25 acceptance,
alternating with differential-evolution moves drawn from the population frozen
at the start of the stage (ter Braak 2006, Statistics and Computing 16:239).
With move_rule "acceptance" the number of moves per stage is
ceil(log 0.05 / log(1 - acceptance)), capped, so that about 95 % of the particles move
at least once; with "jump", independence moves from a t fitted to the population join
them and the stage moves until the particles have decorrelated (_rejuvenate); "ridge"
does the same in coordinates fitted to straighten a bent posterior (ridge_move.py).

log Z is the sum over stages of the log mean incremental weight. The runs are
independent (own seeds, own temperature ladders) but advance in lockstep so that
each likelihood call sees the particles of every run at once: one large batch for
the forward model, and the same numbers whatever the number of worker processes.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ventsource.inference.engines.de_move import propose_de
from ventsource.inference.engines.independence_move import fit_mixture, propose_independent
from ventsource.inference.engines.random_walk_move import propose_random_walk
from ventsource.inference.engines.ridge_move import fit_ridge, propose_ridge_independent, propose_ridge_walk

__all__ = ["SMCResult", "SMCError", "tempered_smc"]


class SMCError(RuntimeError):
    """The SMC engine could not run; one-line message."""


@dataclass
class SMCResult:
    theta: np.ndarray          # (R, N, d) final equally weighted particles, prior space
    log_like: np.ndarray       # (R, N)
    aux: dict                  # name -> (R, N, ...) arrays carried with the particles
    log_z: np.ndarray          # (R,) log evidence per run
    n_stages: np.ndarray       # (R,)
    kish_ess_last: np.ndarray  # (R,) Kish ESS of the last stage's incremental weights
    distinct: np.ndarray       # (R,) distinct particles at the end
    n_evals: int
    n_failed: int
    acceptance: list = field(default_factory=list)  # mean acceptance per stage
    stage_log: list = field(default_factory=list)   # per stage: dict of (R,) diagnostics (stage_record)

    @property
    def log_z_mean_error(self):
        """(mean log Z over runs, its standard error from the between-run spread)."""
        r = self.log_z.size
        sd = float(np.std(self.log_z, ddof=1)) if r > 1 else float("nan")
        return float(np.mean(self.log_z)), sd / np.sqrt(r)

    def move_summary(self):
        """Per stage, averaged over the runs that moved: MCMC moves, their acceptance and
        the particles' summed squared jump (stage-start covariance units); the stage-0
        ancestors left at the end (fewest over runs). Plain lists, for diagnostics."""
        if not self.stage_log:
            return {}
        out = {k: [round(float(np.nanmean(rec[k])), 3) for rec in self.stage_log]
               for k in ("n_moves", "acceptance", "sq_jump")}
        out["ancestors_last"] = int(np.nanmin(self.stage_log[-1]["ancestors"]))
        return out


def _next_beta(beta, log_like, target):
    """Largest beta' in (beta, 1] whose incremental weights keep ESS >= target * N."""
    def ess(b):
        lw = (b - beta) * log_like
        lw = np.where(np.isfinite(lw), lw, -np.inf)
        w = np.exp(lw - lw.max())
        return w.sum() ** 2 / (w * w).sum() / log_like.size
    if ess(1.0) >= target:
        return 1.0
    lo, hi = beta, 1.0
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if ess(mid) >= target else (lo, mid)
        if hi - lo < 1e-10:
            break
    return max(lo, beta + 1e-12)


def _systematic(weights, rng):
    n = weights.size
    c = np.cumsum(weights)
    c[-1] = 1.0
    return np.searchsorted(c, (rng.random() + np.arange(n)) / n)


class _Population:
    """Particles of all runs with their cached log prior, log likelihood and extras."""

    def __init__(self, u, theta, log_prior, log_like, aux):
        self.u, self.theta, self.log_prior, self.log_like, self.aux = u, theta, log_prior, log_like, aux

    def take(self, idx):
        return _Population(self.u[idx], self.theta[idx], self.log_prior[idx], self.log_like[idx],
                           {k: v[idx] for k, v in self.aux.items()})

    def set_rows(self, rows, other):
        """Rows `rows` of every array from other (a population of len(rows) particles)."""
        for name in ("u", "theta", "log_prior", "log_like"):
            getattr(self, name)[rows] = getattr(other, name)
        for key in self.aux:
            self.aux[key][rows] = other.aux[key]

    def put(self, mask, other):
        for name in ("u", "theta", "log_prior", "log_like"):
            getattr(self, name)[mask] = getattr(other, name)[mask]
        for k in self.aux:
            if k in other.aux:
                self.aux[k][mask] = other.aux[k][mask]
            else:  # no proposal of this batch was evaluated: only rejected rows
                assert not np.any(mask & np.isfinite(other.log_like))


class _Evaluator:
    """theta -> (log prior, log likelihood, aux), counting evaluations."""

    def __init__(self, log_prior, log_like, transform):
        self.log_prior_fn, self.log_like_fn, self.transform = log_prior, log_like, transform
        self.n_evals = 0
        self.n_failed = 0

    def __call__(self, u):
        theta, log_j = self.transform.inverse(u)
        lp = np.asarray(self.log_prior_fn(theta), dtype=float)
        ll = np.full(u.shape[0], -np.inf)
        ok = np.isfinite(lp)
        aux = {}
        if ok.any():
            ll_ok, aux_ok = self.log_like_fn(theta[ok])
            self.n_evals += int(ok.sum())
            self.n_failed += int(np.sum(~np.isfinite(ll_ok)))
            ll[ok] = ll_ok
            for k, v in aux_ok.items():
                full = np.full((u.shape[0],) + v.shape[1:], np.nan, dtype=v.dtype if v.dtype.kind == "f" else float)
                full[ok] = v
                aux[k] = full
        return _Population(u, theta, lp + log_j, ll, aux)


def tempered_smc(log_prior, log_like, sample_prior, transform, n_particles=500, n_runs=4,
                 seed=0, ess_target=0.5, max_moves=30, min_moves=2, max_stages=200, on_stage=None,
                 move_rule="acceptance", proposal_components=1, final_moves=0):
    """Run n_runs independent tempered SMC samplers in lockstep.

    log_prior(theta) -> (n,); log_like(theta) -> ((n,), {name: (n, ...)}); sample_prior(rng,
    n) -> (n, d) prior draws; transform: ventsource.inference.evidence.bridge.Transform of
    the prior's support. on_stage(beta (R,), stages (R,)): called after each stage, for
    progress reports only (it gets copies; the runs' numbers do not depend on it).
    move_rule: "acceptance", "jump" or "ridge" (as "jump", in coordinates that straighten
    the population's bend: ridge_move.py), how long each stage moves and with what
    (_rejuvenate). proposal_components: t components of the "jump" rule's independence
    proposal once a run's independence moves accepted less than MIX_BELOW in a stage
    (before that, and with 1, one t; a mixture over k-means clusters: fit_mixture).
    final_moves: with "jump" or "ridge", a run whose last stage stopped at max_moves before
    its particles decorrelated moves on at beta = 1, up to final_moves more (_final_sweep).
    -> SMCResult."""
    if move_rule not in _MOVE_CYCLE:
        raise SMCError(f"unknown move_rule {move_rule!r}; known: {sorted(_MOVE_CYCLE)}")
    R, N = int(n_runs), int(n_particles)
    rngs = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(R)]
    theta0 = np.concatenate([sample_prior(rng, N) for rng in rngs])
    evaluate = _Evaluator(log_prior, log_like, transform)
    pop = evaluate(transform.forward(theta0))
    if not np.isfinite(pop.log_like).any():
        raise SMCError("no prior draw gives a finite likelihood (the model releases no usable gas)")
    beta, log_z, kish, stages = np.zeros(R), np.zeros(R), np.full(R, float(N)), np.zeros(R, dtype=int)
    scale = np.full(R, 2.38 / np.sqrt(pop.u.shape[1]))
    acc_hist, stage_log = [], []
    origin = np.arange(R * N)   # each particle's stage-0 ancestor (genealogy diagnostics)
    mixed = np.zeros(R, dtype=bool)   # runs whose independence proposal is the mixture
    while np.any(beta < 1.0):
        active = np.flatnonzero(beta < 1.0)
        if stages.max() >= max_stages:
            raise SMCError(f"tempering did not reach beta = 1 in {max_stages} stages")
        idx = _reweight(pop.log_like, active, beta, log_z, kish, ess_target, rngs, N)
        stages[active] += 1
        parents = np.array([np.unique(idx[r * N:(r + 1) * N]).size for r in range(R)])
        origin = origin[idx]
        pop = pop.take(idx)
        comps = {r: proposal_components if mixed[r] else 1 for r in active}
        acc, moves = _rejuvenate(pop, active, beta, N, scale, rngs, evaluate, max_moves, min_moves,
                                 move_rule, comps)
        for r in active:   # each run from its own moves only
            mixed[r] |= moves[r][3].get("independent", 1.0) < MIX_BELOW
        acc_hist.append(acc)
        stage_log.append(stage_record(active, beta, kish, parents, origin, moves, R, N))
        if on_stage is not None:
            on_stage(beta.copy(), stages.copy())
    if final_moves and move_rule in JUMP_RULES:
        stage_log += _final_sweep(pop, stage_log, N, scale, rngs, evaluate, max_moves, final_moves, min_moves,
                                  {r: proposal_components if mixed[r] else 1 for r in range(R)}, origin, move_rule)
    shape = (R, N)
    distinct = np.array([np.unique(pop.u[r * N:(r + 1) * N], axis=0).shape[0] for r in range(R)])
    return SMCResult(theta=pop.theta.reshape(R, N, -1), log_like=pop.log_like.reshape(shape),
                     aux={k: v.reshape(shape + v.shape[1:]) for k, v in pop.aux.items()},
                     log_z=log_z, n_stages=stages, kish_ess_last=kish, distinct=distinct,
                     n_evals=evaluate.n_evals, n_failed=evaluate.n_failed, acceptance=acc_hist,
                     stage_log=stage_log)


def _reweight(log_like, active, beta, log_z, kish, ess_target, rngs, N):
    """Each active run's next temperature, its log Z increment and Kish ESS (updating beta,
    log_z and kish in place); -> the resampled particle indices (others keep their own)."""
    idx = np.arange(log_like.size)
    for r in active:
        sl = slice(r * N, (r + 1) * N)
        ll = log_like[sl]
        new = _next_beta(beta[r], ll, ess_target)
        lw = np.where(np.isfinite(ll), (new - beta[r]) * ll, -np.inf)
        top = lw.max()
        w = np.exp(lw - top)
        log_z[r] += top + np.log(w.mean())
        kish[r] = w.sum() ** 2 / (w * w).sum()
        idx[sl] = r * N + _systematic(w / w.sum(), rngs[r])
        beta[r] = new
    return idx


def _final_sweep(pop, stage_log, N, scale, rngs, evaluate, max_moves, final_moves, min_moves, components,
                 origin, move_rule="jump"):
    """More moves at beta = 1 for the runs whose last tempering stage hit max_moves (their
    particles had not jumped d each; the jump rule's test, _moves_wanted), up to final_moves,
    stopping when they have. Each run decides from its own last stage, so a run's numbers
    do not depend on the others. MCMC at the target after the last reweighting keeps it
    invariant (Del Moral, Doucet and Jasra 2006: any number of moves may follow a stage).
    -> [the sweep's stage record (beta 1, no resampling)], or [] when no run needed it."""
    R = len(rngs)
    last = np.full(R, np.nan)
    for rec in stage_log:   # each run's own last stage (runs end at different stages)
        last = np.where(np.isfinite(rec["n_moves"]), rec["n_moves"], last)
    capped = np.flatnonzero(last >= max_moves)
    if capped.size == 0:
        return []
    beta = np.ones(R)
    _, moves = _rejuvenate(pop, capped, beta, N, scale, rngs, evaluate, final_moves, min_moves, move_rule,
                           components)
    return [stage_record(capped, beta, np.full(R, np.nan), np.full(R, float(N)), origin, moves, R, N)]


def stage_record(active, beta, kish, parents, origin, moves, R, N):
    """One stage's diagnostics, (R,) arrays (NaN for runs that had finished): beta, the
    Kish ESS of the incremental weights, distinct parents kept by the resampling, distinct
    stage-0 ancestors, the number of moves, their mean acceptance and the particles' summed
    squared jump in units of the stage-start covariance (Mahalanobis; a fresh independent
    draw from the same distribution lies 2 d away on average)."""
    rec = {k: np.full(R, np.nan) for k in ("beta", "kish_ess", "parents", "ancestors", "n_moves",
                                           "acceptance", "sq_jump", "acc_independent", "acc_rw", "acc_de",
                                           "acc_ridge_independent", "acc_ridge_rw")}
    for r in active:
        rec["beta"][r], rec["kish_ess"][r], rec["parents"][r] = beta[r], kish[r], parents[r]
        rec["ancestors"][r] = np.unique(origin[r * N:(r + 1) * N]).size
        rec["n_moves"][r], rec["acceptance"][r], rec["sq_jump"][r], kinds = moves[r]
        for kind, rate in kinds.items():
            rec["acc_" + kind][r] = rate
    return rec


def _rejuvenate(pop, active, beta, N, scale, rngs, evaluate, max_moves, min_moves, move_rule="acceptance",
                components=1):
    """Metropolis moves of the active runs' particles; returns (the mean acceptance, per run
    (moves, mean acceptance, mean summed squared Mahalanobis jump per particle)).

    Each run sets its own number of moves from its own particles, so a run's numbers do
    not depend on the other runs (nor on how many there are). move_rule "acceptance":
    random-walk and DE moves alternate, ceil(log 0.05 / log(1 - acceptance)) of them (the
    acceptance of the first two), so that about 95 % of the particles move at least once
    (Drovandi and Pettitt 2011, Biometrics 67:225; from memory). "jump": independence,
    random-walk, independence, DE moves in turn until DECORRELATED of the run's particles
    have jumped, summed over the stage's moves, a squared Mahalanobis distance of d (in
    the stage-start covariance; two independent draws lie 2 d apart on average): the
    expected squared jump distance as the measure of a kernel's mixing follows Fearnhead
    and Taylor (2013, Bayesian Analysis 8:411; from memory), the per-particle target is
    ours. Measured in docs/running.md."""
    frozen, chol, fits = _stage_fits(pop, active, N, move_rule, components, rngs)
    n_moves = {r: (max_moves if move_rule in JUMP_RULES else min_moves) for r in active}
    rates = {r: [] for r in active}
    by_kind = {r: {} for r in active}
    jump = {r: np.zeros(N) for r in active}
    k = 0
    while True:
        moving = [r for r in active if k < n_moves[r]]
        if not moving:
            break
        rows = np.concatenate([np.arange(r * N, (r + 1) * N) for r in moving])
        run_of = np.repeat(moving, N)
        b = beta[run_of]
        sub = pop.take(rows)
        kind = _MOVE_CYCLE[move_rule][k % len(_MOVE_CYCLE[move_rule])]
        prop_u, log_corr = _propose(kind, sub.u, run_of, moving, N, frozen, chol, fits, scale, rngs)
        prop = evaluate(prop_u)
        log_ratio = (prop.log_prior + b * _finite(prop.log_like)) - (sub.log_prior + b * _finite(sub.log_like))
        log_ratio = np.where(np.isfinite(prop.log_prior) & (np.isfinite(prop.log_like) | (b == 0)),
                             log_ratio + log_corr, -np.inf)
        draws = np.concatenate([rngs[r].random(N) for r in moving])
        accept = np.log(draws) < log_ratio
        old_u = sub.u.copy()
        sub.put(accept, prop)
        pop.set_rows(rows, sub)
        for j, r in enumerate(moving):
            sl = slice(j * N, (j + 1) * N)
            rates[r].append(float(accept[sl].mean()))
            by_kind[r].setdefault(kind, []).append(rates[r][-1])
            step = np.linalg.solve(chol[r], (sub.u[sl] - old_u[sl]).T)
            jump[r] += np.sum(step * step, axis=0)
            if kind in ("rw", "ridge_rw"):  # adapt the random-walk scale toward 0.25 acceptance
                scale[r] *= np.exp(rates[r][-1] - 0.25)
        k += 1
        for r in moving:
            n_moves[r] = _moves_wanted(move_rule, k, n_moves[r], rates[r], jump[r], pop.u.shape[1],
                                       min_moves, max_moves)
    moves = {r: (len(rates[r]), float(np.mean(rates[r])), float(jump[r].mean()),
                 {kind: float(np.mean(v)) for kind, v in by_kind[r].items()}) for r in active}
    return float(np.mean([rates[r][-1] for r in active])), moves


def _stage_fits(pop, active, N, move_rule, components, rngs):
    """Per active run: its stage-start particles, their scaled Cholesky factor and the
    independence proposal's fit (the mixture only for "jump" runs given K > 1)."""
    frozen = {r: pop.u[r * N:(r + 1) * N].copy() for r in active}
    chol = {r: _scaled_cholesky(frozen[r]) for r in active}
    comps = components if isinstance(components, dict) else dict.fromkeys(active, components)
    if move_rule == "ridge":
        fits = {r: fit_ridge(frozen[r]) for r in active}
    else:
        fits = {r: fit_mixture(frozen[r], chol[r], comps.get(r, 1) if move_rule == "jump" else 1, rngs[r])
                for r in active}
    return frozen, chol, fits


_MOVE_CYCLE = {"acceptance": ("rw", "de"), "jump": ("independent", "rw", "independent", "de"),
               "ridge": ("ridge_independent", "ridge_rw", "ridge_independent", "de")}
JUMP_RULES = ("jump", "ridge")   # rules that move until the particles have decorrelated
DECORRELATED = 0.9   # share of particles that must have jumped d (JUMP_RULES)
# a run's independence proposal becomes the mixture (proposal_components) once one t fitted to
# its particles had its proposals accepted less often than this in a stage: one t then
# covers a curved posterior with a much wider ellipsoid (measured in DEVELOPERS.md)
MIX_BELOW = 0.05


def _propose(kind, u, run_of, moving, N, frozen, chol, fits, scale, rngs):
    """(proposals, log proposal-density correction) of one move of the given kind."""
    if kind == "independent":
        return propose_independent(u, run_of, {r: fits[r] for r in moving}, rngs)
    if kind == "ridge_independent":
        return propose_ridge_independent(u, run_of, {r: fits[r] for r in moving}, rngs)
    if kind == "ridge_rw":
        return propose_ridge_walk(u, run_of, {r: fits[r] for r in moving}, scale, rngs), 0.0
    if kind == "rw":
        return propose_random_walk(u, run_of, {r: chol[r] for r in moving}, scale, rngs), 0.0
    return propose_de(u, run_of, np.concatenate([frozen[r] for r in moving]), moving, N, rngs), 0.0


def _moves_wanted(move_rule, k, current, rates, jump, d, min_moves, max_moves):
    """The run's number of moves this stage, revised after its k-th move."""
    if move_rule in JUMP_RULES:
        done = k >= min_moves and np.mean(jump >= d) >= DECORRELATED
        return k if done else max_moves
    if k != 2:
        return current
    a = max(min(rates[-1], 0.99), 1e-3)
    return int(min(max_moves, max(min_moves, np.ceil(np.log(0.05) / np.log1p(-a)))))


def _finite(x):
    return np.where(np.isfinite(x), x, -1e300)


def _scaled_cholesky(u):
    cov = np.cov(u, rowvar=False).reshape(u.shape[1], u.shape[1])
    cov += 1e-9 * np.eye(u.shape[1]) * max(1.0, float(np.trace(cov)) / u.shape[1])
    try:
        return np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        return np.diag(np.sqrt(np.maximum(np.diag(cov), 1e-12)))
