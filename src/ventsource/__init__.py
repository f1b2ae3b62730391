"""ventsource: Bayesian inversion of volcanic gas ratios."""

__version__ = "0.1.0"

