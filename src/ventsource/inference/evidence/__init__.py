"""Marginal-likelihood (evidence) estimators and their proposals.

May import: ventsource.common and the rest of ventsource.inference.
"""
