"""Compiled per-row evidences of the window model (fast path of so2_marginal.py).

For every row of a window, every shared draw and every quadrature pressure the window
model needs log L0 and log L1 (and log L2 with a release prior), then a weighted
log-sum over the pressures. With NumPy this builds (rows, draws, pressures) arrays
several times over and dominates the cost of wide windows; here one loop computes the
same quantities point by point and keeps only the (hypotheses, draws, rows) result.

Rows qualify when the marginal's fast path applies and every observed ratio is an
exact (uncensored) normal value: then, with residuals r_j = y_j - mu_j,
    log L0 = c0 - sum r_j^2 / (2 s_j^2),  b = sum k_j r_j / s_j^2,  P = sum k_j^2 / s_j^2,
    log L_alt = log L0 + b^2 / (2 P) + log(tau sqrt(2 pi)) + log E_{N(b/P, tau^2)}[p_v(v)],
tau = P^-1/2 (so2_marginal.So2MultiplierMarginal._fast). The last term is in closed form
for a uniform prior and otherwise read from a table in m = b/P built once per row by
the marginal's own Gauss-Legendre rule (its tau is fixed by the row's errors).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy import special

from ventsource.inference.priors.distributions import Beta, Uniform

_SQRT2 = math.sqrt(2.0)
_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)
TABLE_HALF_WIDTH = 40.0   # table spans the support +- 40 tau: beyond, every term is below e^-800
TABLE_STEPS_PER_TAU = 40  # linear interpolation error ~ 1 / (8 * 40^2) nats (curvature <= tau^-2)
CLOSED_FORM, TABLE = 0, 1
PRUNE = 40.0              # terms below e^-40 of the largest are dropped (K e^-40 < 1e-15)
_FAR = 8.6                # log Phi(-8.6) = -40.6: below double precision next to 1


@njit(cache=True)
def log_ndtr(x):
    """log Phi(x); for x < -20 the asymptotic series (Abramowitz & Stegun 1964, 26.2.12)."""
    if x > 0.0:
        return math.log1p(-0.5 * math.erfc(x / _SQRT2))
    if x > -20.0:
        return math.log(0.5 * math.erfc(-x / _SQRT2))
    z2 = 1.0 / (x * x)
    series = 1.0 - z2 * (1.0 - z2 * (3.0 - z2 * (15.0 - 105.0 * z2)))
    return -0.5 * x * x - math.log(-x) - _HALF_LOG_2PI + math.log(series)


# log Phi tabulated for the inner loop, with its derivative phi / Phi (scipy.special.log_ndtr,
# reference library): cubic Hermite between nodes 1/64 apart leaves below 1e-10 nats
# (measured against scipy over the table), a third of the cost of erfc and log per point.
_TAB_LO, _TAB_HI, _TAB_STEPS = -20.0, _FAR, 64
_TAB_X = _TAB_LO + np.arange(int((_TAB_HI - _TAB_LO) * _TAB_STEPS) + 2) / _TAB_STEPS
_TAB_F = special.log_ndtr(_TAB_X)
_TAB_D = np.exp(-0.5 * _TAB_X ** 2 - _HALF_LOG_2PI - _TAB_F)


@njit(cache=True)
def log_ndtr_table(x):
    """log Phi(x) by cubic Hermite interpolation of the table; log_ndtr outside it."""
    if x < _TAB_LO or x >= _TAB_HI:
        return log_ndtr(x)
    s = (x - _TAB_LO) * _TAB_STEPS
    j = int(s)
    t = s - j
    h = 1.0 / _TAB_STEPS
    t2 = t * t
    t3 = t2 * t
    return (_TAB_F[j] * (2.0 * t3 - 3.0 * t2 + 1.0) + _TAB_D[j] * h * (t3 - 2.0 * t2 + t)
            + _TAB_F[j + 1] * (3.0 * t2 - 2.0 * t3) + _TAB_D[j + 1] * h * (t3 - t2))


@njit(cache=True)
def log_diff_ndtr(alpha, beta):
    """log(Phi(beta) - Phi(alpha)), alpha < beta, on the precise side of the mirror.

    A bound beyond 8.6 sigma changes the result by less than Phi(-8.6) = 4e-18 relative
    and is not evaluated: most points of a window have the Gaussian well inside the
    support or far from one of its ends, and then cost at most one table lookup. Bounds
    at least 1 apart read log Phi from the table (absolute error below 1e-10 nats);
    closer bounds, where the difference magnifies that error, compute it exactly."""
    if not beta > alpha:
        return -np.inf
    if alpha > 0.0:   # mirror: Phi(-alpha) - Phi(-beta)
        alpha, beta = -beta, -alpha
    if beta - alpha < 1.0:   # close bounds: the difference would magnify a table's error
        hi = 0.0 if beta > _FAR else log_ndtr(beta)
        return hi + math.log1p(-math.exp(log_ndtr(alpha) - hi))
    hi = 0.0 if beta > _FAR else log_ndtr_table(beta)
    if alpha < -_FAR and hi > -1.0:
        return hi
    lo = log_ndtr_table(alpha)
    if lo - hi < -40.0:      # log1p(-e^-40) is below double precision next to hi
        return hi
    return hi + math.log1p(-math.exp(lo - hi))


@njit(cache=True)
def _log_avg(mode, m, tau, v_lo, v_hi, log_width, t0, dt, tables, r, a, n_tab):
    """log E_{v ~ N(m, tau^2)}[p_v(v)] over [v_lo, v_hi]."""
    if mode == 0:   # uniform in the parameter: p_v = e^v / width
        shift = m + tau * tau
        return (m + 0.5 * tau * tau - log_width
                + log_diff_ndtr((v_lo - shift) / tau, (v_hi - shift) / tau))
    x = (m - t0) / dt
    if x <= 0.0:    # beyond the table: the Gaussian tail past the nearer bound
        return tables[r, a, 0] - ((m - v_lo) ** 2 - (t0 - v_lo) ** 2) / (2.0 * tau * tau)
    last = t0 + (n_tab - 1) * dt
    if x >= n_tab - 1:
        return tables[r, a, n_tab - 1] - ((m - v_hi) ** 2 - (last - v_hi) ** 2) / (2.0 * tau * tau)
    j = int(x)
    f = x - j
    return tables[r, a, j] * (1.0 - f) + tables[r, a, j + 1] * f


@njit(cache=True)
def _log_sum(terms, K):
    """log sum exp of terms[:K]; terms more than PRUNE below the largest are left out."""
    top = -np.inf
    for q in range(K):
        if terms[q] > top:
            top = terms[q]
    if top == -np.inf:
        return -np.inf
    acc = 0.0
    for q in range(K):
        d = terms[q] - top
        if d > -PRUNE:
            acc += math.exp(d)
    return top + math.log(acc)


@njit(cache=True)
def _magmatic_terms(log_ratios, i, K, r, log_w, cols, n_obs, y, inv_var, k_inv_var, ll0_const,
                    precision, gauss, bad, ll0_w, base, m):
    """Per pressure q: ll0 + log w (into ll0_w), the alternative's bound base and b / P (m)."""
    for q in range(K):
        p = i * K + q
        ok = not bad[p]
        ll0, b = ll0_const[r], 0.0
        for j in range(n_obs[r]):
            mu = log_ratios[p, cols[r, j]]
            if not math.isfinite(mu):
                ok = False
                break
            res = y[r, j] - mu
            ll0 -= 0.5 * res * res * inv_var[r, j]
            b += res * k_inv_var[r, j]
        if not ok:
            ll0_w[q], base[q], m[q] = -np.inf, -np.inf, 0.0
            continue
        ll0_w[q] = ll0 + log_w[i, q]
        m[q] = b / precision[r]
        base[q] = ll0 + 0.5 * b * m[q] + gauss + log_w[i, q]


@njit(cache=True)
def row_evidences(log_ratios, bad, log_w, cols, n_obs, y, inv_var, k_inv_var, ll0_const, precision,
                  mode, v_lo, v_hi, log_width, t0, dt, tables, n_tab, cap):
    """(hypotheses, draws, rows) log Z_h: pressure integrated out by the weights log_w.

    log_ratios (draws * K, forward ratios), bad (draws * K,), log_w (draws, K); per row r:
    cols/y/inv_var/k_inv_var (r, n_obs[r]), ll0_const, precision; per row and alternative
    hypothesis a: mode, v_lo, v_hi, log_width, t0, dt, tables (r, a, :), n_tab and cap,
    an upper bound of log E[p_v]. A pressure whose bound base + cap lies PRUNE below a
    term already computed adds less than e^-PRUNE and is not evaluated."""
    n_rows, n_alt, K = cols.shape[0], mode.shape[1], log_w.shape[1]
    n = log_ratios.shape[0] // K
    out = np.empty((n_alt + 1, n, n_rows))
    ll0_w, base, m, terms = np.empty(K), np.empty(K), np.empty(K), np.empty(K)
    for i in range(n):        # draws outer: a draw's gas stays in cache for every row
        for r in range(n_rows):
            tau = 1.0 / math.sqrt(precision[r])
            gauss = _HALF_LOG_2PI + math.log(tau)
            _magmatic_terms(log_ratios, i, K, r, log_w, cols, n_obs, y, inv_var, k_inv_var, ll0_const,
                            precision, gauss, bad, ll0_w, base, m)
            out[0, i, r] = _log_sum(ll0_w, K)
            q_top = np.argmax(base)
            for a in range(n_alt):
                if base[q_top] == -np.inf:
                    out[a + 1, i, r] = -np.inf
                    continue
                floor = -np.inf
                for q in range(K):   # the likeliest pressure first: its term sets the floor
                    qq = q_top if q == 0 else (q - 1 if q <= q_top else q)
                    if base[qq] + cap[r, a] < floor:
                        terms[qq] = -np.inf
                        continue
                    terms[qq] = base[qq] + _log_avg(mode[r, a], m[qq], tau, v_lo[r, a], v_hi[r, a],
                                                    log_width[r, a], t0[r, a], dt[r, a], tables, r, a,
                                                    n_tab[r, a])
                    floor = max(floor, terms[qq] - PRUNE)
                out[a + 1, i, r] = _log_sum(terms, K)
    return out


def qualifies(marginal):
    """The marginal's fast path applies and every observed ratio is exact normal."""
    return bool(marginal.fast and marginal._all_exact_normal)


def is_uniform(marginal):
    d = marginal.dist
    return isinstance(d, Uniform) or (isinstance(d, Beta) and d.a == 1.0 and d.b == 1.0)


class RowPack:
    """The per-row constants of the qualifying rows, packed for row_evidences."""

    def __init__(self, marginal_sets):
        """marginal_sets: per row, [M1 marginal, M2 marginal (optional)], all qualifying."""
        n_rows, n_alt = len(marginal_sets), len(marginal_sets[0])
        width = max(m.lik._cols.size for ms in marginal_sets for m in ms[:1])
        self.cols = np.zeros((n_rows, width), dtype=np.int64)
        self.y, self.inv_var, self.k_inv_var = (np.zeros((n_rows, width)) for _ in range(3))
        self.n_obs = np.zeros(n_rows, dtype=np.int64)
        self.ll0_const, self.precision = np.zeros(n_rows), np.zeros(n_rows)
        self.mode = np.zeros((n_rows, n_alt), dtype=np.int64)
        self.v_lo, self.v_hi, self.log_width, self.t0, self.dt = (np.zeros((n_rows, n_alt)) for _ in range(5))
        self.n_tab = np.ones((n_rows, n_alt), dtype=np.int64)
        self.cap = np.zeros((n_rows, n_alt))
        tables = {}
        for r, ms in enumerate(marginal_sets):
            first = ms[0]
            k = first.lik._cols.size
            self.cols[r, :k], self.n_obs[r] = first.lik._cols, k
            self.y[r, :k], self.inv_var[r, :k], self.k_inv_var[r, :k] = (
                first.lik.y, first._inv_var, first._k_inv_var)
            self.ll0_const[r], self.precision[r] = first._ll0_const, first.precision
            for a, marg in enumerate(ms):
                self.v_lo[r, a], self.v_hi[r, a] = marg.v_lo, marg.v_hi
                if is_uniform(marg):  # p_v = e^v / width rises with v
                    self.log_width[r, a] = np.log(marg.dist.upper - marg.dist.lower)
                    self.cap[r, a] = marg.v_hi - self.log_width[r, a]
                else:
                    self.mode[r, a] = TABLE
                    tables[r, a] = self._table(marg, r, a)
                    self.cap[r, a] = np.max(tables[r, a])  # the extrapolation only falls off
        n_max = max([t.size for t in tables.values()], default=1)
        self.tables = np.zeros((n_rows, n_alt, n_max))
        for (r, a), t in tables.items():
            self.tables[r, a, :t.size], self.n_tab[r, a] = t, t.size

    def _table(self, marg, r, a):
        tau = 1.0 / np.sqrt(marg.precision)
        self.dt[r, a] = tau / TABLE_STEPS_PER_TAU
        self.t0[r, a] = marg.v_lo - TABLE_HALF_WIDTH * tau
        n = int(np.ceil((marg.v_hi - marg.v_lo + 2 * TABLE_HALF_WIDTH * tau) / self.dt[r, a])) + 1
        m = self.t0[r, a] + self.dt[r, a] * np.arange(n)
        return np.asarray(marg._log_gauss_avg_prior(m, tau), dtype=float)

    def evidences(self, log_ratios, bad, log_w):
        """log_w: (K,) weights shared by every draw, or (draws, K)."""
        if log_w.ndim == 1:
            log_w = np.ascontiguousarray(np.broadcast_to(log_w, (log_ratios.shape[0] // log_w.size, log_w.size)))
        return row_evidences(log_ratios, bad, log_w, self.cols, self.n_obs, self.y, self.inv_var,
                             self.k_inv_var, self.ll0_const, self.precision, self.mode, self.v_lo,
                             self.v_hi, self.log_width, self.t0, self.dt, self.tables, self.n_tab,
                             self.cap)
