"""One [parameters.<name>] table: its distribution, and the check that the
distribution's support lies inside the parameter's physical limits."""
from __future__ import annotations

import math
from typing import Mapping

from ventsource.inference.priors.distributions import Beta, Distribution, Fixed, LogUniform, TruncNormal, Uniform
from ventsource.inference.priors.fields import key_error, fmt_number, reject_unknown_keys, read_number, read_string
from ventsource.inference.priors.schema import DISTRIBUTIONS, PHYSICAL_LIMITS


def parse_distribution(file: str, name: str, table: Mapping,
                       prefix: str | None = None) -> tuple[Distribution, str, str | None]:
    prefix = prefix or f"parameters.{name}"
    kind = read_string(file, table, "distribution", f"{prefix}.distribution", True)
    if kind not in DISTRIBUTIONS:
        raise key_error(file, f"{prefix}.distribution",
                   f"unknown distribution {kind!r} (allowed: {', '.join(DISTRIBUTIONS)})")
    required, optional = DISTRIBUTIONS[kind]
    allowed = ("distribution", "source", "description") + required + optional
    reject_unknown_keys(file, table, allowed, prefix, f"for distribution {kind!r}")
    source = read_string(file, table, "source", f"{prefix}.source", True)
    description = read_string(file, table, "description", f"{prefix}.description", False)
    v = {k: read_number(file, table, k, f"{prefix}.{k}", k in required) for k in required + optional}

    if kind == "fixed":
        return Fixed(v["value"]), source, description
    if "min" in v and "max" in v and v["min"] is not None and v["max"] is not None:
        if not v["min"] < v["max"]:
            raise key_error(file, f"{prefix}.min",
                       f"min ({fmt_number(v['min'])}) must be less than max ({fmt_number(v['max'])})")
    if kind == "uniform":
        dist = Uniform(v["min"], v["max"])
    elif kind == "loguniform":
        if not v["min"] > 0.0:
            raise key_error(file, f"{prefix}.min", f"loguniform needs min > 0, got {fmt_number(v['min'])}")
        dist = LogUniform(v["min"], v["max"])
    elif kind in ("normal", "truncnormal"):
        if not v["sd"] > 0.0:
            raise key_error(file, f"{prefix}.sd", f"sd must be > 0, got {fmt_number(v['sd'])}")
        lo = -math.inf if v.get("min") is None else v["min"]
        hi = math.inf if v.get("max") is None else v["max"]
        dist = TruncNormal(v["mean"], v["sd"], lo, hi, kind=kind) if _mass_ok(v["mean"], v["sd"], lo, hi) \
            else None
        if dist is None:
            raise key_error(file, f"{prefix}.mean",
                       f"mean {fmt_number(v['mean'])} with sd {fmt_number(v['sd'])} leaves almost no probability "
                       f"between min and max (< 1e-9)")
    else:  # beta
        for k in ("a", "b"):
            if not v[k] > 0.0:
                raise key_error(file, f"{prefix}.{k}", f"beta shape {k} must be > 0, got {fmt_number(v[k])}")
        if (v["min"] is None) != (v["max"] is None):
            missing = "max" if v["max"] is None else "min"
            raise key_error(file, f"{prefix}.{missing}", "beta needs both min and max, or neither (then [0, 1])")
        lo = 0.0 if v["min"] is None else v["min"]
        hi = 1.0 if v["max"] is None else v["max"]
        dist = Beta(v["a"], v["b"], lo, hi)
    return dist, source, description


def _mass_ok(mean, sd, lo, hi) -> bool:
    try:
        return TruncNormal(mean, sd, lo, hi).mass > 1e-9
    except ValueError:
        return False


def check_physical_range(file: str, name: str, dist: Distribution) -> None:
    lo, hi, lo_open, hi_open = PHYSICAL_LIMITS[name]
    prefix = f"parameters.{name}"
    rng_txt = f"{'(' if lo_open else '['}{fmt_number(lo)}, {fmt_number(hi)}{')' if hi_open else ']'}"
    if isinstance(dist, Fixed):
        x = dist.value
        bad = (x <= lo if lo_open else x < lo) or (x >= hi if hi_open else x > hi)
        if bad:
            raise key_error(file, f"{prefix}.value", f"{fmt_number(x)} is outside the physical range {rng_txt}")
        return
    if dist.lower <= lo if lo_open else dist.lower < lo:
        if not math.isfinite(dist.lower):
            raise key_error(file, f"{prefix}.min",
                       f"missing: the distribution is unbounded below; give min inside the physical range {rng_txt}")
        raise key_error(file, f"{prefix}.min", f"{fmt_number(dist.lower)} is outside the physical range {rng_txt}")
    if dist.upper >= hi if hi_open else dist.upper > hi:
        if not math.isfinite(dist.upper) and not math.isfinite(hi):
            return
        if not math.isfinite(dist.upper):
            raise key_error(file, f"{prefix}.max",
                       f"missing: the distribution is unbounded above; give max inside the physical range {rng_txt}")
        raise key_error(file, f"{prefix}.max", f"{fmt_number(dist.upper)} is outside the physical range {rng_txt}")
