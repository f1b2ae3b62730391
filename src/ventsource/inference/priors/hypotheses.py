"""[hypotheses]: the optional third hypothesis M2, released stored sulfur.

    [hypotheses]
    p_released = 0.2          # prior probability of M2
    source = "..."
    [hypotheses.released_so2] # prior of r: emitted SO2 = magmatic SO2 x (1 + r)
    distribution = "loguniform"
    min = 0.1
    max = 10.0
    source = "..."

M0 (magmatic) and M1 (scrubbed) share the remaining 1 - p_released in the ratio
p_magmatic : 1 - p_magmatic of [magmatic], so a file without [hypotheses] keeps
exactly its two-hypothesis meaning. Defaults (used for keys left out):
p_released = 0.2 - release needs sulfur stored by earlier scrubbing, so it is taken
as less likely a priori than either ordinary state (a judgement, no source);
r log-uniform on [0.1, 10] - below a 10 % excess a release hides in 15 % ratio
errors, and ten times the magmatic SO2 bounds the pulses the prior allows
(invented bound, no source); log-uniform gives every factor of ten equal weight.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from ventsource.inference.priors.distributions import Distribution, LogUniform
from ventsource.inference.priors.fields import (fmt_number, key_error, read_number, read_string,
                                                read_table, reject_unknown_keys)
from ventsource.inference.priors.parameter_table import parse_distribution

DEFAULT_P_RELEASED = 0.2
DEFAULT_RELEASED_SO2 = (0.1, 10.0)
DEFAULT_SOURCE = ("defaults of ventsource: p_released 0.2 (release needs stored sulfur, judged rarer "
                  "than either ordinary state, no source); r log-uniform on [0.1, 10] (invented bounds)")


@dataclass(frozen=True)
class ReleasePrior:
    p_released: float
    distribution: Distribution
    source: str
    distribution_source: str

    def probabilities(self, p_magmatic):
        """(pi0, pi1, pi2): M0 and M1 share 1 - p_released as p_magmatic : 1 - p_magmatic."""
        rest = 1.0 - self.p_released
        return rest * p_magmatic, rest * (1.0 - p_magmatic), self.p_released

    def to_dict(self):
        dist = self.distribution.to_dict()
        dist["source"] = self.distribution_source
        return {"p_released": self.p_released, "source": self.source, "released_so2": dist}


def parse_hypotheses(file: str, data: Mapping) -> ReleasePrior | None:
    table = read_table(file, data, "hypotheses", "hypotheses", False)
    if table is None:
        return None
    reject_unknown_keys(file, table, ("p_released", "source", "released_so2"), "hypotheses")
    p2 = read_number(file, table, "p_released", "hypotheses.p_released", False, DEFAULT_P_RELEASED)
    if not 0.0 < p2 < 1.0:
        raise key_error(file, "hypotheses.p_released",
                        f"must be strictly between 0 and 1, got {fmt_number(p2)}")
    source = read_string(file, table, "source", "hypotheses.source", False) or DEFAULT_SOURCE
    sub = read_table(file, table, "released_so2", "hypotheses.released_so2", False)
    if sub is None:
        dist, dsource = LogUniform(*DEFAULT_RELEASED_SO2), DEFAULT_SOURCE
    else:
        dist, dsource, _ = parse_distribution(file, "released_so2", sub, "hypotheses.released_so2")
        if not dist.lower >= 0.0 or not dist.upper > dist.lower:
            raise key_error(file, "hypotheses.released_so2",
                            "r must be a positive excess (support within [0, inf) and not fixed)")
    return ReleasePrior(float(p2), dist, source, dsource)


def prior_model_probabilities(spec):
    """Prior probabilities (M0, M1) of a prior, or (M0, M1, M2) when it has [hypotheses]."""
    release = getattr(spec, "release", None)
    if release is None:
        return float(spec.p_magmatic), 1.0 - float(spec.p_magmatic)
    return tuple(float(p) for p in release.probabilities(spec.p_magmatic))
