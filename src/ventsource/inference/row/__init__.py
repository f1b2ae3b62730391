"""The one-measurement model: one row of gas ratios inverted on its own.

Holds the inversion's entry point (`one_measurement`: infer, its checks, the emcee
path), what it returns (`result`: InferenceResult, ModelRun, InferenceError, units;
`averaged`: the posterior averaged over M0 and M1), one emcee + bridge run of a model
(`emcee_model`), the smc path (`smc_measurement`: the target and its draws;
`smc_inference`: the result from one population; `hypotheses_smc`: P(M0), P(M1),
P(M2) and the budget quantities from that population) and the emcee path's third
hypothesis (`hypotheses_emcee`).

May import: ventsource.common ... ventsource.forward, and from
ventsource.inference: priors, likelihood, option_rules, evidence, engines,
hypotheses, and this package.
"""
