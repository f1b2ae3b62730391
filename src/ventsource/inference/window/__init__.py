"""The window model: rows that share one magma source.

Holds the target (`target`: per-row pressure quadrature, the scrubbed
fraction integrated out, the change-of-source check's target), its compiled
per-row evidences (`kernels`), the optional pooled per-row pressures
(`pooled_pressure`), where the gas ends (`saturation_edge`) and the sampling
and result (`sampling`: `infer_window`).

May import: ventsource.common ... ventsource.forward, and every other part
of ventsource.inference (priors, likelihood, option_rules, evidence,
engines, hypotheses, row).
"""
