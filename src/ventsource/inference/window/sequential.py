"""Sequential Bayesian updating of a window's shared posterior, one new row at a time.

Given psi the rows of a window are independent (target.py), so the posterior after
row n+1 is the posterior after row n times that row's marginal likelihood
m_{n+1}(psi) = sum_k pi_k Z_k,n+1(psi) (pressure and the scrubbed fraction integrated
out). The particle population of the window (several independent runs, as in
infer_window) is reweighted by m_{n+1}; where one step would leave an effective
sample size below ess_target N, the new row enters tempered, m^beta with beta rising
to 1, and each stage resamples (systematic) and moves the particles with the SMC
engine's Metropolis moves, whose target is then prior x old rows x m_{n+1}^beta
(iterated batch importance sampling, Chopin 2002, Biometrika 89:539; tempering
between data points as in Del Moral, Doucet and Jasra 2006, JRSS B 68:411). A run
whose weights stay balanced is not moved. The first row of a window starts from prior
draws through the same path.

The answer for the new row before any move, P(M0 | row, earlier rows of the window),
is sum_j w_j pi0 Z0_j / sum_j w_j m_j per run: exact for the current population, so a
row is answered from one batch of forward solves (48 per particle).

Degeneration rule (then a full tempered run of the window from the prior,
`needs_rerun`): after an update any run keeps fewer than MIN_DISTINCT_SHARE of its
particles distinct (the level of infer_window's few_distinct_particles flag), or the
new row needed more than MAX_UPDATE_STAGES tempering stages (the row lies far out in
the tails of the current posterior; the population moved a long way on few particles).

Every random step of an update uses SeedSequence([seed, row_index]) (run r: its r-th
spawn child), so the numbers after row k depend only on the seed and the rows, not
on when a watcher stopped and resumed.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ventsource.inference.engines.smc_engine import SMCError, _Population, _rejuvenate, _systematic, tempered_smc
from ventsource.inference.evidence.bridge import Transform, support_bounds
from ventsource.inference.window import hypothesis_persistence
from ventsource.inference.window.target import WindowTarget

MIN_DISTINCT_SHARE = 0.25
MAX_UPDATE_STAGES = 8
_ARRAYS = ("u", "theta", "log_prior", "lz", "log_w", "log_z", "scale")


class SequentialError(ValueError):
    """The update cannot run; one-line message."""


@dataclass
class WindowPopulation:
    """Weighted particles of a window: R runs of N, stored run after run."""
    u: np.ndarray          # (R N, d) unbounded coordinates
    theta: np.ndarray      # (R N, d) shared parameters
    log_prior: np.ndarray  # (R N,) log prior + log Jacobian of u
    lz: np.ndarray         # (R N, H, rows) per-row log Z_k(psi), pressure integrated out
    log_w: np.ndarray      # (R, N) log weights, normalised within each run
    log_z: np.ndarray      # (R,) log evidence of the window's rows so far
    scale: np.ndarray      # (R,) random-walk scale of each run's moves

    @property
    def n_runs(self):
        return self.log_w.shape[0]

    @property
    def n_particles(self):
        return self.log_w.shape[1]

    @property
    def n_rows(self):
        return self.lz.shape[2]

    def arrays(self):
        """{name: array} to store (the population is exactly these arrays)."""
        return {k: getattr(self, k) for k in _ARRAYS}

    @classmethod
    def from_arrays(cls, arrays):
        return cls(**{k: np.array(arrays[k]) for k in _ARRAYS})

    def equal_weight_draws(self, seed):
        """(theta (R, N, d), lz (R, N, H, rows)): each run resampled to equal weights
        (systematic, its own stream), for summaries; the population is unchanged."""
        R, N = self.log_w.shape
        rngs = _run_rngs(seed, R)
        idx = np.concatenate([r * N + _systematic(np.exp(self.log_w[r]), rngs[r]) for r in range(R)])
        return self.theta[idx].reshape(R, N, -1), self.lz[idx].reshape((R, N) + self.lz.shape[1:])


def _run_rngs(seed, n_runs):
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(n_runs)]


def row_seed_sequence(seed, row_index):
    """The entropy of row row_index's update: [seed, row_index]."""
    return [int(seed), int(row_index)]


def start_population(shared_prior, n_particles, n_runs, seed, n_hypotheses=2):
    """Prior draws, equally weighted, no rows yet."""
    rngs = _run_rngs(seed, n_runs)
    theta = np.concatenate([shared_prior.sample(rng, n_particles) for rng in rngs])
    transform = Transform(support_bounds(shared_prior))
    u = transform.forward(theta)
    theta, log_j = transform.inverse(u)
    lp = np.asarray(shared_prior.log_prob(theta), float) + log_j
    n = theta.shape[0]
    return WindowPopulation(u, theta, lp, np.zeros((n, n_hypotheses, 0)),
                            np.full((n_runs, n_particles), -np.log(n_particles)), np.zeros(n_runs),
                            np.full(n_runs, 2.38 / np.sqrt(theta.shape[1])))


def arrival_log_pis(target, pop, before=None):
    """(R N, H) log prior hypothesis probabilities of a row that follows the population's
    rows (its first `before` rows): the prior odds, or with persistent hypotheses
    (hypothesis_persistence.py) the odds the earlier rows leave for the next row."""
    lz = pop.lz if before is None else pop.lz[:, :, :before]
    if not target.persistent:
        return np.broadcast_to(target.log_pis, (lz.shape[0], target.log_pis.size))
    return hypothesis_persistence.marginal_next_row_log_pis(lz, target.log_pis)


def new_row_evidences(prior, forward, likelihoods, pi0, theta):
    """(lz (n, H, rows), their target) of new rows at the population's particles: one
    batch of forward solves serves every row given."""
    new = WindowTarget(prior, forward, list(likelihoods), pi0)
    return np.stack(new.row_evidences(theta), axis=1), new


def row_answer(pop, lz_new, log_pis, row=0):
    """Per-run probabilities (R, H) of each hypothesis for a new row (lz_new[:, :, row]),
    from the population before it moves: sum_j w_j pi_k Z_k,j / sum_j w_j m_j; log_pis
    (H,) or per particle (R N, H) (arrival_log_pis)."""
    R, N = pop.log_w.shape
    terms = log_pis + lz_new[:, :, row]                                 # (RN, H)
    terms = np.where(np.isnan(terms), -np.inf, terms)
    lw = pop.log_w.reshape(-1)[:, None] + terms
    per_run = special.logsumexp(lw.reshape(R, N, -1), axis=1)         # (R, H)
    with np.errstate(invalid="ignore"):
        return np.exp(per_run - special.logsumexp(per_run, axis=1, keepdims=True))


class _SplitEvaluator:
    """u -> engine population whose log prior holds prior + every earlier row and whose
    log likelihood is the new (last) row: the engine's moves then target
    prior x earlier rows x new row^beta. One forward batch per call."""

    def __init__(self, target, shared_prior, transform):
        self.target, self.shared_prior, self.transform = target, shared_prior, transform
        self.n_evals = 0

    def __call__(self, u):
        theta, log_j = self.transform.inverse(u)
        lp = np.asarray(self.shared_prior.log_prob(theta), float) + log_j
        n, ok = u.shape[0], np.isfinite(lp)
        lz = np.full((n, self.target.n_hypotheses, self.target.n_rows), np.nan)
        if ok.any():
            lz[ok] = np.stack(self.target.row_evidences(theta[ok]), axis=1)
            self.n_evals += int(ok.sum())
        return population_view(self.target, u, theta, lp, lz)


def population_view(target, u, theta, lp, lz):
    cum = target.cumulative_log_likelihood(lz)
    before = cum[:, -2] if cum.shape[1] > 1 else np.zeros(len(lp))
    base = lp + before
    with np.errstate(invalid="ignore"):
        new = np.where(np.isfinite(lp) & np.isfinite(before), cum[:, -1] - before, -np.inf)
    return _Population(u, theta, np.where(np.isfinite(base), base, -np.inf), new, {"lz": lz, "lp0": lp})


def _ess_share(log_w):
    w = np.exp(log_w - log_w.max())
    return float(w.sum() ** 2 / (w * w).sum() / log_w.size)


def _next_beta(beta, log_w, inc, ess_target):
    """Largest beta' in (beta, 1] keeping the weighted ESS share >= ess_target."""
    def ess(b):
        return _ess_share(log_w + np.where(np.isfinite(inc), (b - beta) * inc, -np.inf))
    if ess(1.0) >= ess_target:
        return 1.0
    lo, hi = beta, 1.0
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if ess(mid) >= ess_target else (lo, mid)
        if hi - lo < 1e-10:
            break
    return max(lo, beta + 1e-12)


@dataclass
class UpdateInfo:
    p_runs: np.ndarray   # (R, H) the new row's hypotheses, before any move (the instant answer)
    stages: int          # tempering stages the new row took (1: reweighted at once)
    moved_runs: int      # runs that were resampled and moved
    n_evals: int         # window-target evaluations of the moves (each 48 solves per particle)
    distinct_min: int    # fewest distinct particles in a run after the update
    rerun: str           # "" or why the window was run again from the prior


def add_row(pop, prior, forward, likelihoods, pi0, seed, row_index, ess_target=0.5, max_moves=20,
            min_moves=2, lz_new=None, between=None):
    """(new population, UpdateInfo): the window's rows so far are `likelihoods`, the new
    row last; pop holds the population after the others; lz_new: the new row's
    new_row_evidences at pop's particles when already computed; between: called after each
    resample-move stage (the caller's other work, e.g. answering rows that arrived).
    See the module's docstring."""
    R, N = pop.n_runs, pop.n_particles
    if pop.n_rows != len(likelihoods) - 1:
        raise SequentialError(f"population holds {pop.n_rows} rows, {len(likelihoods)} given with the new one")
    target = WindowTarget(prior, forward, likelihoods, pi0)
    if lz_new is None:
        lz_new, _ = new_row_evidences(prior, forward, likelihoods[-1:], pi0, pop.theta)
    p_runs = row_answer(pop, lz_new, arrival_log_pis(target, pop))
    view = population_view(target, pop.u.copy(), pop.theta.copy(), pop.log_prior.copy(),
                           np.concatenate([pop.lz, lz_new], axis=2))
    rngs = _run_rngs(row_seed_sequence(seed, row_index), R)
    evaluate = _SplitEvaluator(target, target.shared_prior, Transform(support_bounds(target.shared_prior)))
    log_w, log_z, scale = pop.log_w.copy(), pop.log_z.copy(), pop.scale.copy()
    beta, stages, moved = np.zeros(R), 0, set()
    while np.any(beta < 1.0):
        stages += 1
        if stages > 200:
            raise SequentialError("the new row's tempering did not reach beta = 1 in 200 stages")
        idx, resample = np.arange(R * N), []
        for r in np.flatnonzero(beta < 1.0):
            sl = slice(r * N, (r + 1) * N)
            if _reweight(r, view.log_like[sl], beta, log_w, log_z, ess_target):
                idx[sl] = r * N + _systematic(np.exp(log_w[r]), rngs[r])
                log_w[r] = -np.log(N)
                resample.append(int(r))
        if resample:
            view = view.take(idx)
            _rejuvenate(view, resample, beta, N, scale, rngs, evaluate, max_moves, min_moves)
            moved.update(resample)
            if between is not None:
                between()
    distinct = min(np.unique(view.u[r * N:(r + 1) * N], axis=0).shape[0] for r in range(R))
    out = WindowPopulation(view.u, view.theta, view.aux["lp0"], view.aux["lz"], log_w, log_z, scale)
    reason = ""
    if distinct < MIN_DISTINCT_SHARE * N:
        reason = f"{distinct} of {N} particles of a run distinct after the update"
    elif stages > MAX_UPDATE_STAGES:
        reason = f"the new row took {stages} tempering stages (> {MAX_UPDATE_STAGES})"
    if reason:
        out = full_run(prior, forward, likelihoods, pi0, [int(seed), int(row_index), 1], N, R,
                       ess_target, max_moves)
    return out, UpdateInfo(p_runs, stages, len(moved), evaluate.n_evals, int(distinct), reason)


def _reweight(r, inc, beta, log_w, log_z, ess_target):
    """Run r takes the new row up to its next beta; True when it must resample."""
    new = _next_beta(beta[r], log_w[r], inc, ess_target)
    lw = log_w[r] + np.where(np.isfinite(inc), (new - beta[r]) * inc, -np.inf)
    total = special.logsumexp(lw)
    if not np.isfinite(total):
        raise SequentialError("the new row has zero likelihood at every particle of the window "
                              "(no state of the prior reproduces it)")
    log_z[r] += total
    log_w[r] = lw - total
    beta[r] = new
    return bool(new < 1.0 or _ess_share(log_w[r]) < ess_target)


def full_run(prior, forward, likelihoods, pi0, seed, n_particles, n_runs, ess_target=0.5, max_moves=20):
    """The window's rows inverted together from the prior (the engine's tempered run, as
    infer_window samples), as an equally weighted population."""
    target = WindowTarget(prior, forward, likelihoods, pi0)
    sp = target.shared_prior
    transform = Transform(support_bounds(sp))
    try:
        res = tempered_smc(sp.log_prob, target, sp.sample, transform, n_particles=n_particles,
                           n_runs=n_runs, seed=seed, ess_target=ess_target, max_moves=max_moves)
    except SMCError as exc:
        raise SequentialError(f"window: {exc}") from None
    theta = res.theta.reshape(n_runs * n_particles, -1)
    u = transform.forward(theta)
    theta, log_j = transform.inverse(u)
    lp = np.asarray(sp.log_prob(theta), float) + log_j
    lz = np.stack([res.aux[f"lz{k}"].reshape(n_runs * n_particles, -1)
                   for k in range(target.n_hypotheses)], axis=1)
    return WindowPopulation(u, theta, lp, lz, np.full((n_runs, n_particles), -np.log(n_particles)),
                            np.asarray(res.log_z, float), np.full(n_runs, 2.38 / np.sqrt(theta.shape[1])))
