"""How much the data said: pure functions over prior and posterior draws.

* contraction 1 - var_post / var_prior per parameter (Schervish's "posterior
  shrinkage"; common practice, e.g. Betancourt 2018, "Calibrating model-based
  inferences and decisions", arXiv:1803.08393, sec. 2);
* KL(posterior || prior) of moment-matched Gaussians (exact when both are Gaussian;
  a summary, not an estimate of the true KL, when they are not);
* the leading unresolved direction: the principal axis of the posterior covariance
  after each parameter is scaled by its prior spread, so that the axis with the
  largest eigenvalue is the combination the data moved least. A plain correlation
  matrix would rank a parameter pinned by the data alike with one left at its prior.

Analysis units: a parameter whose prior draws are all positive and less skewed in log10
than in linear units is taken in log10 (a log-uniform pressure, CO2 or S: trade-offs
there are multiplicative); fractions and dFMQ stay linear.
"""
from __future__ import annotations

import numpy as np

NEAR_PRIOR_SHIFT = 0.05    # |P(M0) - pi0| below this: the data barely moved P(M0) (common practice, no source)
NEAR_PRIOR_CONTRACTION = 0.1  # scrubbed-fraction contraction below this: barely moved (same)
LOADING_SHOWN = 0.3        # |loading| from which a parameter is named in the words


def log_scaled(prior_draws: np.ndarray) -> np.ndarray:
    """Boolean per column: read this parameter in log10 (see the module note)."""
    x = np.atleast_2d(np.asarray(prior_draws, dtype=float))
    pos = np.all(x > 0, axis=0)
    return pos & (np.abs(_skew(np.log10(np.where(x > 0, x, 1.0)))) < np.abs(_skew(x)))


def _skew(x):
    d = x - x.mean(axis=0)
    sd = d.std(axis=0)
    return np.where(sd > 0, (d ** 3).mean(axis=0) / np.where(sd > 0, sd, 1.0) ** 3, 0.0)


def to_analysis_units(draws, log_mask) -> np.ndarray:
    x = np.array(draws, dtype=float, ndmin=2)
    x[:, log_mask] = np.log10(x[:, log_mask])
    return x


def contraction(prior_draws, post_draws) -> np.ndarray:
    """1 - var_post / var_prior per column (draws: (n, d) arrays in the same units)."""
    v0 = np.var(np.array(prior_draws, dtype=float, ndmin=2), axis=0, ddof=1)
    v1 = np.var(np.array(post_draws, dtype=float, ndmin=2), axis=0, ddof=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(v0 > 0, 1.0 - v1 / v0, np.nan)


def gaussian_kl(prior_draws, post_draws) -> float:
    """KL(N(m1, S1) || N(m0, S0)) in nats, moments from the posterior (1) and prior (0)
    draws; the closed form for two Gaussians (e.g. Bishop 2006, Pattern Recognition and
    Machine Learning, exercise 2.13, from memory):
    0.5 [tr(S0^-1 S1) + (m0 - m1)' S0^-1 (m0 - m1) - d + ln(det S0 / det S1)]."""
    x0 = np.array(prior_draws, dtype=float, ndmin=2)
    x1 = np.array(post_draws, dtype=float, ndmin=2)
    d = x0.shape[1]
    m0, m1 = x0.mean(axis=0), x1.mean(axis=0)
    s0 = np.atleast_2d(np.cov(x0, rowvar=False))
    s1 = np.atleast_2d(np.cov(x1, rowvar=False))
    s0_inv = np.linalg.inv(s0)
    dm = m0 - m1
    _, logdet0 = np.linalg.slogdet(s0)
    _, logdet1 = np.linalg.slogdet(s1)
    return float(0.5 * (np.trace(s0_inv @ s1) + dm @ s0_inv @ dm - d + logdet0 - logdet1))


def principal_axis(prior_draws, post_draws):
    """(unit loadings, kept share) of the leading axis v of the posterior covariance in
    prior-sd units; kept share = v' C_post v / v' C_prior v (same units), the part of the
    prior variance along v that the posterior keeps (1: unresolved). The ratio, not the
    eigenvalue, is reported: along a ridge that runs corner to corner of a prior box the
    posterior variance can exceed the prior's marginal variance of either parameter.
    Sign convention: the largest loading positive."""
    x0 = np.array(prior_draws, dtype=float, ndmin=2)
    sd0 = np.std(x0, axis=0, ddof=1)
    scale = np.where(sd0 > 0, sd0, 1.0)
    z1 = np.array(post_draws, dtype=float, ndmin=2) / scale
    cov1 = np.atleast_2d(np.cov(z1, rowvar=False))
    cov0 = np.atleast_2d(np.cov(x0 / scale, rowvar=False))
    _, vectors = np.linalg.eigh(cov1)
    v = vectors[:, -1]
    v = v * np.sign(v[np.argmax(np.abs(v))])
    return v, float(v @ cov1 @ v / (v @ cov0 @ v))


def axis_words(names, loadings, kept_share, log_mask=None) -> str:
    """The principal axis in words, e.g. "pressure_bar, dfmq and s_ppm trade off: ..."."""
    names = list(names)
    log_mask = np.zeros(len(names), bool) if log_mask is None else np.asarray(log_mask)
    order = np.argsort(-np.abs(loadings))
    shown = [i for i in order if abs(loadings[i]) >= LOADING_SHOWN] or [int(order[0])]
    label = [("log " if log_mask[i] else "") + names[i] for i in shown]
    if len(shown) == 1:
        head = f"{label[0]} is the least resolved parameter"
    else:
        head = f"{', '.join(label[:-1])} and {label[-1]} trade off"
    moves = ", ".join(f"{lab} {'up' if loadings[i] > 0 else 'down'}" for lab, i in zip(label, shown))
    return (f"{head} along one direction ({moves}); along it the posterior spread is "
            f"{np.sqrt(max(kept_share, 0.0)):.2f} times the prior's (1 or more: the data do not "
            f"narrow this combination)")


def information_summary(names, prior_draws, post_draws, p_magmatic=None, pi0=None,
                        scrub_name="scrubbed_so2") -> dict:
    """Per parameter contraction (analysis units), Gaussian KL, the P(M0) shift, the leading
    unresolved direction (loadings and words) and near_prior; plain floats and lists."""
    names = list(names)
    x0 = np.array(prior_draws, dtype=float, ndmin=2)
    x1 = np.array(post_draws, dtype=float, ndmin=2)
    keep = np.std(x0, axis=0) > 0
    names = [n for n, k in zip(names, keep) if k]
    mask = log_scaled(x0[:, keep])
    z0, z1 = to_analysis_units(x0[:, keep], mask), to_analysis_units(x1[:, keep], mask)
    ok = np.isfinite(z1).all(axis=1)
    z1 = z1[ok]
    c = contraction(z0, z1)
    loadings, kept = principal_axis(z0, z1)
    shift = None if p_magmatic is None or pi0 is None else float(p_magmatic - pi0)
    c_scrub = float(c[names.index(scrub_name)]) if scrub_name in names else None
    near = bool((shift is not None and abs(shift) < NEAR_PRIOR_SHIFT)
                or (c_scrub is not None and c_scrub < NEAR_PRIOR_CONTRACTION))
    return {"contraction": {n: float(v) for n, v in zip(names, c)},
            "log10_units": [n for n, m in zip(names, mask) if m],
            "kl_gaussian_nats": gaussian_kl(z0, z1),
            "p_magmatic_shift": shift,
            "unresolved_axis": {n: float(v) for n, v in zip(names, loadings)},
            "unresolved_kept_share": kept,
            "unresolved_words": axis_words(names, loadings, kept, mask),
            "near_prior": near}
