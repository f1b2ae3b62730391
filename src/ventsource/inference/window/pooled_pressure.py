"""Pooled degassing pressures of a window: the rows' pressures learn how alike they are.

With each row's pressure drawn independently from a wide prior, a window of many rows
pays that prior once per row, and the shared magma drifts to wherever a row's gas
changes least with pressure (its likelihood is broadest): measured on the demo's first
window (20 rows near 150 bar, arc-like fast demo prior), the pressures came out at
7-53 bar and dFMQ at 0.12-0.68 against a true 1.0, both truths outside their 90 %
bands; one shared pressure recovered both. Partial pooling (a hierarchical prior;
Gelman et al. 2013, Bayesian Data Analysis, 3rd ed., ch. 5) lets the window learn how
alike its rows' pressures are, through an exchangeable Gaussian copula that keeps
each row's prior exactly the prior file's:

    z_i = Phi^-1(F(P_i)),   z_i = sqrt(1 - s^2) c + s e_i,   c, e_i ~ Normal(0, 1),

F the prior file's pressure CDF. Every z_i is Normal(0, 1), so a window of one row is
the single-row model; s = 1 is the independent model; small s pulls the rows'
pressures together. The centre c and the spread s are sampled with the magma's
parameters; each row's pressure is still integrated out on the quadrature grid, with
weights p(P_k) N(z_k; sqrt(1 - s^2) c, s^2) / phi(z_k) renormalised on the grid.

Each draw's own pressure range (`pooled_range`): given c and s every row's normal score is
Normal(m, s^2), m = sqrt(1 - s^2) c, so the rows' pressures lie within Z_HALF_WIDTH s of m
but for a prior tail below e^-32. The window's forward solves and quadrature points are
spread over that range of ln P (the whole prior range when s is near 1) instead of the
prior file's whole range: the same solves resolve a narrow pool many times finer.
"""
from __future__ import annotations

import numpy as np
from scipy import special

from ventsource.inference.priors.distributions import LogUniform, TruncNormal

NAMES = ("pressure_pool_centre", "pressure_pool_spread")
SPREAD_MIN = 0.02   # s: 1 = independent rows; 0.02 = rows within about 2 % of the prior's quantiles
CENTRE_LIMIT = 6.0  # c is standard normal, cut at +-6 sigma for the sampler's bounded space
Z_HALF_WIDTH = 8.0  # a draw's pressures span m +- 8 s in normal scores (prior tail e^-32 beyond)
Z_LIMIT = 7.5       # the score table's ends: Phi(-7.5) = 3e-14 of the prior's mass beyond


class PooledPrior:
    """The shared prior of a window plus the centre c and spread s of the pressure copula."""

    def __init__(self, shared):
        self.base = shared
        self.hyper = (TruncNormal(0.0, 1.0, -CENTRE_LIMIT, CENTRE_LIMIT), LogUniform(SPREAD_MIN, 1.0))
        self.free_names = tuple(shared.free_names) + NAMES
        self.parameter_names = shared.parameter_names
        self.free_bounds = np.vstack([shared.free_bounds, [[d.lower, d.upper] for d in self.hyper]])

    def sample(self, rng, n):
        return np.column_stack([self.base.sample(rng, n)] + [d.sample(rng, n) for d in self.hyper])

    def log_prob(self, theta):
        theta = np.atleast_2d(theta)
        lp = self.base.log_prob(theta[:, :-2])
        for j, d in enumerate(self.hyper):
            lp = lp + d.log_pdf(theta[:, j - 2])
        return np.where(np.isnan(lp), -np.inf, lp)

    def full(self, theta):
        return self.base.full(np.atleast_2d(theta)[:, :-2])


def normal_scores(log_w):
    """z_k = Phi^-1(F(P_k)) of the grid nodes, F from the prior's own grid weights
    (each node at the middle of its own probability mass)."""
    w = np.exp(log_w - special.logsumexp(log_w))
    u = np.cumsum(w) - 0.5 * w
    return special.ndtri(np.clip(u, 1e-12, 1.0 - 1e-12))


def pooled_tilt(z, theta):
    """(n, K) log of N(z; sqrt(1 - s^2) c, s^2) / phi(z) for z (K,) or (n, K)."""
    centre, spread = theta[:, -2:-1], theta[:, -1:]
    shrink = np.sqrt(1.0 - spread * spread)
    return -0.5 * ((z - shrink * centre) / spread) ** 2 - np.log(spread) + 0.5 * z ** 2


def pooled_log_weights(log_w, z, theta):
    """(n, K) log weights of each row's pressure given the copula's c and s (last columns)."""
    out = log_w[None, :] + pooled_tilt(z[None, :], theta)
    return out - special.logsumexp(out, axis=1, keepdims=True)


class ScoreTable:
    """ln P <-> normal score z = Phi^-1(F(P)) of the prior file's pressure distribution,
    tabulated through its quantile function on 3001 scores in [-Z_LIMIT, Z_LIMIT]."""

    def __init__(self, distribution, n=3001):
        self.z = np.linspace(-Z_LIMIT, Z_LIMIT, n)
        ln_p = np.log(np.asarray(distribution.ppf(special.ndtr(self.z)), dtype=float))
        self.ln_p = np.maximum.accumulate(ln_p)   # rounding at the ends must not break the order
        self.ln_bounds = (float(np.log(distribution.lower)), float(np.log(distribution.upper)))

    def score(self, ln_p):
        return np.interp(ln_p, self.ln_p, self.z)

    def ln_pressure(self, z):
        return np.interp(z, self.z, self.ln_p)


def pooled_range(table, theta):
    """(lo, hi) (n,) ln P of each draw's pressure range: m +- Z_HALF_WIDTH s in scores,
    inside the prior's bounds."""
    centre, spread = theta[:, -2], theta[:, -1]
    m = np.sqrt(1.0 - spread * spread) * centre
    lo = np.maximum(table.ln_pressure(m - Z_HALF_WIDTH * spread), table.ln_bounds[0])
    hi = np.minimum(table.ln_pressure(m + Z_HALF_WIDTH * spread), table.ln_bounds[1])
    return np.minimum(lo, hi - 1e-6), hi


def _log_diff_ndtr(a, b):
    """log(Phi(b) - Phi(a)) for a <= b, on the precise side of the mirror."""
    flip = a > 0.0
    lo, hi = np.where(flip, -b, a), np.where(flip, -a, b)
    top = special.log_ndtr(hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        return top + np.log1p(-np.exp(special.log_ndtr(lo) - top))


def cell_log_masses(table, ln_p, theta):
    """(n, K) log of each point's exact prior mass given the copula's c and s: the point's
    cell runs between the midpoints to its neighbours (the end points' from the end
    itself), and a row's score is Normal(m, s^2) there, so the mass is a difference of
    normal CDFs. Repeated points (a saturation edge's collapsed ones) get zero mass."""
    bounds = np.concatenate([ln_p[:, :1], 0.5 * (ln_p[:, 1:] + ln_p[:, :-1]), ln_p[:, -1:]], axis=1)
    centre, spread = theta[:, -2:-1], theta[:, -1:]
    t = (table.score(bounds) - np.sqrt(1.0 - spread * spread) * centre) / spread
    return _log_diff_ndtr(t[:, :-1], t[:, 1:])
