"""Invert one synthetic measurement (fictional data) and print P(purely magmatic)."""
from ventsource import infer
from ventsource.inference.likelihood import Measurement
from ventsource.inference.priors import load_prior_file

prior = load_prior_file("priors/arc_basalt.toml")
measurement = Measurement.from_strings(
    {"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": "<60"}, relative_sigma=0.15, label="synthetic")
result = infer(measurement, prior, seed=1, target_ess=500)
print(f"P(purely magmatic) = {result.p_magmatic:.3f} +/- {result.p_magmatic_error:.3f}")
print(result.summary())
print("flags:", result.flags)
