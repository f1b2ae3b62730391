"""M0 (no scrubbing) versus M1 (scrubbing): posterior model probability and checks.

* P(M0 | data) = pi0 Z0 / (pi0 Z0 + (1 - pi0) Z1) (Bayes' theorem for two models,
  Kass and Raftery 1995, J. Am. Stat. Assoc. 90:773, eq. 1), computed from log
  evidences; its Monte Carlo error by the delta method from the two independent
  log-evidence errors: dP/dlogZ0 = P(1 - P) = -dP/dlogZ1.
* K hypotheses (M0, M1, M2 with a release prior): P(Mk | data) = pi_k Z_k / sum_j pi_j Z_j
  (the same theorem); delta-method error from independent log-evidence errors sigma_j:
  dP_k/dlogZ_j = P_k (delta_kj - P_j), so var P_k = sum_j P_k^2 (delta_kj - P_j)^2 sigma_j^2,
  which for K = 2 is the two-model formula above.
* P(scrubbed < epsilon | data, M1) from the posterior draws, with the MC error
  sqrt(p (1 - p) / ESS).
* Posterior predictive check per model (Gelman, Meng and Stern 1996, Statistica Sinica
  6:733): for each observed ratio the replicated ln-observation y_rep = ln(pred) +
  noise is drawn over the posterior; an exact value passes if it lies inside the central
  (1 - alpha) predictive interval (two-sided predictive p-value >= alpha); a censored
  value passes if the predictive probability of the censored region is >= alpha / 2.
  A model "reproduces" the measurement if every ratio passes.  If neither model does,
  the flag "unexplained" is raised, so that a failure of M0 alone is never read as
  evidence of scrubbing. With M2 a gas that M2 reproduces is not "unexplained"; one that
  it does not is flagged "m2_not_reproducing" (release_flags).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import special

__all__ = ["posterior_model_probability", "posterior_model_probabilities", "probability_below",
           "PredictiveCheck", "predictive_check", "model_flags", "release_flags"]


def posterior_model_probability(log_z0: float, log_z0_error: float, log_z1: float,
                                log_z1_error: float, pi0: float = 0.5):
    """(P(M0|data), its MC standard error) from the two log evidences."""
    if not (0.0 < pi0 < 1.0):
        raise ValueError(f"prior probability of M0 must be in (0, 1), got {pi0!r}")
    if not np.isfinite(log_z0) and not np.isfinite(log_z1):
        return float("nan"), float("nan")
    # log posterior odds M1:M0
    lo = (log_z1 - log_z0) + np.log1p(-pi0) - np.log(pi0)
    p0 = float(special.expit(-lo))   # expit handles lo = +-inf exactly
    err = p0 * (1.0 - p0) * float(np.hypot(log_z0_error, log_z1_error))
    return p0, err


def posterior_model_probabilities(log_z, log_z_error, prior_probabilities):
    """(P(Mk | data), their MC standard errors) for K models from their log evidences.

    A model with log Z = -inf (no state reproduces anything) gets P = 0 and error 0."""
    lz = np.asarray(log_z, dtype=float)
    err = np.asarray(log_z_error, dtype=float)
    pi = np.asarray(prior_probabilities, dtype=float)
    if not (lz.shape == err.shape == pi.shape and lz.ndim == 1):
        raise ValueError("log evidences, their errors and the prior probabilities must be "
                         "1-D arrays of one length")
    if not (np.all(pi > 0.0) and abs(pi.sum() - 1.0) < 1e-9):
        raise ValueError(f"prior model probabilities must be positive and sum to 1, got {pi.tolist()}")
    if not np.any(np.isfinite(lz)):
        return np.full(lz.size, np.nan), np.full(lz.size, np.nan)
    a = np.log(pi) + lz
    w = np.exp(a - np.max(a))          # exp(-inf) = 0 for a model without a valid state
    p = w / w.sum()
    jac = np.diag(p) - np.outer(p, p)  # dP_k / dlog Z_j
    terms = np.where(jac == 0.0, 0.0, jac * jac * err[None, :] ** 2)
    return p, np.sqrt(terms.sum(axis=1))


def probability_below(draws, epsilon: float, ess: float | None = None):
    """(P(x < epsilon), MC error) from posterior draws (any shape)."""
    x = np.asarray(draws, dtype=float).reshape(-1)
    p = float(np.mean(x < epsilon))
    n = x.size if ess is None or not np.isfinite(ess) else max(float(ess), 1.0)
    return p, float(np.sqrt(max(p * (1 - p), 0.0) / n))


@dataclass
class PredictiveCheck:
    """Per-ratio predictive p-values and pass/fail of one model."""

    ratio_names: tuple
    p_values: np.ndarray        # two-sided for exact, P(censored region) for limits
    censoring: np.ndarray
    interval_low: np.ndarray    # central (1 - alpha) predictive interval of the ratio
    interval_high: np.ndarray
    alpha: float
    passed: np.ndarray = field(default=None)

    @property
    def reproduces(self) -> bool:
        return bool(np.all(self.passed))


def predictive_check(likelihood, predictions, rng: np.random.Generator, alpha: float = 0.01,
                     max_draws: int = 20000) -> PredictiveCheck:
    """Posterior predictive check of one model.

    likelihood : ventsource.inference.likelihood.Likelihood of the measurement
    predictions : (..., m) model predictions at posterior draws
    """
    pred = np.asarray(predictions, dtype=float).reshape(-1, likelihood.n_predicted)
    if pred.shape[0] > max_draws:
        pred = pred[rng.choice(pred.shape[0], max_draws, replace=False)]
    y_rep = likelihood.simulate_log(pred, rng)
    good = ~np.isnan(y_rep).any(axis=1)
    y_rep = y_rep[good]
    m = likelihood.y.size
    pv = np.empty(m)
    lo = np.empty(m)
    hi = np.empty(m)
    passed = np.empty(m, dtype=bool)
    for j in range(m):
        yr = y_rep[:, j]
        lo[j], hi[j] = np.exp(np.quantile(yr, [alpha / 2, 1 - alpha / 2])) if yr.size else (np.nan, np.nan)
        c = likelihood.c[j]
        yj = likelihood.y[j]
        if yr.size == 0:
            pv[j] = 0.0
        elif c == 0:
            below = np.mean(yr <= yj)
            pv[j] = min(1.0, 2.0 * min(below, 1.0 - below + np.mean(yr == yj)))
        elif c == -1:
            pv[j] = np.mean(yr < yj)
        else:
            pv[j] = np.mean(yr > yj)
        passed[j] = pv[j] >= (alpha if c == 0 else alpha / 2)
    return PredictiveCheck(likelihood.observed_names, pv, likelihood.c.copy(), lo, hi, alpha, passed)


def model_flags(check0: PredictiveCheck | None, check1: PredictiveCheck | None) -> list:
    """Flags from the two predictive checks."""
    flags = []
    if check0 is not None and not check0.reproduces:
        flags.append("m0_not_reproducing")
    if check1 is not None and not check1.reproduces:
        flags.append("m1_not_reproducing")
    r0 = check0.reproduces if check0 is not None else False
    r1 = check1.reproduces if check1 is not None else False
    if not r0 and not r1:
        flags.append("unexplained")
    return flags


def release_flags(flags, check2: PredictiveCheck | None) -> list:
    """Flags once M2 has been checked: a gas M2 reproduces is not "unexplained"."""
    if check2 is not None and check2.reproduces:
        return [f for f in flags if f != "unexplained"]
    return list(flags) + ["m2_not_reproducing"]
