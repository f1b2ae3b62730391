"""Persistent hypotheses: a window's rows tend to keep the previous row's state.

Scrubbing by a hydrothermal system, and its absence, last longer than the time between
two measurements of a window: a row that follows a run of magmatic rows is more likely
magmatic than the prior odds say. With each row's hypothesis drawn on its own, one
magmatic row of 13 with 15 % errors read P(M0) 0.41 (source B of the `--window auto`
acceptance series) although all 13 were magmatic; with the magma held at its truth it
still read 0.61. The rows' hypotheses h_i (M0, M1 and, with a release prior, M2) form a
Markov chain in the window's row order (time order):

    P(h_i = k | h_{i-1} = j) = rho [j = k] + (1 - rho) pi_k,

keep the previous row's state with probability rho, else draw afresh from the prior
odds pi. pi is the chain's stationary distribution, so each row's own prior is still
exactly the prior file's p_magmatic; rho = 0 is the independent model. rho, the
`hypothesis_persistence`, is uniform on [0, 1] and learned from the window's rows: rows
whose states alternate pull it to 0. Given rho the likelihood is the forward
algorithm's and each row's P(h_i | every row) the forward-backward smoother's (a hidden
Markov model; Rabiner 1989, Proceedings of the IEEE 77:257, from memory), normalised row by row.

rho is integrated out on a fixed grid for every shared draw (as each row's pressure is)
rather than sampled with the magma: sampled, its extra dimension left a 336-row station
window's runs apart (R-hat 1.058 and 1.044 with 120 more moves at beta = 1, seed 1;
1.010 without persistence). The grid is uniform in logit(rho), N_NODES points over
[-LOGIT_LIMIT, LOGIT_LIMIT], each weighing the uniform prior's mass of its cell (the
trapezoid of rho (1 - rho) d logit, the tails beyond the ends added to the end nodes);
the trapezoid rule on a smooth peak converges fast once the spacing is below about two
of its widths, and rho's posterior spans at least 0.5 in logit for windows whose
hypotheses switch a few times.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from scipy import special

NAME = "hypothesis_persistence"
N_NODES = 41
LOGIT_LIMIT = 9.0


def rho_grid(n_nodes=N_NODES, limit=LOGIT_LIMIT):
    """(rho nodes, log prior weights) of the persistence's quadrature."""
    u = np.linspace(-limit, limit, n_nodes)
    rho = special.expit(u)
    w = rho * (1.0 - rho) * (u[1] - u[0])
    w[[0, -1]] = 0.5 * w[[0, -1]] + special.expit(-limit)   # half cells plus the tails beyond
    return rho, np.log(w / w.sum())


def _lse(x, axis=-1):
    """logsumexp that keeps -inf for all -inf (no warning, no NaN)."""
    top = np.max(x, axis=axis, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.sum(np.exp(x - top), axis=axis)) + np.squeeze(top, axis)


def _logs(rho):
    rho = np.clip(np.asarray(rho, float), 0.0, 1.0)[:, None]
    with np.errstate(divide="ignore"):
        return np.log(rho), np.log1p(-rho)


def _predict(a, log_pis, lr, lq):
    """log of the next row's prior state probabilities from normalised log filter a (n, H)."""
    return np.logaddexp(lr + a, lq + log_pis[None, :])


def filter_rows(lz, log_pis, rho):
    """(cumulative log L after each row (n, rows), last normalised log filter (n, H)) for
    each draw's own rho (n,): the grid kernel with one node per draw (the exact reference
    the tests check the grid against; the window itself uses the grid).

    lz: (n, H, rows) per-row log evidences of each hypothesis (NaN -> -inf)."""
    lz = np.ascontiguousarray(np.where(np.isnan(lz), -np.inf, lz), dtype=np.float64)
    rho = np.clip(np.broadcast_to(np.asarray(rho, float), (lz.shape[0],)), 0.0, 1.0)
    log_pis = np.asarray(log_pis, np.float64)
    parts = [_grid_kernel(lz[j:j + 1], log_pis, rho[j:j + 1].copy(), True) for j in range(lz.shape[0])]
    return (np.concatenate([c[:, 0, :] for c, _ in parts]), np.concatenate([l[:, 0, :] for _, l in parts]))


def log_likelihood(lz, log_pis, rho):
    """(n,) log L of the window's rows given the shared draws (forward algorithm)."""
    if lz.shape[2] == 0:
        return np.zeros(lz.shape[0])
    return filter_rows(lz, log_pis, rho)[0][:, -1]


def next_row_log_pis(lz, log_pis, rho):
    """(n, H) log prior state probabilities of a row that follows the rows of lz."""
    if lz.shape[2] == 0:
        return np.broadcast_to(log_pis, (lz.shape[0], log_pis.size)).copy()
    lr, lq = _logs(rho)
    return _predict(filter_rows(lz, log_pis, rho)[1], log_pis, lr, lq)


def state_probabilities(lz, log_pis, rho):
    """(n, rows, H) P(h_i = k | every row, shared draw): forward-backward."""
    lz = np.where(np.isnan(lz), -np.inf, lz)
    n, H, m = lz.shape
    lr, lq = _logs(rho)
    fwd = np.empty((n, m, H))
    a = np.broadcast_to(log_pis, (n, H))
    for i in range(m):
        joint = (a if i == 0 else _predict(a, log_pis, lr, lq)) + lz[:, :, i]
        step = _lse(joint)
        a = joint - np.where(np.isfinite(step), step, 0.0)[:, None]
        fwd[:, i] = a
    back = np.zeros((n, H))
    out = np.empty((n, m, H))
    for i in range(m - 1, -1, -1):
        post = fwd[:, i] + back
        out[:, i] = np.exp(post - _lse(post)[:, None])
        e = lz[:, :, i] + back      # backward message to row i - 1
        b = np.logaddexp(lr + e, lq + _lse(log_pis[None, :] + e)[:, None])
        back = b - np.where(np.isfinite(_lse(b)), _lse(b), 0.0)[:, None]
    return out


# ---- rho integrated out on the grid -----------------------------------------------------

@njit(cache=True)
def _grid_kernel(lz, log_pis, rho, store_all):
    """cum (n, G, rows or 1): log L of the first rows for each node; last (n, G, H): the
    last row's filter. exp(lz - top) does not depend on rho: computed once per row; the
    normalisers are multiplied up and taken to logs only when small."""
    n, H, m = lz.shape
    G = rho.size
    cum = np.zeros((n, G, m if store_all else 1))
    last = np.empty((n, G, H))
    pis = np.exp(log_pis)
    e = np.empty(H)
    a = np.empty((G, H))
    logs = np.zeros(G)
    prods = np.ones(G)
    for j in range(n):
        for g in range(G):
            a[g] = pis
        logs[:] = 0.0
        prods[:] = 1.0
        top_sum = 0.0
        for i in range(m):
            top = -math.inf
            for k in range(H):
                top = max(top, lz[j, k, i])
            if top == -math.inf:
                top_sum = -math.inf
            else:
                top_sum += top
                for k in range(H):
                    e[k] = math.exp(lz[j, k, i] - top)
            for g in range(G):
                acc = 0.0
                if top > -math.inf and prods[g] > 0.0:
                    for k in range(H):
                        prior = a[g, k] if i == 0 else rho[g] * a[g, k] + (1.0 - rho[g]) * pis[k]
                        a[g, k] = prior * e[k]
                        acc += a[g, k]
                if acc > 0.0:
                    for k in range(H):
                        a[g, k] /= acc
                    prods[g] *= acc
                    if prods[g] < 1e-200:
                        logs[g] += math.log(prods[g])
                        prods[g] = 1.0
                else:
                    prods[g] = 0.0
                    for k in range(H):
                        a[g, k] = pis[k]
                if store_all or i == m - 1:
                    ok = prods[g] > 0.0 and top_sum > -math.inf
                    cum[j, g, i if store_all else 0] = top_sum + logs[g] + math.log(prods[g]) if ok else -math.inf
        for g in range(G):
            for k in range(H):
                last[j, g, k] = math.log(a[g, k]) if a[g, k] > 0.0 else -math.inf
    return cum, last


def _grid(lz, log_pis, store_all=False):
    lz = np.ascontiguousarray(np.where(np.isnan(lz), -np.inf, lz), dtype=np.float64)
    rho, log_w = rho_grid()
    cum, last = _grid_kernel(lz, np.asarray(log_pis, np.float64), rho, store_all)
    return rho, log_w, cum, last


def marginal_cumulative(lz, log_pis):
    """(n, rows) log L of the first 1, 2, ... rows, rho integrated out."""
    if lz.shape[2] == 0:
        return np.zeros((lz.shape[0], 0))
    _, log_w, cum, _ = _grid(lz, log_pis, store_all=True)
    return special.logsumexp(cum + log_w[None, :, None], axis=1)


def marginal_log_likelihood(lz, log_pis):
    """(n,) log L of the window's rows, rho integrated out."""
    if lz.shape[2] == 0:
        return np.zeros(lz.shape[0])
    _, log_w, cum, _ = _grid(lz, log_pis)
    return special.logsumexp(cum[:, :, 0] + log_w[None, :], axis=1)


def rho_posterior(lz, log_pis):
    """(rho nodes (G,), (n, G) posterior weights of each node given each draw's rows)."""
    rho, log_w, cum, _ = _grid(lz, log_pis)
    lp = cum[:, :, 0] + log_w[None, :]
    with np.errstate(invalid="ignore"):
        return rho, np.exp(lp - special.logsumexp(lp, axis=1, keepdims=True))


def marginal_next_row_log_pis(lz, log_pis):
    """(n, H) log prior of a row that follows the rows of lz, rho integrated out."""
    if lz.shape[2] == 0:
        return np.broadcast_to(log_pis, (lz.shape[0], log_pis.size)).copy()
    rho, log_w, cum, last = _grid(lz, log_pis)
    lp = cum[:, :, 0] + log_w[None, :]
    post = lp - special.logsumexp(lp, axis=1, keepdims=True)               # (n, G)
    with np.errstate(divide="ignore"):
        pred = np.logaddexp(np.log(rho)[None, :, None] + last,
                            np.log1p(-rho)[None, :, None] + log_pis[None, None, :])  # (n, G, H)
    return special.logsumexp(post[:, :, None] + pred, axis=1)


def marginal_state_probabilities(lz, log_pis):
    """(n, rows, H) P(h_i = k | every row, shared draw), rho integrated out: each node's
    smoother weighted by the node's posterior (one node at a time: memory stays that of
    one smoother)."""
    rho, weights = rho_posterior(lz, log_pis)
    out = np.zeros((lz.shape[0], lz.shape[2], lz.shape[1]))
    for g in range(rho.size):
        wg = np.nan_to_num(weights[:, g])
        if np.any(wg > 1e-12):
            out += wg[:, None, None] * np.nan_to_num(state_probabilities(lz, log_pis, np.full(lz.shape[0], rho[g])))
    return out
