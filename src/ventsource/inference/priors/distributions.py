"""One-dimensional prior distributions, vectorised over NumPy arrays.

Each distribution offers:

* ``sample(rng, n)``  -> (n,) draws, using the ``numpy.random.Generator`` given
  (never a global random state, so every run is reproducible from its seed);
* ``log_pdf(x)``      -> log density, ``-inf`` outside the support (and for NaN);
* ``ppf(u)``          -> inverse CDF for u in [0, 1], the "prior transform"
  used by nested samplers that draw in the unit cube;
* ``lower``, ``upper`` -> support bounds (possibly infinite);
* ``to_dict()``       -> plain dict of the parameters (provenance).

The formulas are the textbook ones (common practice, no source); the special
functions come from ``scipy.special``.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

__all__ = [
    "Distribution",
    "Uniform",
    "LogUniform",
    "TruncNormal",
    "Beta",
    "Fixed",
]

_LOG_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)


def _as_float_array(x):
    return np.asarray(x, dtype=float)


class Distribution:
    """Base class: subclasses set ``kind``, ``lower``, ``upper``."""

    kind = "base"
    lower = -math.inf
    upper = math.inf

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        return self.ppf(rng.random(int(n)))

    def log_pdf(self, x) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def ppf(self, u) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def in_support(self, x) -> np.ndarray:
        x = _as_float_array(x)
        # NaN compares False, so NaN is outside the support.
        return (x >= self.lower) & (x <= self.upper)

    def to_dict(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.to_dict().items() if k != "distribution")
        return f"{type(self).__name__}({args})"

    def __eq__(self, other) -> bool:
        return type(self) is type(other) and self.to_dict() == other.to_dict()


class Uniform(Distribution):
    """Uniform on the closed interval [min, max]."""

    kind = "uniform"

    def __init__(self, min: float, max: float):
        if not (math.isfinite(min) and math.isfinite(max) and min < max):
            raise ValueError(f"uniform needs finite min < max, got min={min}, max={max}")
        self.lower = float(min)
        self.upper = float(max)
        self._log_width = math.log(self.upper - self.lower)

    def sample(self, rng, n):
        return rng.uniform(self.lower, self.upper, size=int(n))

    def log_pdf(self, x):
        x = _as_float_array(x)
        return np.where(self.in_support(x), -self._log_width, -np.inf)

    def ppf(self, u):
        u = _as_float_array(u)
        return self.lower + u * (self.upper - self.lower)

    def to_dict(self):
        return {"distribution": self.kind, "min": self.lower, "max": self.upper}


class LogUniform(Distribution):
    """Uniform in ln(x) on [min, max], 0 < min < max; density 1 / (x ln(max/min))."""

    kind = "loguniform"

    def __init__(self, min: float, max: float):
        if not (math.isfinite(min) and math.isfinite(max) and 0.0 < min < max):
            raise ValueError(f"loguniform needs finite 0 < min < max, got min={min}, max={max}")
        self.lower = float(min)
        self.upper = float(max)
        self._log_lo = math.log(self.lower)
        self._log_ratio = math.log(self.upper) - self._log_lo
        self._log_norm = math.log(self._log_ratio)

    def sample(self, rng, n):
        return np.exp(rng.uniform(self._log_lo, self._log_lo + self._log_ratio, size=int(n)))

    def log_pdf(self, x):
        x = _as_float_array(x)
        inside = self.in_support(x)
        safe = np.where(inside, x, 1.0)
        return np.where(inside, -np.log(safe) - self._log_norm, -np.inf)

    def ppf(self, u):
        u = _as_float_array(u)
        x = np.exp(self._log_lo + u * self._log_ratio)
        # Pin the ends exactly so that ppf(0) and ppf(1) stay inside the support.
        return np.clip(x, self.lower, self.upper)

    def to_dict(self):
        return {"distribution": self.kind, "min": self.lower, "max": self.upper}


class TruncNormal(Distribution):
    """Normal(mean, sd) restricted to [min, max] (either bound may be infinite).

    With both bounds infinite this is the plain normal distribution.
    Normalisation Z = Phi(b) - Phi(a) with standardised bounds a, b; when the
    interval lies in the upper tail the mirror image is used so that the
    differences of Phi are taken where they are accurate.
    """

    kind = "truncnormal"

    def __init__(self, mean: float, sd: float, min: float = -math.inf, max: float = math.inf,
                 kind: str = "truncnormal"):
        if not (math.isfinite(mean) and math.isfinite(sd) and sd > 0.0):
            raise ValueError(f"{kind} needs finite mean and sd > 0, got mean={mean}, sd={sd}")
        if not min < max:
            raise ValueError(f"{kind} needs min < max, got min={min}, max={max}")
        self.kind = kind
        self.mean = float(mean)
        self.sd = float(sd)
        self.lower = float(min)
        self.upper = float(max)
        a = (self.lower - self.mean) / self.sd
        b = (self.upper - self.mean) / self.sd
        # Mirror into the lower half so ndtr works on its accurate side.
        self._flip = a > 0.0
        if self._flip:
            a, b = -b, -a
        self._a, self._b = a, b
        self._phi_a = float(special.ndtr(a))
        self._mass = float(special.ndtr(b)) - self._phi_a
        if not self._mass > 1e-300:
            raise ValueError(f"{kind}: no probability mass between min and max")
        self._log_norm = math.log(self._mass) + math.log(self.sd) + _LOG_SQRT_2PI

    @property
    def mass(self) -> float:
        """Probability mass of the untruncated normal inside [min, max]."""
        return self._mass

    def log_pdf(self, x):
        x = _as_float_array(x)
        z = (x - self.mean) / self.sd
        inside = self.in_support(x)
        return np.where(inside, -0.5 * np.where(inside, z, 0.0) ** 2 - self._log_norm, -np.inf)

    def ppf(self, u):
        u = _as_float_array(u)
        if self._flip:
            u = 1.0 - u
        p = np.clip(self._phi_a + u * self._mass, 0.0, 1.0)
        z = special.ndtri(p)
        z = np.clip(z, self._a, self._b)
        if self._flip:
            z = -z
        return self.mean + self.sd * z

    def to_dict(self):
        d = {"distribution": self.kind, "mean": self.mean, "sd": self.sd}
        if math.isfinite(self.lower):
            d["min"] = self.lower
        if math.isfinite(self.upper):
            d["max"] = self.upper
        return d


class Beta(Distribution):
    """Beta(a, b) scaled linearly from [0, 1] to [min, max] (default [0, 1])."""

    kind = "beta"

    def __init__(self, a: float, b: float, min: float = 0.0, max: float = 1.0):
        if not (math.isfinite(a) and math.isfinite(b) and a > 0.0 and b > 0.0):
            raise ValueError(f"beta needs finite a > 0 and b > 0, got a={a}, b={b}")
        if not (math.isfinite(min) and math.isfinite(max) and min < max):
            raise ValueError(f"beta needs finite min < max, got min={min}, max={max}")
        self.a = float(a)
        self.b = float(b)
        self.lower = float(min)
        self.upper = float(max)
        self._width = self.upper - self.lower
        self._log_norm = float(special.betaln(self.a, self.b)) + math.log(self._width)

    def sample(self, rng, n):
        return self.lower + self._width * rng.beta(self.a, self.b, size=int(n))

    def log_pdf(self, x):
        x = _as_float_array(x)
        inside = self.in_support(x)
        y = np.clip((np.where(inside, x, self.lower) - self.lower) / self._width, 0.0, 1.0)
        # xlogy/xlog1py give 0 for 0*log(0), so a = 1 or b = 1 is exact at the ends.
        with np.errstate(divide="ignore", invalid="ignore"):
            lp = special.xlogy(self.a - 1.0, y) + special.xlog1py(self.b - 1.0, -y) - self._log_norm
        return np.where(inside, lp, -np.inf)

    def ppf(self, u):
        u = _as_float_array(u)
        return self.lower + self._width * special.betaincinv(self.a, self.b, u)

    def to_dict(self):
        d = {"distribution": self.kind, "a": self.a, "b": self.b}
        if (self.lower, self.upper) != (0.0, 1.0):
            d["min"] = self.lower
            d["max"] = self.upper
        return d


class Fixed(Distribution):
    """A point mass: the parameter is held at ``value`` and is not sampled.

    ``log_pdf`` is 0 at the value and -inf elsewhere (a convention for a
    discrete atom, used only for checks; fixed parameters do not enter the
    joint prior density of the free ones).
    """

    kind = "fixed"

    def __init__(self, value: float):
        if not math.isfinite(value):
            raise ValueError(f"fixed needs a finite value, got {value}")
        self.value = float(value)
        self.lower = self.value
        self.upper = self.value

    def sample(self, rng, n):
        return np.full(int(n), self.value)

    def log_pdf(self, x):
        x = _as_float_array(x)
        return np.where(x == self.value, 0.0, -np.inf)

    def ppf(self, u):
        u = _as_float_array(u)
        return np.full(u.shape, self.value)

    def to_dict(self):
        return {"distribution": self.kind, "value": self.value}
