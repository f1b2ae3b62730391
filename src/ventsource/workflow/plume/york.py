"""Straight-line fits for gas ratios, vectorised over many windows at once.

Arrays are (n_windows, n_points); points with weight 0 (or NaN data) are
left out, so windows of different lengths share one array.

* York, Evensen, Martinez Lopez and De Basabe Delgado (2004), Am. J. Phys. 72,
  367-375: "Unified equations for the slope, intercept, and standard errors of
  the best straight line" (errors in both variables, optional correlation r).
* Ordinary least squares of y on x (x taken as exact), with the textbook
  standard errors.
"""
from dataclasses import dataclass

import numpy as np


@dataclass
class LineFit:
    slope: np.ndarray
    intercept: np.ndarray
    slope_sigma: np.ndarray       # 1-sigma
    intercept_sigma: np.ndarray   # 1-sigma
    n_points: np.ndarray
    mswd: np.ndarray              # reduced chi-square S / (n - 2); NaN for OLS
    r_squared: np.ndarray         # squared Pearson correlation of the points used
    converged: np.ndarray
    x_centre: np.ndarray          # weighted mean x: cov(a, b) = -x_centre * slope_sigma**2


def _as_2d(*arrays):
    out = [np.atleast_2d(np.asarray(a, dtype=float)) for a in arrays]
    shape = np.broadcast_shapes(*(a.shape for a in out))
    return [np.broadcast_to(a, shape) for a in out]


def _masked(x, y, weight_x, weight_y):
    ok = np.isfinite(x) & np.isfinite(y) & (weight_x > 0) & (weight_y > 0)
    ok &= np.isfinite(weight_x) & np.isfinite(weight_y)
    return (np.where(ok, x, 0.0), np.where(ok, y, 0.0), np.where(ok, weight_x, 0.0),
            np.where(ok, weight_y, 0.0), ok)


def pearson_r_squared(x, y, used):
    n = used.sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mx = np.where(used, x, 0).sum(axis=-1) / n
        my = np.where(used, y, 0).sum(axis=-1) / n
        dx = np.where(used, x - mx[..., None], 0)
        dy = np.where(used, y - my[..., None], 0)
        return (dx * dy).sum(-1) ** 2 / ((dx * dx).sum(-1) * (dy * dy).sum(-1))


def york_fit(x, y, sigma_x, sigma_y, r_xy=0.0, tol=1e-12, max_iter=100):
    """York et al. (2004) best line y = a + b x with errors in x and y.

    sigma_x, sigma_y: 1-sigma per point (or per window, broadcast); r_xy the
    correlation of the x and y errors. Iterates their eqs. (13a) and (13c)
    from the OLS slope, then gives the standard errors of slope and intercept
    from the adjusted points (their section III, steps 7-8).
    """
    if _per_window(sigma_x) and _per_window(sigma_y) and np.all(np.asarray(r_xy) == 0):
        return _york_constant_sigma(x, y, sigma_x, sigma_y, tol, max_iter)
    x, y, sx, sy = _as_2d(x, y, sigma_x, sigma_y)
    with np.errstate(divide="ignore"):
        wx_raw, wy_raw = 1.0 / sx ** 2, 1.0 / sy ** 2
    x, y, wx, wy, used = _masked(x, y, wx_raw, wy_raw)
    r = np.broadcast_to(np.asarray(r_xy, dtype=float), x.shape)
    alpha = np.sqrt(wx * wy)
    b = ols_fit(np.where(used, x, np.nan), np.where(used, y, np.nan)).slope
    b = np.where(np.isfinite(b), b, 0.0)
    converged = np.zeros(x.shape[0], dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(max_iter):
            bb = b[:, None]
            w = np.where(used, wx * wy / (wx + bb * bb * wy - 2 * bb * r * alpha), 0.0)
            sw = w.sum(axis=1)
            x_bar, y_bar = (w * x).sum(1) / sw, (w * y).sum(1) / sw
            u, v = x - x_bar[:, None], y - y_bar[:, None]
            beta = w * (u / wy + bb * v / wx - (bb * u + v) * r / alpha)
            beta = np.where(used, beta, 0.0)
            b_new = (w * beta * v).sum(1) / (w * beta * u).sum(1)
            step = np.abs(b_new - b)
            b = np.where(converged, b, b_new)
            converged |= step <= tol * np.maximum(np.abs(b_new), 1e-300)
            if converged.all():
                break
        a = y_bar - b * x_bar
        adjusted_x = np.where(used, x_bar[:, None] + beta, 0.0)
        x_mean_adj = (w * adjusted_x).sum(1) / sw
        u_adj = np.where(used, adjusted_x - x_mean_adj[:, None], 0.0)
        sigma_b = np.sqrt(1.0 / (w * u_adj ** 2).sum(1))
        sigma_a = np.sqrt(1.0 / sw + x_mean_adj ** 2 * sigma_b ** 2)
        n = used.sum(1)
        chi2 = (w * (y - b[:, None] * x - a[:, None]) ** 2).sum(1)
        mswd = chi2 / (n - 2)
    return LineFit(b, a, sigma_b, sigma_a, n, mswd, pearson_r_squared(x, y, used), converged,
                   x_mean_adj)


def _per_window(sigma):
    """A scalar, or an (n_windows, 1) column: one sigma for every point of a window."""
    return np.size(sigma) == 1 or (np.ndim(sigma) == 2 and np.shape(sigma)[1] == 1)


def _york_constant_sigma(x, y, sigma_x, sigma_y, tol, max_iter):
    """York et al. (2004) when every point of a window has the same sigma_x, sigma_y and
    r = 0: the weights W = 1 / (sigma_y^2 + b^2 sigma_x^2) are equal within a window, so
    the iteration (13a, 13c) and the standard errors need only the sums Suu, Suv, Svv."""
    x, y = _as_2d(x, y)
    used = np.isfinite(x) & np.isfinite(y)
    n = used.sum(axis=1)
    vx = np.broadcast_to(np.asarray(sigma_x, dtype=float).reshape(-1), n.shape) ** 2
    vy = np.broadcast_to(np.asarray(sigma_y, dtype=float).reshape(-1), n.shape) ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        x_bar = np.where(used, x, 0).sum(1) / n
        y_bar = np.where(used, y, 0).sum(1) / n
        u = np.where(used, x - x_bar[:, None], 0.0)
        v = np.where(used, y - y_bar[:, None], 0.0)
        suu, suv, svv = (u * u).sum(1), (u * v).sum(1), (v * v).sum(1)
        b = suv / suu
        converged = np.zeros(n.shape, dtype=bool)
        for _ in range(max_iter):     # beta_i = W (u_i vy + b v_i vx); b = sum(beta v) / sum(beta u)
            b_new = (vy * suv + b * vx * svv) / (vy * suu + b * vx * suv)
            step = np.abs(b_new - b)
            b = np.where(converged, b, b_new)
            converged |= step <= tol * np.maximum(np.abs(b_new), 1e-300)
            if converged.all():
                break
        w = 1.0 / (vy + b * b * vx)
        a = y_bar - b * x_bar
        sum_beta2 = w * w * (vy * vy * suu + 2 * b * vx * vy * suv + b * b * vx * vx * svv)
        sigma_b = np.sqrt(1.0 / (w * sum_beta2))
        sigma_a = np.sqrt(1.0 / (w * n) + x_bar ** 2 * sigma_b ** 2)
        mswd = w * (svv - 2 * b * suv + b * b * suu) / (n - 2)
        r2 = suv ** 2 / (suu * svv)
    return LineFit(b, a, sigma_b, sigma_a, n, mswd, r2, converged, x_bar)


def ols_fit(x, y):
    """Ordinary least squares of y on x per window; NaN entries are left out."""
    x, y = _as_2d(x, y)
    used = np.isfinite(x) & np.isfinite(y)
    n = used.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mx = np.where(used, x, 0).sum(1) / n
        my = np.where(used, y, 0).sum(1) / n
        dx = np.where(used, x - mx[:, None], 0.0)
        dy = np.where(used, y - my[:, None], 0.0)
        sxx, sxy = (dx * dx).sum(1), (dx * dy).sum(1)
        b = sxy / sxx
        a = my - b * mx
        resid = np.where(used, dy - b[:, None] * dx, 0.0)
        s2 = (resid ** 2).sum(1) / (n - 2)
        sigma_b = np.sqrt(s2 / sxx)
        sigma_a = np.sqrt(s2 * (1.0 / n + mx ** 2 / sxx))
    return LineFit(b, a, sigma_b, sigma_a, n, np.full(b.shape, np.nan),
                   pearson_r_squared(x, y, used), np.ones(b.shape, dtype=bool), mx)
