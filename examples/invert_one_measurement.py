"""Invert one synthetic measurement (fictional data) and print P(purely magmatic).

Results are model- and prior-dependent; they support, never replace, the responsible
observatory's assessment.
"""
import ventsource as vs
from ventsource.common.caution import CAUTION

measurement = vs.Measurement.from_strings(
    {"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": "<60"}, relative_sigma=0.15, label="synthetic")
result = vs.infer(measurement, "arc_basalt", seed=1)
print(f"P(purely magmatic) = {result.p_magmatic:.3f} +/- {result.p_magmatic_error:.3f}")
print("posterior averaged over the hypotheses:")
print(result.summary().to_string(float_format=lambda v: f"{v:.4g}"))
print("if scrubbed (M1):")
print(result.summary("M1").drop(columns="units").to_string(float_format=lambda v: f"{v:.4g}"))
print("flags:", result.flags)
print("Caution:", CAUTION)
