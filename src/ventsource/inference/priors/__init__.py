"""Prior files (TOML, one per volcano or magma type) and the distributions
they name: read, validate, sample, evaluate.

A prior file holds, for one volcano or magma type, the prior distribution of
every forward-model parameter (each range with a ``source`` saying where it
comes from), the melt composition, the model choices, the prior probability
that a measurement is purely magmatic, and the likelihood settings. The format
is documented field by field in the README (section "Prior files").

    spec = load_prior_file("priors/arc_basalt.toml")
    theta = spec.sample(np.random.default_rng(1), 1000)    # (n, len(free_names))
    lp = spec.log_prob(theta)                              # (n,)
    full = spec.full(theta)                                # (n, len(parameter_names))
    m0 = spec.with_fixed("scrubbed_so2", 0.0)              # no-scrubbing model

Every problem in a file raises :class:`PriorFileError` with a one-line message
``"FILE: key 'table.key': what is wrong"``; a TOML syntax error names the line
and column instead of a key, a missing file says so.

Modules: schema (what a file may hold), fields (typed field readers),
parameter_table (one parameter's distribution and physical range), parse
(parse_prior, one function per table), hypotheses ([hypotheses]), window_table
([window]), load (load_prior_file), spec (PriorSpec), distributions.

May import: ventsource.common.
"""
from ventsource.inference.priors.fields import PriorFileError
from ventsource.inference.priors.load import load_prior_file
from ventsource.inference.priors.parse import parse_prior
from ventsource.inference.priors.schema import (
    DEFAULT_EPSILON, DEFAULT_P_MAGMATIC, DEFAULT_RELATIVE_SIGMA, DISTRIBUTIONS, MODEL_CHOICES,
    OPTIONAL_OXIDES, OPTIONAL_PARAMETERS, PHYSICAL_LIMITS, REQUIRED_OXIDES, REQUIRED_PARAMETERS,
)
from ventsource.inference.priors.spec import PriorSpec

__all__ = [
    "PriorFileError",
    "PriorSpec",
    "load_prior_file",
    "parse_prior",
    "REQUIRED_PARAMETERS",
    "OPTIONAL_PARAMETERS",
    "PHYSICAL_LIMITS",
    "REQUIRED_OXIDES",
    "OPTIONAL_OXIDES",
    "MODEL_CHOICES",
    "DISTRIBUTIONS",
    "DEFAULT_EPSILON",
    "DEFAULT_P_MAGMATIC",
    "DEFAULT_RELATIVE_SIGMA",
]
