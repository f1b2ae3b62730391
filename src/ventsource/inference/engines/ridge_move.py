"""Moves in coordinates that straighten a curved posterior ridge (per run).

Fitted to a run's particles at the start of a stage: rotate so that one axis leads (the
ridge's direction, chosen in RidgeMap), and subtract from every other coordinate its
least-squares quadratic in the lead coordinate t (the ridge's bend). The map
u -> y = (t, rest - g(t)) is a rotation followed by a shear, so its Jacobian is 1: a
symmetric proposal in y is symmetric in u, and an independence density in y is the
same density in u (change of variables), so the Metropolis-Hastings ratio is the one
the move has in y. The moves are a random walk and a Student-t independence proposal
in y (the random-walk and independence moves of this folder, in these coordinates).
The map is fitted to the population at the start of the stage and then fixed, which
keeps the stage's target invariant, as for the other fitted moves here.
Why: on a window of 336 rows the runs disagreed along a bent ridge that straight-line
proposals followed poorly (DEVELOPERS.md, the ridge move).
"""
import numpy as np
from scipy import optimize

from ventsource.inference.engines.independence_move import propose_independent
from ventsource.inference.engines.random_walk_move import propose_random_walk

CANDIDATES = 3     # largest principal axes tried as the ridge's lead
REFINE_EVALS = 300   # Nelder-Mead evaluations refining the lead's direction
RIDGE = 1e-6       # relative ridge-regression penalty of the quadratic fit


def _design(t):
    """Columns 1, t, t^2 of the lead coordinate t (n, 1)."""
    return np.column_stack([np.ones(t.shape[0]), t, t * t])


class RidgeMap:
    """u <-> y, fitted to one run's stage-start particles u (n, d). The lead axis is the
    one whose quadratic leaves the smallest residual volume (log determinant of the
    straightened covariance): the best of the CANDIDATES largest principal axes and the d
    coordinate axes, refined by Nelder-Mead over directions; the other axes complete an
    orthonormal basis."""

    def __init__(self, u):
        self.mean = u.mean(axis=0)
        centred = u - self.mean
        d = u.shape[1]
        vals, vecs = np.linalg.eigh(np.atleast_2d(np.cov(u, rowvar=False)))
        leads = list(vecs[:, np.argsort(vals)[::-1][:CANDIDATES]].T) + list(np.eye(d))
        lead = min(leads, key=lambda v: _volume(centred, v)[0])
        if d > 1:
            lead = optimize.minimize(lambda v: _volume(centred, v)[0], lead, method="Nelder-Mead",
                                     options={"maxfev": REFINE_EVALS, "xatol": 1e-3, "fatol": 1e-4}).x
        _, self.basis, self.coef = _volume(centred, lead)

    def to_y(self, u):
        return _straighten((u - self.mean) @ self.basis, self.coef)

    def from_y(self, y):
        t = y[:, :1]
        x = np.column_stack([t, y[:, 1:] + _design(t) @ self.coef])
        return self.mean + x @ self.basis.T


def _volume(centred, lead):
    """(log det of the straightened covariance, basis, quadratic coefficients) with lead first."""
    d = centred.shape[1]
    lead = np.asarray(lead, float) / max(float(np.linalg.norm(lead)), 1e-300)
    basis = np.linalg.qr(np.column_stack([lead, np.eye(d)]))[0][:, :d]
    basis[:, 0] *= np.sign(basis[:, 0] @ lead) or 1.0
    x = centred @ basis
    coef = _fit(x)
    score = np.linalg.slogdet(np.atleast_2d(np.cov(_straighten(x, coef), rowvar=False)))[1]
    return score, basis, coef


def _fit(x):
    """Least-squares quadratic in the lead score x[:, 0] of every other score."""
    a = _design(x[:, :1])
    gram = a.T @ a
    gram += RIDGE * np.trace(gram) / gram.shape[0] * np.eye(gram.shape[0])
    return np.linalg.solve(gram, a.T @ x[:, 1:])


def _straighten(x, coef):
    return np.column_stack([x[:, :1], x[:, 1:] - _design(x[:, :1]) @ coef])


def fit_ridge(u):
    """(RidgeMap, Cholesky factor of the straightened particles' covariance, their mean)."""
    ridge = RidgeMap(u)
    y = ridge.to_y(u)
    cov = np.atleast_2d(np.cov(y, rowvar=False))
    cov += 1e-9 * np.eye(cov.shape[0]) * max(1.0, float(np.trace(cov)) / cov.shape[0])
    try:
        lower = np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        lower = np.diag(np.sqrt(np.maximum(np.diag(cov), 1e-12)))
    return ridge, lower, y.mean(axis=0)


def propose_ridge_walk(u, run_of, fits, scale, rngs):
    """Random walk in each run's straightened coordinates; symmetric in u."""
    out = np.empty_like(u)
    for r, (ridge, lower, _) in fits.items():
        rows = run_of == r
        y = ridge.to_y(u[rows])
        y_new = propose_random_walk(y, np.zeros(y.shape[0], int), {0: lower}, {0: scale[r]}, {0: rngs[r]})
        out[rows] = ridge.from_y(y_new)
    return out


def propose_ridge_independent(u, run_of, fits, rngs):
    """(proposals, log q(u) - log q(u')) from a t in each run's straightened coordinates."""
    out = np.empty_like(u)
    log_corr = np.empty(u.shape[0])
    for r, (ridge, lower, mean) in fits.items():
        rows = run_of == r
        y = ridge.to_y(u[rows])
        y_new, log_corr[rows] = propose_independent(y, np.zeros(y.shape[0], int), {0: (mean, lower)},
                                                    {0: rngs[r]})
        out[rows] = ridge.from_y(y_new)
    return out, log_corr
