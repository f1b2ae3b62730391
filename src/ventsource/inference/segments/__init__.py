"""Segments the data choose: where a series' magma source changes.

Holds the cached segment evidences (`evidence`: the window model with every row's
SO2 free, `So2FreeWindowTarget`, one small tempered-SMC run per (start, end), seeded
from the run seed and the segment's own bounds), the prior over segmentations
(`change_prior`: geometric or Poisson number of changes, a minimum segment length)
and the search (`search`: binary segmentation by Bayesian model comparison, the
posterior probability of a change before each row).

May import: ventsource.common ... ventsource.forward, and every other part of
ventsource.inference (priors ... window).
"""
