"""Measured gas ratios and their log-likelihood under a forward model.

Convention (stated once, used everywhere):

* Ratios are compared in natural-log space, y = ln(observed), mu = ln(predicted).
* A relative 1-sigma r on a ratio becomes sigma_ln = ln(1 + r).  For small r this
  equals the delta-method value r (sd of ln X ~ sd(X)/X); for larger r it keeps the
  one-sigma upper bound exact: ln(x (1 + r)) - ln(x) = ln(1 + r).  The error model is
  therefore multiplicative (log-normal or log-Student-t), which is what keeps ratios
  positive and treats SO2/CO2 and CO2/SO2 symmetrically (common practice, no source).
* The density is that of y (the log ratio), not of the ratio itself.  The Jacobian
  1/observed does not depend on the parameters or the model, so it cancels in every
  Bayes factor and posterior; evidences reported here are densities of ln-ratios.
* Censoring flag per value: 0 exact, -1 upper limit ("<x", below detection),
  +1 lower limit (">x").  A censored value contributes the log probability that the
  noisy observation falls in the censored region, log F((ln x - mu)/sigma) for an
  upper limit and log(1 - F(...)) for a lower one, with F the normal or Student-t CDF
  (standard censored-data likelihood, e.g. Tobin 1958, Econometrica 26:24-36).
  Censored values are never dropped and never replaced by the limit.
* NaN value = missing: that ratio simply does not enter the likelihood.
* A prediction row containing NaN (no gas released, solver failure) or a negative
  value in a used column has likelihood 0 (log -inf).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np
from scipy import special, stats

__all__ = ["Measurement", "MeasurementError", "Likelihood", "log_likelihood",
           "sigma_ln"]

LIKELIHOOD_KINDS = ("normal", "student_t")


class MeasurementError(ValueError):
    """Bad measurement or likelihood input; the message is one line."""


def sigma_ln(relative_sigma):
    """Log-space standard deviation ln(1 + r) for relative 1-sigma r (see module doc)."""
    return np.log1p(np.asarray(relative_sigma, dtype=float))


@dataclass(frozen=True)
class Measurement:
    """One measurement: named molar ratios with relative 1-sigma and censoring flags.

    ratio_names : e.g. ("SO2/CO2", "H2S/SO2")
    values      : ratio values (mol/mol); NaN = missing; for censored entries the limit
    relative_sigma : relative 1-sigma per value (scalar broadcast allowed)
    censoring   : 0 exact, -1 upper limit (<x), +1 lower limit (>x)
    label       : free text (time stamp, sample id) for reports

    >>> import ventsource as vs
    >>> m = vs.Measurement.from_strings({"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": "<60"},
    ...                                 relative_sigma=0.15, label="synthetic")
    >>> m.ratio_names, m.censoring.tolist()
    (('SO2/CO2', 'H2S/SO2', 'H2O/CO2'), [0, 0, -1])
    >>> vs.Measurement(("SO2/CO2",), [0.4], relative_sigma=0.1).values.tolist()
    [0.4]
    """

    ratio_names: tuple
    values: np.ndarray
    relative_sigma: np.ndarray
    censoring: np.ndarray
    label: str = ""

    def __init__(self, ratio_names: Sequence[str], values, relative_sigma=0.15,
                 censoring=None, label: str = ""):
        names = tuple(str(n) for n in ratio_names)
        if len(names) == 0:
            raise MeasurementError("measurement: at least one ratio name is required")
        if len(set(names)) != len(names):
            raise MeasurementError(f"measurement {label!r}: duplicate ratio names {names}")
        m = len(names)
        try:
            vals = np.asarray(values, dtype=float).reshape(-1)
        except (TypeError, ValueError):
            raise MeasurementError(f"measurement {label!r}: values must be numbers, got {values!r}") from None
        if vals.size != m:
            raise MeasurementError(
                f"measurement {label!r}: {vals.size} values for {m} ratio names {names}")
        try:
            rel = np.broadcast_to(np.asarray(relative_sigma, dtype=float), (m,)).copy()
        except ValueError:
            raise MeasurementError(
                f"measurement {label!r}: relative_sigma must be a scalar or {m} values") from None
        cens = np.zeros(m, dtype=int) if censoring is None else np.asarray(censoring).reshape(-1)
        if cens.size != m:
            raise MeasurementError(f"measurement {label!r}: {cens.size} censoring flags for {m} ratios")
        if not np.all(np.isin(cens, (-1, 0, 1))):
            raise MeasurementError(
                f"measurement {label!r}: censoring flags must be -1 (<x), 0 (exact) or +1 (>x), got {cens.tolist()}")
        cens = cens.astype(int)
        for j, name in enumerate(names):
            v = vals[j]
            if np.isnan(v):
                continue
            if not np.isfinite(v) or v <= 0:
                raise MeasurementError(
                    f"measurement {label!r}: ratio {name!r} = {v!r}; a molar ratio must be positive and finite (NaN = missing)")
            if not (np.isfinite(rel[j]) and rel[j] > 0):
                raise MeasurementError(
                    f"measurement {label!r}: relative_sigma of {name!r} = {rel[j]!r}; must be positive and finite")
        if np.all(np.isnan(vals)):
            raise MeasurementError(f"measurement {label!r}: all ratios are missing")
        object.__setattr__(self, "ratio_names", names)
        object.__setattr__(self, "values", vals)
        object.__setattr__(self, "relative_sigma", rel)
        object.__setattr__(self, "censoring", cens)
        object.__setattr__(self, "label", str(label))

    @classmethod
    def from_strings(cls, entries: Mapping[str, object], relative_sigma=0.15, label: str = ""):
        """Build from {"SO2/CO2": 1.3, "H2S/SO2": "<0.05", "H2O/CO2": ">40", "H2/H2O": None}.

        relative_sigma: scalar or mapping name -> value.
        """
        names, vals, cens, rels = [], [], [], []
        for name, raw in entries.items():
            c = 0
            if raw is None:
                v = np.nan
            elif isinstance(raw, str):
                s = raw.strip()
                if s.startswith("<"):
                    c, s = -1, s[1:]
                elif s.startswith(">"):
                    c, s = 1, s[1:]
                if s.strip().lower() in ("", "nan", "na", "n/a"):
                    v = np.nan
                else:
                    try:
                        v = float(s)
                    except ValueError:
                        raise MeasurementError(
                            f"measurement {label!r}: ratio {name!r}: cannot read {raw!r} as a number, '<x' or '>x'") from None
            else:
                try:
                    v = float(raw)
                except (TypeError, ValueError):
                    raise MeasurementError(
                        f"measurement {label!r}: ratio {name!r}: cannot read {raw!r} as a number") from None
            names.append(name)
            vals.append(v)
            cens.append(c)
            if isinstance(relative_sigma, Mapping):
                if name not in relative_sigma:
                    raise MeasurementError(f"measurement {label!r}: no relative_sigma given for {name!r}")
                rels.append(relative_sigma[name])
            else:
                rels.append(relative_sigma)
        return cls(names, vals, rels, cens, label)

    @property
    def observed(self) -> np.ndarray:
        """Boolean mask of non-missing values."""
        return ~np.isnan(self.values)

    @property
    def observed_names(self) -> tuple:
        return tuple(n for n, o in zip(self.ratio_names, self.observed) if o)

    @property
    def log_values(self) -> np.ndarray:
        return np.log(self.values)

    def to_dict(self) -> dict:
        return {"label": self.label, "ratio_names": list(self.ratio_names),
                "values": [None if np.isnan(v) else float(v) for v in self.values],
                "relative_sigma": self.relative_sigma.tolist(),
                "censoring": self.censoring.tolist()}


@dataclass
class Likelihood:
    """Vectorised log-likelihood of one Measurement for model predictions (n, m).

    Columns of the prediction array are matched to measurement.ratio_names, or to
    `prediction_names` if given (e.g. the forward model's own ratio order).
    kind: "normal" or "student_t" (dof degrees of freedom, scale sigma_ln).
    """

    measurement: Measurement
    kind: str = "normal"
    dof: float = 4.0
    prediction_names: tuple | None = None
    _cols: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        if self.kind not in LIKELIHOOD_KINDS:
            raise MeasurementError(f"likelihood kind {self.kind!r} unknown; use one of {LIKELIHOOD_KINDS}")
        if self.kind == "student_t" and not (np.isfinite(self.dof) and self.dof > 0):
            raise MeasurementError(f"likelihood: Student-t dof must be positive, got {self.dof!r}")
        meas = self.measurement
        names = meas.ratio_names if self.prediction_names is None else tuple(self.prediction_names)
        cols = []
        for n in meas.observed_names:
            if n not in names:
                raise MeasurementError(
                    f"measurement {meas.label!r}: ratio {n!r} is not among the model outputs {names}")
            cols.append(names.index(n))
        self._cols = np.asarray(cols, dtype=int)
        self.n_predicted = len(names)
        obs = meas.observed
        self.y = meas.log_values[obs]
        self.s = sigma_ln(meas.relative_sigma[obs])
        self.c = meas.censoring[obs]
        nu = self.dof
        self._t_log_norm = (special.gammaln(0.5 * (nu + 1.0)) - special.gammaln(0.5 * nu)
                            - 0.5 * np.log(nu * np.pi))

    @property
    def observed_names(self) -> tuple:
        return self.measurement.observed_names

    # --- standardised log density / log cdf of the noise distribution -------------
    def _logpdf_std(self, z):
        if self.kind == "normal":
            return -0.5 * z * z - 0.5 * np.log(2.0 * np.pi)
        # Student-t log density written out (same as scipy.stats.t.logpdf, which the
        # tests use as reference, without its per-call overhead inside the sampler)
        nu = self.dof
        return self._t_log_norm - 0.5 * (nu + 1.0) * np.log1p(z * z / nu)

    def _logcdf_std(self, z):
        if self.kind == "normal":
            return special.log_ndtr(z)
        # stdtr is the Student-t CDF; for the far left tail use the survival side of
        # the mirrored value to keep precision (F(z) = 1 - F(-z))
        cdf = special.stdtr(self.dof, z)
        with np.errstate(divide="ignore"):
            out = np.log(cdf)
        tail = cdf < 1e-300
        if np.any(tail):
            out[tail] = stats.t.logcdf(z[tail], self.dof)
        return out

    def log_mu(self, predictions) -> np.ndarray:
        """ln(prediction) of the used columns, (n, m_obs); NaN marks invalid rows."""
        pred = np.atleast_2d(np.asarray(predictions, dtype=float))
        if pred.shape[1] != self.n_predicted:
            raise MeasurementError(
                f"likelihood: predictions have {pred.shape[1]} columns, expected {self.n_predicted}")
        p = pred[:, self._cols]
        with np.errstate(divide="ignore", invalid="ignore"):
            mu = np.log(p)  # ln(0) = -inf is legal (species absent); ln(<0) = NaN
        return mu

    def pointwise(self, predictions) -> np.ndarray:
        """Per-ratio log-likelihood terms, (n, m_obs); rows with invalid predictions -inf."""
        mu = self.log_mu(predictions)
        bad = np.isnan(mu).any(axis=1)
        with np.errstate(invalid="ignore", over="ignore"):
            z = (self.y[None, :] - mu) / self.s[None, :]   # standardised residual of y
            if not self.c.any():
                # every value exact (the common case): no masked copies in the sampler's loop
                out = self._logpdf_std(z) - np.log(self.s)[None, :]
            else:
                out = np.empty_like(z)
                exact = self.c == 0
                out[:, exact] = self._logpdf_std(z[:, exact]) - np.log(self.s[exact])[None, :]
                up = self.c == -1   # P(y < ln limit)
                out[:, up] = self._logcdf_std(z[:, up])
                lo = self.c == 1    # P(y > ln limit) = F(-z)
                out[:, lo] = self._logcdf_std(-z[:, lo])
        out[np.isnan(out)] = -np.inf
        out[bad, :] = -np.inf
        return out

    def __call__(self, predictions) -> np.ndarray:
        """Total log-likelihood per prediction row, (n,)."""
        return self.pointwise(predictions).sum(axis=1)

    def simulate_log(self, predictions, rng: np.random.Generator) -> np.ndarray:
        """Replicated ln-observations y_rep = mu + sigma_ln * noise, (n, m_obs)."""
        mu = self.log_mu(predictions)
        if self.kind == "normal":
            e = rng.standard_normal(mu.shape)
        else:
            e = rng.standard_t(self.dof, size=mu.shape)
        return mu + self.s[None, :] * e

    def noise_cdf(self, z):
        """CDF of the standardised noise (for predictive checks)."""
        if self.kind == "normal":
            return special.ndtr(z)
        return stats.t.cdf(z, self.dof)


def log_likelihood(measurement: Measurement, predictions, kind: str = "normal",
                   dof: float = 4.0, prediction_names=None, pointwise: bool = False):
    """Functional form of Likelihood: (n,) totals or (n, m_obs) terms."""
    lik = Likelihood(measurement, kind=kind, dof=dof, prediction_names=prediction_names)
    return lik.pointwise(predictions) if pointwise else lik(predictions)
