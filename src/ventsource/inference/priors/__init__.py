"""Prior files (TOML, one per volcano or magma type) and the distributions
they name: read, validate, sample, evaluate.

May import: ventsource.common.
"""
from ventsource.inference.priors.prior_file import (  # noqa: F401
    DEFAULT_EPSILON, DEFAULT_P_MAGMATIC, DEFAULT_RELATIVE_SIGMA, DISTRIBUTIONS, MODEL_CHOICES,
    OPTIONAL_OXIDES, OPTIONAL_PARAMETERS, PHYSICAL_LIMITS, REQUIRED_OXIDES, REQUIRED_PARAMETERS,
    PriorFileError, PriorSpec, load_prior_file, parse_prior,
)
