"""A window row's posterior IF its gas was scrubbed (M1): the columns row-by-row runs fill.

Every shared draw psi of a window carries, for each row, a hypothesis drawn from its
conditional posterior given psi and the row (inference/window/sampling.py, _row_draws:
M0 or M1 by the row's responsibilities), and with it a pressure and a scrubbed fraction.
The draws in which row i is M1 are therefore a sample of p(psi, P_i, s_i | the window's
rows, row i scrubbed): the posterior under M1 of a row-by-row run, with what the other
rows say about the shared magma folded in. From them, per row:

* `NAME_if_scrubbed_q05/median/q95` of each shared parameter (the per-row pressure's are
  the row result's own, pressure_if_scrubbed);
* `p_scrubbed_below_epsilon`: the share of the M1 draws with s_i < epsilon, its error the
  spread of that share over the window's independent SMC runs (as P(M0)'s error), or the
  binomial error of the M1 draws when fewer than two runs hold any;
* `NAME_contraction`: 1 - var_post / var_prior under M1 (inference/information.py, the
  same analysis units as row by row), for every free parameter of the prior file; prior
  draws from the file (a pooled row's pressure prior is exactly the file's,
  pooled_pressure.py).

Fewer than MIN_M1_DRAWS draws under M1 (P(M0) near 1): the columns stay empty.
"""
from __future__ import annotations

import numpy as np

from ventsource.inference.hypotheses.model_choice import probability_below
from ventsource.inference.information import contraction, log_scaled, to_analysis_units

MIN_M1_DRAWS = 2          # a variance needs two draws
N_PRIOR_DRAWS = 4000      # prior draws for the contraction (as the window's information summary)


def prior_draws(spec, seed):
    """(free names, prior draws) of the prior file, on their own stream."""
    return tuple(spec.free_names), np.asarray(spec.sample(np.random.default_rng([int(seed), 0x1F2]),
                                                          N_PRIOR_DRAWS), float)


def if_scrubbed_fields(row, shared_names, shared_draws, spec, prior):
    """Summary fields of one window row under M1 (None where they cannot be computed).

    row: the window's RowResult (budget_draws "model", "so2_factor" (1 - s under M1) and
    "pressure_bar", one per shared draw in the order of shared_draws reshaped to (runs x
    particles, shared)); prior: prior_draws(spec, seed)."""
    draws = row.budget_draws
    if draws is None:
        return {}
    runs, n = np.shape(shared_draws)[:2]
    m1 = np.asarray(draws["model"]) == 1
    if m1.sum() < MIN_M1_DRAWS:
        return {}
    psi = np.asarray(shared_draws, float).reshape(runs * n, -1)[m1]
    scrubbed = 1.0 - np.asarray(draws["so2_factor"], float)[m1]
    out = {}
    post = {}
    for j, name in enumerate(shared_names):
        if name in spec.free_names:   # the pooling hyperparameters stay in windows/*.nc
            post[name] = psi[:, j]
            out.update(_quantiles(f"{name}_if_scrubbed", psi[:, j]))
    post["scrubbed_so2"] = scrubbed
    if "pressure_bar" in draws and "pressure_bar" in spec.free_names and "pressure_bar" not in post:
        post["pressure_bar"] = np.asarray(draws["pressure_bar"], float)[m1]   # the row's own
    p, err = _below_epsilon(scrubbed, m1.reshape(runs, n), spec.epsilon)
    out["p_scrubbed_below_epsilon"], out["p_scrubbed_below_epsilon_error"] = p, err
    out.update(_contractions(post, prior))
    return out


def _quantiles(tag, x):
    x = x[np.isfinite(x)]
    if x.size < MIN_M1_DRAWS:
        return {}
    q = np.quantile(x, [0.05, 0.5, 0.95])
    return {f"{tag}_q05": float(q[0]), f"{tag}_median": float(q[1]), f"{tag}_q95": float(q[2])}


def _below_epsilon(scrubbed, m1_by_run, epsilon):
    """(P(s < epsilon | M1, data), its Monte Carlo error)."""
    p, binomial_err = probability_below(scrubbed, epsilon)
    counts = m1_by_run.sum(axis=1)
    starts = np.concatenate([[0], np.cumsum(counts)])
    per_run = [float(np.mean(scrubbed[a:b] < epsilon)) for a, b in zip(starts[:-1], starts[1:]) if b > a]
    if len(per_run) < 2:
        return p, binomial_err
    return p, float(np.std(per_run, ddof=1) / np.sqrt(len(per_run)))


def _contractions(post, prior):
    names, x0 = prior
    out = {}
    for j, name in enumerate(names):
        if name not in post or np.std(x0[:, j]) == 0:
            continue
        x1 = post[name][np.isfinite(post[name])]
        if x1.size < MIN_M1_DRAWS:
            continue
        mask = log_scaled(x0[:, j:j + 1])
        z0, z1 = to_analysis_units(x0[:, j:j + 1], mask), to_analysis_units(x1[:, None], mask)
        c = float(contraction(z0, z1)[0])
        out[f"{name}_contraction"] = c if np.isfinite(c) else None
    return out
