"""Share of a distribution's mass outside the pressure and temperature ranges the
prior's solubility laws were calibrated for (magma/calibration_ranges.py), and the
row flag `outside_calibration` (more than FLAG_SHARE of the posterior outside a
law's range). The laws act at the degassing pressure and the magma temperature.
"""
import numpy as np

from ventsource.magma.calibration_ranges import ranges_for

FLAG = "outside_calibration"
FLAG_SHARE = 0.10  # issue 28: more than 10 % of the posterior mass


def _values(spec, draws, name):
    """The draws of name, or its fixed value; None when the prior has neither."""
    if name in draws:
        return np.asarray(draws[name], dtype=float).ravel()
    fixed = getattr(spec, "fixed_values", {})
    return np.array([float(fixed[name])]) if name in fixed else None


def shares_outside(spec, draws):
    """{law label: share of draws outside its P or T range}; draws maps parameter name to
    an array (a fixed parameter may be absent: its value is taken from spec)."""
    p = _values(spec, draws, "pressure_bar")
    t = _values(spec, draws, "temperature_c")
    if p is None or t is None or not isinstance(getattr(spec, "models", None), dict):
        return {}
    p, t = np.broadcast_arrays(p, t)
    out = {}
    for key, law, rng in ranges_for(spec.models):
        outside = ((p < rng.pressure_bar[0]) | (p > rng.pressure_bar[1])
                   | (t < rng.temperature_c[0]) | (t > rng.temperature_c[1]))
        out[f"{key} = {law}"] = float(outside.mean()) if outside.size else 0.0
    return out


def posterior_draws(idata):
    post = idata.posterior
    return {name: post[name].values for name in ("pressure_bar", "temperature_c") if name in post}


def calibration_flags(spec, idata):
    """[FLAG] when the posterior puts more than FLAG_SHARE outside a law's range, else []."""
    if idata is None or not hasattr(idata, "posterior") or not hasattr(spec, "models"):
        return []
    shares = shares_outside(spec, posterior_draws(idata))
    return [FLAG] if any(v > FLAG_SHARE for v in shares.values()) else []
