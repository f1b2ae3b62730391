"""The scrubbed SO2 fraction integrated out of the likelihood.

Scrubbing acts on the gas after degassing, so for one magmatic gas x (one forward
solve) the likelihood of "no scrubbing" (M0) and of "scrubbing with s drawn from
its prior" (M1) are

    L0 = L(ratios(x)),   L1 = integral p(s) L(ratios(scrub(x, s))) ds.

Every scrubbing product removes s x_SO2 and adds or removes amounts linear in
s x_SO2 (see ventsource.ascent.scrubbing), so each ratio is (a + b s) / (c + d s)
with a, b, c, d fixed by x: no further forward solve is needed.

* Fast path (product "loss", normal likelihood, every SO2-dependent ratio exact and
  of the form SO2/X or X/SO2): with v = ln(1 - s) each such ratio is its magmatic
  value times exp(k v), k = +-1, so the likelihood is a Gaussian in v (completing
  the square) and L1 is a Gaussian average of the prior density of v:
  closed form for a uniform prior (a normal CDF difference), Gauss-Legendre in the
  Gaussian's probability scale otherwise.
* General path: the integrand is evaluated on a coarse grid in v, then on a fine
  grid around its maximum (composite trapezoid rule on both, fine part replacing
  the coarse one inside its window).

The same v-scale is used to draw s from its conditional posterior given x (for the
"if scrubbed" posterior) by inverse CDF on the quadrature grid.
"""
from __future__ import annotations

import numpy as np
from scipy import special

from ventsource.ascent import observables
from ventsource.chemistry.species import INDEX, SPECIES
from ventsource.inference.priors.distributions import Beta, Uniform

_SO2, _H2S, _H2O = INDEX["SO2"], INDEX["H2S"], INDEX["H2O"]
V_FLOOR = np.log(1e-6)     # s up to 1 - 1e-6: beyond it SO2 is below any sensor's limit
N_GAUSS = 24               # Gauss-Legendre nodes of the fast path
N_COARSE, N_FINE = 64, 96  # grid points of the general path
WINDOW_CELLS = 6           # the fine grid spans this many coarse cells each side of the peak


def log_ratios_of(gas, top, bottom):
    """ln of molar ratios (n, m) from weight matrices; -inf/NaN where undefined."""
    return observables.log_ratios(gas, top, bottom)


def _log_diff_ndtr(alpha, beta):
    """log(Phi(beta) - Phi(alpha)) for alpha <= beta, accurate in both tails."""
    alpha, beta = np.broadcast_arrays(np.asarray(alpha, float), np.asarray(beta, float))
    hi = special.log_ndtr(beta)
    lo = special.log_ndtr(alpha)
    upper = alpha > 0.0  # both far right: the survival side Phi(-alpha) - Phi(-beta) keeps precision
    if np.any(upper):
        hi = np.where(upper, special.log_ndtr(-np.where(upper, alpha, 0.0)), hi)
        lo = np.where(upper, special.log_ndtr(-np.where(upper, beta, 0.0)), lo)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = hi + np.log1p(-np.exp(lo - hi))
    return np.where(beta > alpha, out, -np.inf)


def change_vector(gas, product, h2s_return):
    """d(gas)/ds per unit scrubbed fraction, (n, n_species); see ventsource.ascent.scrubbing."""
    dx = np.zeros_like(gas)
    so2 = gas[:, _SO2]
    dx[:, _SO2] = -so2
    if product == "h2s_sulfate":   # 4 SO2 + 4 H2O = H2S + 3 H2SO4
        dx[:, _H2S] = h2s_return * so2 / 4.0
        dx[:, _H2O] = -so2
    elif product == "sulfur_sulfate":  # 3 SO2 + 2 H2O = S + 2 H2SO4
        dx[:, _H2O] = -so2 * 2.0 / 3.0
    return dx


class So2MultiplierMarginal:
    """log L0 and log L_alt (an SO2 multiplier e^v integrated out) for batches of magmatic gas.

    The alternative hypothesis multiplies the magmatic SO2 by e^v with v in a support
    [v_lo, v_hi] and a prior density p_v(v); every other species moves linearly with the
    parameter of the subclass (its change_vector). Subclasses give the parameter <-> v
    maps, the support and whether the change is a pure SO2 multiplier (fast path).

    likelihood : ventsource.inference.likelihood.Likelihood (prediction columns =
                 ratio_names); distribution : the prior of the subclass's parameter.
    """

    def __init__(self, likelihood, ratio_names, product, distribution):
        self.lik = likelihood
        self.product = product
        self.dist = distribution
        top, bottom = observables.weight_matrices(tuple(ratio_names))
        cols = likelihood._cols
        self.top, self.bottom = top[:, cols], bottom[:, cols]
        self.v_lo, self.v_hi = self._v_support()
        self.k = self._powers()
        self.fast = (self._pure_so2_multiplier() and likelihood.kind == "normal" and self.k is not None
                     and not np.any(likelihood.c[self.k != 0]))
        if self.fast:
            s = likelihood.s
            self.precision = float(np.sum(self.k ** 2 / s ** 2))
            self._inv_var = 1.0 / s ** 2
            self._k_inv_var = self.k / s ** 2
            self._all_exact_normal = not np.any(likelihood.c)
            self._ll0_const = float(-np.sum(np.log(s)) - 0.5 * s.size * np.log(2.0 * np.pi))
        # s = 1 - e^v and r = e^v - 1 both have |d param / dv| = e^v, so a uniform prior
        # (beta(1, 1) included) gives p_v = e^v / width: the same closed form
        self.uniform = isinstance(distribution, Uniform) or (
            isinstance(distribution, Beta) and distribution.a == 1.0 and distribution.b == 1.0)
        self.gl_x, self.gl_w = np.polynomial.legendre.leggauss(N_GAUSS)

    # ---- hooks of the subclasses
    def _v_support(self):
        raise NotImplementedError

    def _pure_so2_multiplier(self):
        raise NotImplementedError

    def param_of_v(self, v):
        raise NotImplementedError

    def change(self, gas, h2s_return):
        """d(gas)/d(parameter), (n, n_species)."""
        raise NotImplementedError

    def log_prior_v(self, v):
        """Prior density of v: p(param(v)) |d param / dv| = p(param(v)) e^v for both subclasses."""
        with np.errstate(invalid="ignore", over="ignore"):
            out = self.dist.log_pdf(self.param_of_v(v)) + v
        return np.where(np.isnan(out), -np.inf, out)

    def _clip_param(self, x):
        return np.clip(x, max(self.dist.lower, self._param_floor), min(self.dist.upper, self._param_ceiling))

    def _powers(self):
        """k per observed ratio if each is SO2^(+-1) times an SO2-free part, else None."""
        so2_only = np.zeros(len(SPECIES))
        so2_only[_SO2] = 1.0
        k = np.zeros(self.top.shape[1])
        for j in range(self.top.shape[1]):
            for sign, w in ((1.0, self.top[:, j]), (-1.0, self.bottom[:, j])):
                if w[_SO2] == 0.0:
                    continue
                if not np.array_equal(w, so2_only):
                    return None
                k[j] += sign
        return k

    def log_likelihoods(self, gas, h2s_return=1.0, log_ratios=None):
        """(log L0, log L1), each (n,), for magmatic gas (n, n_species) after any H2S change.

        log_ratios: optional (n, n_forward_ratios) ln of the forward model's ratios of the
        same gas (computed once and shared by the rows of a window; fast path only)."""
        if self.fast:
            if log_ratios is None:
                log_ratios = log_ratios_of(gas, self.top, self.bottom)
            else:
                log_ratios = log_ratios[:, self.lik._cols]
            return self._fast(log_ratios)
        return self._general(gas, h2s_return)[:2]

    # ---- fast path
    def _fast(self, mu):
        lik = self.lik
        bad = ~np.isfinite(mu).all(axis=1)
        resid = lik.y[None, :] - np.where(bad[:, None], 0.0, mu)
        if self._all_exact_normal:
            ll0 = self._ll0_const - 0.5 * np.einsum("ij,ij,j->i", resid, resid, self._inv_var)
        else:
            ll0 = self._pointwise_from_log(lik.y[None, :] - resid).sum(axis=1)
        b = resid @ self._k_inv_var
        tau = 1.0 / np.sqrt(self.precision)
        m = b / self.precision
        log_avg = self._log_gauss_avg_prior(m, tau)
        ll1 = ll0 + 0.5 * b * b / self.precision + 0.5 * np.log(2.0 * np.pi) + np.log(tau) + log_avg
        ll0[bad] = -np.inf
        ll1[bad] = -np.inf
        return ll0, np.where(np.isnan(ll1), -np.inf, ll1)

    def _pointwise_from_log(self, mu):
        lik = self.lik
        z = (lik.y[None, :] - mu) / lik.s[None, :]
        out = np.empty_like(z)
        exact = lik.c == 0
        out[:, exact] = lik._logpdf_std(z[:, exact]) - np.log(lik.s[exact])[None, :]
        out[:, lik.c == -1] = lik._logcdf_std(z[:, lik.c == -1])
        out[:, lik.c == 1] = lik._logcdf_std(-z[:, lik.c == 1])
        return out

    def _log_gauss_avg_prior(self, m, tau):
        """log E_{v ~ N(m, tau^2)}[p_v(v)] over the support [v_lo, v_hi]."""
        lo, hi = self.v_lo, self.v_hi
        if self.uniform:  # p_v = e^v / (b - a): tilt the Gaussian by e^v (closed form)
            width = self.dist.upper - self.dist.lower
            shift = m + tau * tau
            return (m + 0.5 * tau * tau - np.log(width)
                    + _log_diff_ndtr((lo - shift) / tau, (hi - shift) / tau))
        t_nodes, log_mass = self._probability_nodes(m, tau)
        v = t_nodes
        lp = self.log_prior_v(v)
        return log_mass + special.logsumexp(lp, axis=1, b=0.5 * self.gl_w[None, :])

    def _probability_nodes(self, m, tau):
        """Gauss-Legendre nodes in the Gaussian's probability scale over [v_lo, v_hi]."""
        a = (self.v_lo - m) / tau
        b = (self.v_hi - m) / tau
        log_mass = _log_diff_ndtr(a, b)
        # mirrored scale where the window sits in the right tail keeps the precision
        right = a > 0.0
        # in log probability (ndtri_exp): a window far in a tail underflows ndtr to 0,
        # which collapsed every node onto the support's edge
        log_pa = np.where(right, special.log_ndtr(-b), special.log_ndtr(a))
        log_pb = np.where(right, special.log_ndtr(-a), special.log_ndtr(b))
        x = 0.5 * (self.gl_x[None, :] + 1.0)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            log_t = log_pb[:, None] + np.log(x + (1.0 - x) * np.exp(log_pa - log_pb)[:, None])
        z = special.ndtri_exp(np.minimum(log_t, -1e-16))
        z = np.where(right[:, None], -z, z)
        v = np.clip(m[:, None] + tau * z, self.v_lo, self.v_hi)
        return v, log_mass

    # ---- general path
    def _ratio_parts(self, gas, h2s_return):
        dx = self.change(gas, h2s_return)
        return gas @ self.top, dx @ self.top, gas @ self.bottom, dx @ self.bottom

    def _log_integrand(self, parts, v):
        """log L(s(v)) + log p_v(v) for v (n, K): (n, K)."""
        a, b, c, d = parts
        s = self.param_of_v(v)[:, :, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            mu = np.log(a[:, None, :] + b[:, None, :] * s) - np.log(c[:, None, :] + d[:, None, :] * s)
        n, K, m = mu.shape
        bad = ~np.isfinite(mu).all(axis=2)
        ll = self._pointwise_from_log(np.where(np.isfinite(mu), mu, 0.0).reshape(n * K, m))
        ll = ll.sum(axis=1).reshape(n, K)
        ll[bad] = -np.inf
        return np.where(np.isnan(ll), -np.inf, ll) + self.log_prior_v(v)

    def _general(self, gas, h2s_return):
        n = gas.shape[0]
        parts = self._ratio_parts(gas, h2s_return)
        a, _, c, _ = parts
        with np.errstate(divide="ignore", invalid="ignore"):
            mu0 = np.log(a) - np.log(c)
        bad = ~np.isfinite(mu0).all(axis=1)
        ll0 = self._pointwise_from_log(np.where(np.isfinite(mu0), mu0, 0.0)).sum(axis=1)
        ll0[bad] = -np.inf
        coarse = np.broadcast_to(np.linspace(self.v_lo, self.v_hi, N_COARSE), (n, N_COARSE))
        f_coarse = self._log_integrand(parts, coarse)
        peak = np.argmax(f_coarse, axis=1)
        lo_i = np.maximum(peak - WINDOW_CELLS, 0)
        hi_i = np.minimum(peak + WINDOW_CELLS, N_COARSE - 1)
        rows = np.arange(n)
        w_lo, w_hi = coarse[rows, lo_i], coarse[rows, hi_i]
        fine = w_lo[:, None] + (w_hi - w_lo)[:, None] * np.linspace(0.0, 1.0, N_FINE)[None, :]
        f_fine = self._log_integrand(parts, fine)
        grid = np.concatenate([coarse, fine], axis=1)
        logw = np.concatenate([_trapezoid_log_weights(coarse, outside=(lo_i, hi_i)),
                               _trapezoid_log_weights(fine)], axis=1)
        f = np.concatenate([f_coarse, f_fine], axis=1) + logw
        ll1 = special.logsumexp(f, axis=1)
        ll1[bad | np.isnan(ll1)] = -np.inf
        return ll0, ll1, grid, f

    # ---- conditional draws of the parameter given the gas
    def sample(self, gas, rng, h2s_return=1.0):
        """One draw of the parameter per row from p(param | gas, data, alternative)."""
        n = gas.shape[0]
        if self.fast:
            grid, logf = self._fast_grid(gas)
        else:
            _, _, grid, logf = self._general(gas, h2s_return)
            order = np.argsort(grid, axis=1)
            grid = np.take_along_axis(grid, order, axis=1)
            logf = np.take_along_axis(logf, order, axis=1)
        v = _inverse_cdf_on_grid(grid, logf, rng.random(n), rng.random(n))
        return self._clip_param(self.param_of_v(v))

    def _fast_grid(self, gas):
        lik = self.lik
        with np.errstate(divide="ignore", invalid="ignore"):
            mu = np.log(gas @ self.top) - np.log(gas @ self.bottom)
        mu = np.where(np.isfinite(mu), mu, 0.0)
        b = ((lik.y[None, :] - mu) * (self.k / lik.s ** 2)[None, :]).sum(axis=1)
        m, tau = b / self.precision, 1.0 / np.sqrt(self.precision)
        lo = np.maximum(m - 8.0 * tau, self.v_lo)
        hi = np.minimum(m + 8.0 * tau, self.v_hi)
        empty = lo >= hi  # Gaussian entirely outside the support: its nearer edge
        lo = np.where(empty, np.where(m > self.v_hi, self.v_hi - 1e-9, self.v_lo), lo)
        hi = np.where(empty, lo + 1e-9, hi)
        grid = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, 257)[None, :]
        logf = -0.5 * ((grid - m[:, None]) / tau) ** 2 + self.log_prior_v(grid)
        return grid, logf + _trapezoid_log_weights(grid)


class ScrubbingMarginal(So2MultiplierMarginal):
    """Scrubbed fraction s: SO2 times 1 - s = e^v, v = ln(1 - s) <= 0 (M1)."""

    _param_floor, _param_ceiling = 0.0, 1.0

    def _v_support(self):
        with np.errstate(divide="ignore"):  # s up to 1: ln(0) = -inf, floored
            v_lo = max(float(np.log1p(-min(self.dist.upper, 1.0))), V_FLOOR)
        return v_lo, float(np.log1p(-max(self.dist.lower, 0.0)))

    def _pure_so2_multiplier(self):
        return self.product == "loss"

    def param_of_v(self, v):
        return -np.expm1(v)

    def change(self, gas, h2s_return):
        return change_vector(gas, self.product, np.broadcast_to(h2s_return, gas.shape[:1]))


def _trapezoid_log_weights(grid, outside=None):
    """log trapezoid weights of an increasing grid (n, K); with outside=(lo_index, hi_index)
    the cells between those grid points are dropped (integrated on a finer grid)."""
    dv = np.diff(grid, axis=1)
    w = np.zeros_like(grid)
    if outside is not None:
        cell = np.arange(grid.shape[1] - 1)[None, :]
        lo_i, hi_i = outside
        dv = np.where((cell < lo_i[:, None]) | (cell >= hi_i[:, None]), dv, 0.0)
    w[:, :-1] += 0.5 * dv
    w[:, 1:] += 0.5 * dv
    with np.errstate(divide="ignore"):
        return np.log(w)


def _inverse_cdf_on_grid(grid, logf, u, u_cell):
    """Draw from the piecewise-constant density exp(logf) (already times cell weights)."""
    f = np.exp(logf - np.max(logf, axis=1, keepdims=True))
    f = np.where(np.isfinite(f), f, 0.0)
    cdf = np.cumsum(f, axis=1)
    total = cdf[:, -1:]
    total = np.where(total > 0, total, 1.0)
    idx = (cdf / total < u[:, None]).sum(axis=1)
    idx = np.minimum(idx, grid.shape[1] - 1)
    rows = np.arange(grid.shape[0])
    left = grid[rows, np.maximum(idx - 1, 0)]
    right = grid[rows, np.minimum(idx + 1, grid.shape[1] - 1)]
    centre = grid[rows, idx]
    # uniform within the cell that the point's trapezoid weight stands for
    a = 0.5 * (left + centre)
    b = 0.5 * (centre + right)
    return a + (b - a) * u_cell


class So2FactorMarginal(So2MultiplierMarginal):
    """SO2 times a free factor x = e^v, v uniform over [ln x_min, ln x_max] of a log-uniform
    distribution of x; nothing else changes (the parameter is x - 1, as for a release).

    A nuisance device of the window model's source check (window.So2FreeWindowTarget),
    not a physical process: it lets SO2 take any value a row asks for."""

    def _v_support(self):
        return float(np.log(self.dist.lower)), float(np.log(self.dist.upper))

    def _pure_so2_multiplier(self):
        return True

    def param_of_v(self, v):
        return np.expm1(v)

    def log_prior_v(self, v):
        inside = (v >= self.v_lo) & (v <= self.v_hi)
        return np.where(inside, -np.log(self.v_hi - self.v_lo), -np.inf)

    def _clip_param(self, x):
        return np.clip(x, np.expm1(self.v_lo), np.expm1(self.v_hi))

    def change(self, gas, h2s_return):
        dx = np.zeros_like(gas)
        dx[:, _SO2] = gas[:, _SO2]
        return dx
