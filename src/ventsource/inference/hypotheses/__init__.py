"""The hypotheses and the choice between them: purely magmatic (M0), magmatic
gas with SO2 scrubbed (M1), magmatic gas with extra sulfur released (M2).

Holds the quadratures that integrate the SO2 factor of M1 and M2 out
(`so2_marginal`, `release_marginal`) and the model choice from evidences
(`model_choice`). Nothing here samples; the row and window models use it.

May import: ventsource.common ... ventsource.forward, and from
ventsource.inference: priors, likelihood, option_rules, and this package.
"""
