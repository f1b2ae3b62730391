"""PriorSpec: a validated prior, with sampling, densities and variants."""
from __future__ import annotations

import copy
import math
from typing import Any

import numpy as np

from ventsource.inference.priors.distributions import Distribution, Fixed, Uniform
from ventsource.inference.priors.fields import PriorFileError
from ventsource.inference.priors.parameter_table import check_physical_range
from ventsource.inference.priors.schema import SCHEMA_VERSION
from ventsource.inference.priors.window_table import HYPOTHESIS_ROWS_DEFAULT, PER_ROW_DEFAULT, PRESSURE_ROWS_DEFAULT


class PriorSpec:
    """A validated prior. Build with :func:`load_prior_file` or :func:`parse_prior`.

    Array conventions: ``theta_free`` is (n, len(free_names)); a single 1-D
    vector (len(free_names),) is also accepted and then ``log_prob`` returns a
    float and ``full``/``prior_transform`` return 1-D arrays (the call shapes
    of emcee without vectorisation and of dynesty).
    """

    def __init__(self, *, path, metadata, distributions, sources, descriptions, melt_oxides_wt,
                 melt_source, models, likelihood, p_magmatic, epsilon, magmatic_source=None,
                 release=None, window=None):
        self.path = path
        self.metadata = dict(metadata)
        self.name: str = metadata["name"]
        self.description: str = metadata["description"]
        self.citation: str = metadata["citation"]
        self.fictional: bool = bool(metadata.get("fictional", False))
        self.distributions: dict[str, Distribution] = dict(distributions)
        self.sources: dict[str, str] = dict(sources)
        self.descriptions: dict[str, str] = dict(descriptions)
        self.melt_oxides_wt: dict[str, float] = dict(melt_oxides_wt)
        self.melt_source: str = melt_source
        self.models: dict[str, str] = dict(models)
        self.likelihood: dict[str, Any] = dict(likelihood)
        self.p_magmatic: float = float(p_magmatic)
        self.epsilon: float = float(epsilon)
        self.magmatic_source = magmatic_source
        self.release = release  # ReleasePrior of the third hypothesis (M2), or None: two hypotheses
        self.window = window    # WindowTable of the file's [window], or None: the default per-row set
        self.parameter_names: tuple[str, ...] = tuple(self.distributions)
        self.free_names: tuple[str, ...] = tuple(
            n for n, d in self.distributions.items() if not isinstance(d, Fixed))
        self.fixed_values: dict[str, float] = {
            n: d.value for n, d in self.distributions.items() if isinstance(d, Fixed)}
        self._free_dists = [self.distributions[n] for n in self.free_names]
        self._free_index = np.array([self.parameter_names.index(n) for n in self.free_names], dtype=int)
        # uniform columns share one vector expression in log_prob (it runs once per sampler call)
        uni = [j for j, d in enumerate(self._free_dists) if type(d) is Uniform]
        self._uniform_cols = np.array(uni, dtype=int)
        self._uniform_lo = np.array([self._free_dists[j].lower for j in uni], dtype=float)
        self._uniform_hi = np.array([self._free_dists[j].upper for j in uni], dtype=float)
        self._uniform_log_density = -float(sum(math.log(self._free_dists[j].upper - self._free_dists[j].lower)
                                               for j in uni))
        self._other_cols = [j for j in range(len(self._free_dists)) if j not in uni]

    @property
    def window_per_row(self) -> tuple[str, ...]:
        """Parameters that vary from row to row in the window model ([window] per_row)."""
        return PER_ROW_DEFAULT if self.window is None else self.window.per_row

    @property
    def window_pressure_rows(self) -> str:
        """How per-row pressures relate in the window model ([window] pressure_rows)."""
        chosen = None if self.window is None else self.window.pressure_rows
        return PRESSURE_ROWS_DEFAULT if chosen is None else chosen

    @property
    def window_hypothesis_rows(self) -> str:
        """How rows' hypotheses relate in the window model ([window] hypothesis_rows)."""
        chosen = None if self.window is None else self.window.hypothesis_rows
        return HYPOTHESIS_ROWS_DEFAULT if chosen is None else chosen

    # ---- shapes
    @property
    def ndim(self) -> int:
        """Number of free (sampled) parameters."""
        return len(self.free_names)

    @property
    def free_bounds(self) -> np.ndarray:
        """(len(free_names), 2) array of support bounds [lower, upper] of the free parameters."""
        return np.array([[d.lower, d.upper] for d in self._free_dists], dtype=float).reshape(-1, 2)

    def _as_2d(self, theta, what: str) -> tuple[np.ndarray, bool]:
        arr = np.asarray(theta, dtype=float)
        single = arr.ndim == 1
        if single:
            arr = arr[None, :]
        if arr.ndim != 2 or arr.shape[1] != self.ndim:
            raise ValueError(f"{what}: expected shape (n, {self.ndim}) for free parameters "
                             f"{self.free_names}, got {np.shape(theta)}")
        return arr, single

    # ---- probability
    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """(n, len(free_names)) independent draws from the prior, using ``rng``."""
        if not isinstance(rng, np.random.Generator):
            raise TypeError("sample: rng must be a numpy.random.Generator (e.g. np.random.default_rng(seed))")
        n = int(n)
        out = np.empty((n, self.ndim))
        for j, d in enumerate(self._free_dists):
            out[:, j] = d.sample(rng, n)
        return out

    def log_prob(self, theta_free):
        """Log prior density of the free parameters: (n,) array, -inf outside the support."""
        arr, single = self._as_2d(theta_free, "log_prob")
        if self._uniform_cols.size:
            x = arr[:, self._uniform_cols]
            inside = np.all((x >= self._uniform_lo) & (x <= self._uniform_hi), axis=1)  # NaN: outside
            lp = np.where(inside, self._uniform_log_density, -np.inf)
        else:
            lp = np.zeros(arr.shape[0])
        for j in self._other_cols:
            lp = lp + self._free_dists[j].log_pdf(arr[:, j])
        lp = np.where(np.isnan(lp), -np.inf, lp)
        return float(lp[0]) if single else lp

    def prior_transform(self, u):
        """Map points of the unit cube to the prior (inverse CDF per parameter), for nested sampling."""
        arr, single = self._as_2d(u, "prior_transform")
        out = np.empty_like(arr)
        for j, d in enumerate(self._free_dists):
            out[:, j] = d.ppf(arr[:, j])
        return out[0] if single else out

    def full(self, theta_free) -> np.ndarray:
        """(n, len(parameter_names)) array: the free values with the fixed ones inserted."""
        arr, single = self._as_2d(theta_free, "full")
        out = np.empty((arr.shape[0], len(self.parameter_names)))
        for i, name in enumerate(self.parameter_names):
            if name in self.fixed_values:
                out[:, i] = self.fixed_values[name]
        out[:, self._free_index] = arr
        return out[0] if single else out

    # ---- variants
    def with_fixed(self, name: str, value: float) -> "PriorSpec":
        """A new PriorSpec with parameter ``name`` held at ``value`` (e.g. scrubbed_so2 = 0 for M0)."""
        if name not in self.distributions:
            raise ValueError(f"with_fixed: unknown parameter {name!r} (have: {', '.join(self.parameter_names)})")
        if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
            raise ValueError(f"with_fixed: value for {name!r} must be a number, got {value!r}")
        dist = Fixed(float(value))
        try:
            check_physical_range(str(self.path), name, dist)
        except PriorFileError as exc:
            raise ValueError(f"with_fixed: {name} = {value!r} is outside the physical range "
                             f"({str(exc).split(': ', 2)[-1]})") from None
        dists = dict(self.distributions)
        dists[name] = dist
        sources = dict(self.sources)
        sources[name] = f"fixed at {float(value):g} by with_fixed (was: {self.sources[name]})"
        return PriorSpec(
            path=self.path, metadata=self.metadata, distributions=dists, sources=sources,
            descriptions=self.descriptions, melt_oxides_wt=self.melt_oxides_wt,
            melt_source=self.melt_source, models=self.models, likelihood=self.likelihood,
            p_magmatic=self.p_magmatic, epsilon=self.epsilon, magmatic_source=self.magmatic_source,
            release=self.release, window=self.window)

    # ---- provenance
    def to_dict(self) -> dict:
        """Plain nested dict (str/float/bool only), the same layout as the TOML file plus ``path``.

        Without its ``path`` entry the dict is valid input for :func:`parse_prior`,
        which rebuilds an equal prior.
        """
        params = {}
        for name, d in self.distributions.items():
            entry = d.to_dict()
            entry["source"] = self.sources[name]
            if name in self.descriptions:
                entry["description"] = self.descriptions[name]
            params[name] = entry
        melt = dict(self.melt_oxides_wt)
        melt["source"] = self.melt_source
        magmatic: dict[str, Any] = {"p_magmatic": self.p_magmatic, "epsilon": self.epsilon}
        if self.magmatic_source is not None:
            magmatic["source"] = self.magmatic_source
        extra = {"hypotheses": self.release.to_dict()} if self.release is not None else {}
        if self.window is not None:
            extra["window"] = self.window.to_dict()
        return copy.deepcopy({**extra,
            "path": str(self.path),
            "schema_version": SCHEMA_VERSION,
            "metadata": self.metadata,
            "parameters": params,
            "melt": melt,
            "models": self.models,
            "likelihood": self.likelihood,
            "magmatic": magmatic,
        })

    def __repr__(self) -> str:
        fixed = ", ".join(f"{k}={v:g}" for k, v in self.fixed_values.items())
        return (f"PriorSpec(name={self.name!r}, free={self.free_names}"
                + (f", fixed: {fixed}" if fixed else "") + ")")
