"""Window model: rows that share one magma source.

Rows of a window share the magma's parameters psi (temperature, redox, bulk
volatiles, sulfur content and partitioning, and every other parameter of the prior
file except the per-row ones); each row i keeps its own degassing pressure P_i and
its own scrubbed fraction s_i, which is exactly 0 with prior probability pi0.
Given psi the rows are independent, so

    L(psi) = prod_i integral p(P) [pi0 L0_i(psi, P) + (1 - pi0) L1_i(psi, P)] dP,

(with a release prior, + pi2 L2_i(psi, P): released sulfur, see release_marginal.py),
with L1_i the scrubbed fraction integrated out (so2_marginal.py) and the pressure
integral done by quadrature: one batch of forward solves on a grid of pressures
(uniform in ln P, which resolves the fast change of the gas at low pressure) serves
every row; the gas composition is interpolated linearly in ln(mole fraction)
between the solved pressures onto a finer quadrature grid, up to the pressure where
a draw's gas ends (saturation_edge.py). The cost per draw of
psi does not grow with the number of rows beyond the cheap per-row likelihoods.

The prior file's [window] table may make pressure shared (per_row without
pressure_bar): P is then part of psi, sampled with the magma's parameters, and one
forward solve per draw serves every row (a one-point grid, no quadrature).
"""
from __future__ import annotations

import numpy as np
from scipy import special

from ventsource.ascent import observables
from ventsource.inference.hypotheses.release_marginal import ReleaseMarginal
from ventsource.inference.window.pooled_pressure import (PooledPrior, ScoreTable, cell_log_masses, normal_scores,
                                                         pooled_log_weights, pooled_range, pooled_tilt)
from ventsource.inference.window.saturation_edge import (bisect_edge, edge_gas, edge_nodes, edge_positions,
                                                  trapezoid_log_weights)
from ventsource.inference.priors.distributions import LogUniform
from ventsource.inference.hypotheses.so2_marginal import So2FactorMarginal, ScrubbingMarginal, log_ratios_of
from ventsource.inference.window import hypothesis_persistence
from ventsource.inference.window.kernels import RowPack, qualifies

# Forward solves per draw of psi and quadrature points per solved interval. Measured on
# near-posterior draws of a synthetic 8-row arc_basalt window against 400 solves: 24 x 3
# left up to 0.59 nats in a row's log Z0 and 0.058 in its responsibility, 48 x 2 leaves
# 0.09 and 0.016 (0.5 nats in log Z1 at a saturation edge, where the gas changes fastest).
N_SOLVE = 48
REFINE = 2
SO2_FREE_RANGE = (1e-3, 10.0)  # SO2 factor of the source check: 99.9 % scrubbed to x10 released


def pressure_grid(distribution, n_solve=N_SOLVE, refine=REFINE):
    """(solve nodes, quadrature nodes, log quadrature weights) in bar for a pressure prior."""
    lo, hi = float(distribution.lower), float(distribution.upper)
    ln_solve = np.linspace(np.log(lo), np.log(hi), n_solve)
    ln_quad = np.linspace(np.log(lo), np.log(hi), (n_solve - 1) * refine + 1)
    w = np.full(ln_quad.size, ln_quad[1] - ln_quad[0])
    w[0] *= 0.5
    w[-1] *= 0.5
    p_quad = np.exp(ln_quad)
    with np.errstate(divide="ignore"):
        log_w = np.log(w) + ln_quad + distribution.log_pdf(p_quad)  # dP = P d ln P
    log_w -= special.logsumexp(log_w)  # the prior's own normalisation on the grid
    return np.exp(ln_solve), p_quad, log_w


def interpolate_gas(gas_solve, n_solve, refine):
    """(n, n_solve, s) gas -> (n, (n_solve-1)*refine+1, s), linear in ln x between nodes.

    A solved node keeps its own gas even when a neighbour has none (NaN)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        lx = np.log(gas_solve)
        frac = np.arange(1, refine) / refine
        left, right = lx[:, :-1, None, :], lx[:, 1:, None, :]
        inner = left * (1.0 - frac)[None, None, :, None] + right * frac[None, None, :, None]
    n, k, _, s = left.shape
    out = np.concatenate([left, inner], axis=2).reshape(n, k * refine, s)
    return np.exp(np.concatenate([out, lx[:, -1:, :]], axis=1))


def _grid_log_norm(ln_quad, distribution):
    """The normaliser pressure_grid divides its raw trapezoid weights by."""
    raw = trapezoid_log_weights(ln_quad[None, :], distribution.log_pdf, 0.0)[0]
    return float(special.logsumexp(raw))


def _log_sum_weighted(log_f, log_w):
    """log sum_k exp(log_f[..., k] + log_w[k]) (scipy's logsumexp without its overhead)."""
    x = log_f + log_w
    top = np.max(x, axis=-1, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.sum(np.exp(x - top), axis=-1)) + top[..., 0]


class WindowTarget:
    """log L(psi) of a window and the per-row log Z0_i(psi), log Z1_i(psi)."""

    def __init__(self, prior, forward, likelihoods, pi0, n_solve=N_SOLVE, refine=REFINE, per_row=None,
                 adaptive=True, persistent=None):
        self.per_row = tuple(prior.window_per_row if per_row is None else per_row)  # [window] per_row
        if "scrubbed_so2" not in self.per_row or not set(self.per_row) <= {"pressure_bar", "scrubbed_so2"}:
            raise ValueError(f"window model: per_row {self.per_row} must hold scrubbed_so2 and "
                             "at most pressure_bar besides")
        for name in self.per_row:
            if name not in prior.free_names:
                raise ValueError(f"window model: {name} must be a free parameter of the prior")
        self.prior = prior
        self.pressure_per_row = "pressure_bar" in self.per_row
        shared = prior.with_fixed("scrubbed_so2", 0.0)
        if self.pressure_per_row:  # a placeholder: gas_on_grid sets the grid's pressures
            shared = shared.with_fixed("pressure_bar", float(prior.distributions["pressure_bar"].lower))
        self.pooled = self.pressure_per_row and prior.window_pressure_rows == "pooled"
        # persistent hypotheses: rho integrated out per draw (hypothesis_persistence.py)
        self.persistent = persistent if persistent is not None else prior.window_hypothesis_rows == "persistent"
        self.shared_prior = PooledPrior(shared) if self.pooled else shared
        self.forward = forward
        self.pi0 = float(pi0)
        if self.pressure_per_row:
            self.n_solve, self.refine = n_solve, refine
            self._pressure_prior = prior.distributions["pressure_bar"]
            self.p_solve, self.p_quad, self.log_w = pressure_grid(self._pressure_prior, n_solve, refine)
            self.ln_quad = np.log(self.p_quad)
            self._log_norm = _grid_log_norm(self.ln_quad, self._pressure_prior)
            self._z = normal_scores(self.log_w)
        else:  # shared pressure: one solve per draw serves every row, a one-point "grid"
            self.n_solve, self.refine = 1, 1
            self.p_solve, self.p_quad, self.log_w = np.empty(0), np.empty(0), np.zeros(1)
        # pooled: each draw's solves and points span its own pool's range (pooled_pressure.py);
        # adaptive=False keeps the prior's whole range for every draw (the reference in tests)
        self.adaptive = self.pooled and adaptive
        self._scores = ScoreTable(self._pressure_prior) if self.adaptive else None
        dist_s = prior.distributions["scrubbed_so2"]
        self.marginals = [ScrubbingMarginal(lik, forward.ratio_names, forward.product, dist_s)
                          for lik in likelihoods]
        release = getattr(prior, "release", None)  # third hypothesis M2, or None (two, as before)
        self.releases = None if release is None else [
            ReleaseMarginal(lik, forward.ratio_names, forward.product, release.distribution)
            for lik in likelihoods]
        self.log_pis = (np.array([np.log(self.pi0), np.log1p(-self.pi0)]) if release is None
                        else np.log(release.probabilities(self.pi0)))
        self._weights = observables.weight_matrices(forward.ratio_names)
        self._pack_rows()
        names = tuple(self.shared_prior.parameter_names)
        self._j_p = names.index("pressure_bar")
        self._j_h = names.index("h2s_return") if "h2s_return" in names else None

    def _pack_rows(self):
        """Split the rows into those of the compiled loop and those of the NumPy path."""
        sets = [[m] if self.releases is None else [m, self.releases[i]] for i, m in enumerate(self.marginals)]
        self._compiled_rows = [i for i, ms in enumerate(sets) if all(qualifies(m) for m in ms)]
        self._numpy_rows = [i for i in range(len(sets)) if i not in self._compiled_rows]
        self._pack = RowPack([sets[i] for i in self._compiled_rows]) if self._compiled_rows else None

    @property
    def n_rows(self):
        return len(self.marginals)

    def gas_on_grid(self, psi):
        """(gas (n, K, species) on the quadrature grid, h2s_return (n,) or 1.0, edges).

        edges: None, or (draws, their ln P points (m, K)) for the draws whose gas ends
        inside the grid (saturation_edge.py); log_weights takes it."""
        full = self.shared_prior.full(psi)
        n = full.shape[0]
        if not self.pressure_per_row:
            return self._gas_at_shared_pressure(full)
        ln_solve, ln_quad = self._draw_grids(np.atleast_2d(psi))
        rep = np.repeat(full, self.n_solve, axis=0)
        rep[:, self._j_p] = np.exp(np.broadcast_to(ln_solve, (n, self.n_solve))).ravel()
        gas_solve = self._solve(rep).reshape(n, self.n_solve, -1)
        gas = interpolate_gas(gas_solve, self.n_solve, self.refine)
        h2s = full[:, self._j_h] if self._j_h is not None else 1.0
        return gas, h2s, self._saturation_edges(full, gas_solve, gas, ln_solve, ln_quad)

    def _draw_grids(self, psi):
        """ln P of the solves and of the quadrature points: the fixed grid (n_solve,), (K,),
        or with adaptive pooling each draw's own, uniform over its pool's range."""
        if not self.adaptive:
            return np.log(self.p_solve), self.ln_quad
        lo, hi = pooled_range(self._scores, psi)
        span = (hi - lo)[:, None]
        return (lo[:, None] + span * np.linspace(0.0, 1.0, self.n_solve),
                lo[:, None] + span * np.linspace(0.0, 1.0, self.ln_quad.size))

    def _solve(self, full):
        st = self.forward.state(full, saturation=self.forward.style == "open")
        return np.where((st["status"] == 0)[:, None], st["gas"], np.nan)

    def _saturation_edges(self, full, gas_solve, gas, ln_solve, ln_quad):
        """Find the end of the gas inside the grid and re-place that interval's points
        (in place in gas); (draws, ln P (m, K)) or None. With adaptive pooling every
        draw has its own points: (all draws, (n, K))."""
        n = len(full)
        j_all = edge_nodes(np.isfinite(gas_solve).all(axis=2))
        e = np.flatnonzero(j_all >= 0)
        if e.size == 0:
            return (np.arange(n), ln_quad) if self.adaptive else None
        j = j_all[e]
        ln_solve = np.broadcast_to(ln_solve, (n, self.n_solve))
        sub = full[e].copy()

        def solve(ln_p):
            sub[:, self._j_p] = np.exp(ln_p)
            g = self._solve(sub)
            return g, np.isfinite(g).all(axis=1)

        gas_node = gas_solve[e, j]
        ln_edge, gas_edge = bisect_edge(solve, ln_solve[e, j], ln_solve[e, j + 1], gas_node)
        ln_p = edge_positions(ln_quad[e] if self.adaptive else self.ln_quad, self.refine, j, ln_edge)
        gas[e] = edge_gas(gas[e], self.refine, j, gas_node, gas_edge)
        if not self.adaptive:
            return e, ln_p
        out = ln_quad.copy()
        out[e] = ln_p
        return np.arange(n), out

    def _gas_at_shared_pressure(self, full):
        """(gas (n, 1, species), h2s_return, None): the pressure is a shared parameter."""
        gas = self._solve(full)
        h2s = full[:, self._j_h] if self._j_h is not None else 1.0
        return gas[:, None, :], h2s, None

    def row_pressures(self, psi, k, rng, edges=None):
        """Pressure (bar) of one draw per shared draw, k the grid index drawn for each:
        a point of the quadrature cell around point k, uniform in ln P."""
        if not self.pressure_per_row:
            return self.shared_prior.full(psi)[:, self._j_p]
        n = len(k)
        ln_p = np.array(np.broadcast_to(self.ln_quad, (n, self.ln_quad.size)))
        if edges is not None:
            ln_p[edges[0]] = edges[1]
        rows = np.arange(n)
        lo = 0.5 * (ln_p[rows, np.maximum(k - 1, 0)] + ln_p[rows, k])
        hi = 0.5 * (ln_p[rows, np.minimum(k + 1, ln_p.shape[1] - 1)] + ln_p[rows, k])
        return np.exp(lo + (hi - lo) * rng.random(n))

    @property
    def n_hypotheses(self):
        return self.log_pis.size

    def log_weights(self, psi, edges=None):
        """Log quadrature weights of each row's pressure: (K,), or (n, K) when pooled or
        when some draws have their own points (edges from gas_on_grid)."""
        if self.adaptive:
            return self._adaptive_log_weights(np.atleast_2d(psi), edges)
        base = pooled_log_weights(self.log_w, self._z, psi) if self.pooled else self.log_w
        if edges is None:
            return base
        e, ln_p = edges
        out = np.array(np.broadcast_to(base, (len(psi), self.log_w.size)))
        log_w = trapezoid_log_weights(ln_p, self._pressure_prior.log_pdf, self._log_norm)
        if self.pooled:  # the copula at the points' own scores, normalised on the full grid
            z = np.interp(ln_p, self.ln_quad, self._z)
            norm = special.logsumexp(self.log_w + pooled_tilt(self._z, psi[e]), axis=1, keepdims=True)
            log_w = log_w + pooled_tilt(z, psi[e]) - norm
        out[e] = log_w
        return out

    def _adaptive_log_weights(self, psi, edges):
        """(n, K) log weights on each draw's own points (edges from gas_on_grid, or None:
        the draws' uncollapsed grids): each point's exact prior mass under the copula
        (cell_log_masses), normalised on the draw's whole range (the mass above a
        saturation edge stays, with zero likelihood). A trapezoid of the density missed
        the copula's fall to zero at the prior's ends: up to 3.7 nats in a row's log Z1
        whose likelihood climbs to the top of the range (8-row window, 48 against 400
        solves)."""
        _, ln_full = self._draw_grids(psi)
        ln_p = ln_full if edges is None else edges[1]
        full = cell_log_masses(self._scores, ln_full, psi)
        return cell_log_masses(self._scores, ln_p, psi) - special.logsumexp(full, axis=1, keepdims=True)

    def _flat(self, gas, h2s):
        """Grid gas flattened to (n K, species), its bad points, h2s_return and ln ratios."""
        n, K, s = gas.shape
        flat = gas.reshape(n * K, s)
        bad = ~np.isfinite(flat).all(axis=1)
        flat = np.where(bad[:, None], 1.0, flat)
        h = np.repeat(h2s, K) if np.ndim(h2s) else h2s
        return flat, bad, h, log_ratios_of(flat, *self._weights)  # ratios shared by every row

    def row_log_likelihoods(self, gas, h2s, rows=None):
        """(ll0, ll1[, ll2]), each (rows, n, K): per row and grid point, NaN gas -> -inf."""
        n, K, _ = gas.shape
        flat, bad, h, log_ratios = self._flat(gas, h2s)
        out = [[] for _ in range(self.n_hypotheses)]
        for i in range(self.n_rows) if rows is None else rows:
            lls = list(self.marginals[i].log_likelihoods(flat, h, log_ratios=log_ratios))
            if self.releases is not None:
                lls.append(self.releases[i].log_likelihoods(flat, h, log_ratios=log_ratios)[1])
            for k, ll in enumerate(lls):
                ll[bad] = -np.inf
                out[k].append(ll.reshape(n, K))
        return tuple(np.stack(o) for o in out)

    def row_evidences(self, psi):
        """(log Z0, log Z1[, log Z2]), each (n, rows): pressure integrated out for each row.

        Rows on the marginal's exact-normal fast path go through the compiled loop
        (window_kernels.py); any other row through NumPy."""
        gas, h2s, edges = self.gas_on_grid(psi)
        n = gas.shape[0]
        log_w = self.log_weights(np.atleast_2d(psi), edges)
        out = np.empty((self.n_hypotheses, n, self.n_rows))
        if self._pack is not None:
            _, bad, _, log_ratios = self._flat(gas, h2s)
            out[:, :, self._compiled_rows] = self._pack.evidences(log_ratios, bad, log_w)
        if self._numpy_rows:
            lls = self.row_log_likelihoods(gas, h2s, rows=self._numpy_rows)
            for k, ll in enumerate(lls):
                out[k][:, self._numpy_rows] = _log_sum_weighted(ll, log_w).T
        return tuple(out)

    def row_mixture(self, *lz):
        mix = np.logaddexp(self.log_pis[0] + lz[0], self.log_pis[1] + lz[1])
        for k in range(2, len(lz)):
            mix = np.logaddexp(mix, self.log_pis[k] + lz[k])
        return mix

    def window_log_likelihood(self, lz):
        """(n,) log L of the rows from their evidences lz (tuple of (n, rows) per hypothesis)."""
        if self.persistent:
            return hypothesis_persistence.marginal_log_likelihood(np.stack(lz, axis=1), self.log_pis)
        total = self.row_mixture(*lz).sum(axis=1)
        return np.where(np.isnan(total), -np.inf, total)

    def cumulative_log_likelihood(self, lz):
        """(n, rows) log L of the first 1, 2, ... rows; lz (n, H, rows)."""
        if self.persistent:
            return hypothesis_persistence.marginal_cumulative(lz, self.log_pis)
        mix = self.row_mixture(*[lz[:, k] for k in range(lz.shape[1])])
        return np.cumsum(np.where(np.isnan(mix), -np.inf, mix), axis=1)

    def row_states(self, lz):
        """(n, rows, H) each row's hypothesis probabilities given every row and the draw."""
        if self.persistent:
            return hypothesis_persistence.marginal_state_probabilities(np.stack(lz, axis=1), self.log_pis)
        mix = self.row_mixture(*lz)
        return np.stack([np.exp(self.log_pis[k] + lz[k] - mix) for k in range(len(lz))], axis=-1)

    def __call__(self, psi):
        lz = self.row_evidences(psi)
        total = self.window_log_likelihood(lz)
        return np.where(np.isnan(total), -np.inf, total), {f"lz{k}": v for k, v in enumerate(lz)}


class So2FreeWindowTarget(WindowTarget):
    """The window model with each row's SO2 a free nuisance factor, for the source check.

    Every row's SO2 is multiplied by its own x, log-uniform over [1e-3, 10] (uniform in
    v = ln x): one hypothesis that covers no change, scrubbing (x < 1) and release
    (x > 1) at the same prior cost in every model compared. The rows then inform the
    source only through what a change of SO2 alone leaves untouched (H2O/CO2, and
    H2S/SO2 x SO2/CO2 = H2S/CO2): a change of source is not confused with a change of
    scrubbing, whose amount would otherwise weigh in through its own prior. Exact for
    the "loss" product and for release; other products also move H2S or H2O a little."""

    def __init__(self, prior, forward, likelihoods, n_solve=N_SOLVE, refine=REFINE, per_row=None):
        super().__init__(prior, forward, likelihoods, 0.5, n_solve, refine, per_row, persistent=False)
        factor = LogUniform(SO2_FREE_RANGE[0], SO2_FREE_RANGE[1])
        self.marginals = [So2FactorMarginal(lik, forward.ratio_names, forward.product, factor)
                          for lik in likelihoods]
        self.releases = None
        self.log_pis = np.array([-np.inf, 0.0])   # "M1" = SO2 free; no separate M0
        self._pack_rows()
