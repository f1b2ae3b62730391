"""Small prior and forward objects with the shared interfaces, for inference tests.

They follow /work/notes/interfaces.md (PriorSpec and ForwardModel duck types) but are
cheap and have evidences that are analytic or computable by brute force.
"""
from __future__ import annotations

import numpy as np
from scipy import stats


class ToyPrior:
    """Independent 1-D priors: ("uniform", lo, hi) or ("normal", mean, sd) per parameter."""

    def __init__(self, params: dict, fixed: dict | None = None, p_magmatic: float = 0.5,
                 likelihood: dict | None = None, name: str = "toy"):
        self.params = dict(params)
        self.fixed = dict(fixed or {})
        self.parameter_names = tuple(self.params)
        self.free_names = tuple(n for n in self.parameter_names if n not in self.fixed)
        self.p_magmatic = p_magmatic
        self.likelihood = dict(likelihood or {"kind": "normal", "relative_sigma": 0.15})
        self.name = name
        self.description = "toy prior for tests"
        self.path = None
        self.melt_oxides_wt = {}
        self.models = {}

    @property
    def bounds(self) -> dict:
        out = {}
        for n in self.free_names:
            kind, a, b = self.params[n]
            out[n] = (a, b) if kind == "uniform" else (-np.inf, np.inf)
        return out

    @property
    def distributions(self) -> dict:
        """The package's distribution objects (engines that integrate a parameter out need them)."""
        from ventsource.inference.priors.distributions import TruncNormal, Uniform
        return {n: Uniform(a, b) if kind == "uniform" else TruncNormal(a, b)
                for n, (kind, a, b) in self.params.items()}

    def sample(self, rng, n):
        cols = []
        for name in self.free_names:
            kind, a, b = self.params[name]
            cols.append(rng.uniform(a, b, n) if kind == "uniform" else rng.normal(a, b, n))
        return np.column_stack(cols)

    def log_prob(self, theta_free):
        th = np.atleast_2d(np.asarray(theta_free, dtype=float))
        out = np.zeros(th.shape[0])
        for j, name in enumerate(self.free_names):
            kind, a, b = self.params[name]
            x = th[:, j]
            if kind == "uniform":
                out += np.where((x >= a) & (x <= b), -np.log(b - a), -np.inf)
            else:
                out += stats.norm.logpdf(x, a, b)
        return out

    def full(self, theta_free):
        th = np.atleast_2d(np.asarray(theta_free, dtype=float))
        out = np.empty((th.shape[0], len(self.parameter_names)))
        j = 0
        for k, name in enumerate(self.parameter_names):
            if name in self.fixed:
                out[:, k] = self.fixed[name]
            else:
                out[:, k] = th[:, j]
                j += 1
        return out

    def with_fixed(self, name, value):
        if name not in self.parameter_names:
            raise KeyError(name)
        fx = dict(self.fixed)
        fx[name] = float(value)
        return ToyPrior(self.params, fx, self.p_magmatic, self.likelihood, self.name + f"[{name}={value}]")

    def to_dict(self):
        return {"name": self.name, "params": {k: list(v) for k, v in self.params.items()},
                "fixed": self.fixed}


class LinearLogForward:
    """ln(ratio) = a + B @ theta_full: linear-Gaussian in log space (analytic evidence)."""

    def __init__(self, spec, a, B, ratio_names):
        self.parameter_names = spec.parameter_names
        self.ratio_names = tuple(ratio_names)
        self.a = np.asarray(a, float)
        self.B = np.asarray(B, float)

    def ratios(self, theta_full):
        th = np.atleast_2d(theta_full)
        return np.exp(self.a[None, :] + th @ self.B.T)

    def status(self, theta_full):
        return np.zeros(np.atleast_2d(theta_full).shape[0], dtype=int)


class ScrubToyForward:
    """Two-parameter caricature of degassing + scrubbing, with a no-gas region.

    depth in [0, 1] (deeper gas is CO2-richer), scrubbed_so2 in [0, 1):
      SO2/CO2 = exp(1 - 2 depth) (1 - s)
      H2S/SO2 = exp(-2 + depth) / (1 - s)
      H2O/CO2 = exp(4 - 3 depth)
    depth > no_gas_above gives a NaN row (status 1), like a state above saturation.
    """

    ratio_names = ("SO2/CO2", "H2S/SO2", "H2O/CO2")

    def __init__(self, spec, ratio_names=None, no_gas_above: float = 0.95):
        self.parameter_names = spec.parameter_names
        self.i_depth = self.parameter_names.index("depth")
        self.i_s = self.parameter_names.index("scrubbed_so2")
        self.no_gas_above = no_gas_above
        if ratio_names is not None:
            self.ratio_names = tuple(ratio_names)
        self.n_calls = 0

    def ratios(self, theta_full):
        th = np.atleast_2d(theta_full)
        self.n_calls += th.shape[0]
        z = th[:, self.i_depth]
        s = th[:, self.i_s]
        keep = 1.0 - s
        with np.errstate(divide="ignore"):
            table = {"SO2/CO2": np.exp(1.0 - 2.0 * z) * keep,
                     "H2S/SO2": np.exp(-2.0 + z) / keep,
                     "H2O/CO2": np.exp(4.0 - 3.0 * z)}
        out = np.column_stack([table[n] for n in self.ratio_names])
        out[self.status(th) != 0] = np.nan
        return out

    def status(self, theta_full):
        th = np.atleast_2d(theta_full)
        return np.where(th[:, self.i_depth] > self.no_gas_above, 1, 0)

    # the same toy as a gas composition, for engines that scrub the gas themselves
    product = "loss"
    style = "closed"

    def state(self, theta_full, saturation=False):
        """Gas (n, species) whose ratios are the ones above: CO2 = 1, SO2 = exp(1 - 2 depth)
        (1 - s), H2S = exp(1 - 2 depth) exp(-2 + depth), H2O = exp(4 - 3 depth)."""
        from ventsource.chemistry.species import INDEX, SPECIES
        th = np.atleast_2d(theta_full)
        z, s = th[:, self.i_depth], th[:, self.i_s]
        gas = np.zeros((th.shape[0], len(SPECIES)))
        gas[:, INDEX["CO2"]] = 1.0
        gas[:, INDEX["SO2"]] = np.exp(1.0 - 2.0 * z) * (1.0 - s)
        gas[:, INDEX["H2S"]] = np.exp(1.0 - 2.0 * z) * np.exp(-2.0 + z)
        gas[:, INDEX["H2O"]] = np.exp(4.0 - 3.0 * z)
        gas /= gas.sum(axis=1, keepdims=True)
        status = self.status(th)
        gas[status != 0] = np.nan
        self.n_calls += th.shape[0]
        return {"gas": gas, "status": status}


def scrub_toy_prior(p_magmatic=0.5, s_max=0.9, likelihood=None):
    return ToyPrior({"depth": ("uniform", 0.0, 1.0), "scrubbed_so2": ("uniform", 0.0, s_max)},
                    p_magmatic=p_magmatic, likelihood=likelihood)


def gaussian_evidence(y, sigma, a, B, mu0, sd0):
    """log N(y; a + B mu0, B diag(sd0^2) B^T + diag(sigma^2)): marginal of a linear-Gaussian
    model (Bishop 2006, Pattern Recognition and Machine Learning, eq. 2.115; from memory)."""
    B = np.asarray(B, float)
    cov = B @ np.diag(np.asarray(sd0, float) ** 2) @ B.T + np.diag(np.asarray(sigma, float) ** 2)
    return stats.multivariate_normal(np.asarray(a) + B @ np.asarray(mu0), cov).logpdf(y)


def gaussian_posterior(y, sigma, a, B, mu0, sd0):
    """Posterior mean and covariance of the linear-Gaussian model (Bishop 2006, eqs. 2.116-2.117;
    from memory)."""
    B = np.asarray(B, float)
    P0 = np.diag(1.0 / np.asarray(sd0, float) ** 2)
    L = np.diag(1.0 / np.asarray(sigma, float) ** 2)
    cov = np.linalg.inv(P0 + B.T @ L @ B)
    mean = cov @ (B.T @ L @ (np.asarray(y) - np.asarray(a)) + P0 @ np.asarray(mu0))
    return mean, cov
