"""Inference: prior files and distributions (priors/), the likelihood,
sampling engines one per module (engines/), evidence (evidence/), model
choice and the one-measurement inversion.

May import: common, chemistry, magma, ascent, forward.
"""
