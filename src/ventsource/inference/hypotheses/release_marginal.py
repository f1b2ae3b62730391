"""Released stored sulfur (hypothesis M2) integrated out of the likelihood.

Sulfur stored below the surface (e.g. deposited by earlier scrubbing) that is
remobilised adds SO2 to the magmatic gas: SO2 times (1 + r), r > 0, nothing else
changes. With v = ln(1 + r) > 0 every ratio SO2^(+-1) x (SO2-free part) is its
magmatic value times e^(k v), exactly as for scrubbing with v = ln(1 - s) < 0, so
the fast path (Gaussian in v, closed form for a uniform prior of r, Gauss-Legendre
otherwise) and the general grid path of So2MultiplierMarginal carry over unchanged.
The release adds SO2 only, so the fast path holds whatever the scrubbing product.
"""
from __future__ import annotations

import numpy as np

from ventsource.chemistry.species import INDEX
from ventsource.inference.hypotheses.so2_marginal import So2MultiplierMarginal

_SO2 = INDEX["SO2"]
V_CEILING = np.log(1e3)   # r up to ~1000: a prior reaching further is cut here


def released_gas(gas, released_fraction):
    """Gas with its SO2 multiplied by 1 + r (r per row); every other species unchanged."""
    g = np.array(gas, dtype=float, copy=True)
    g[:, _SO2] *= 1.0 + np.asarray(released_fraction, dtype=float)
    return g


def release_change_vector(gas):
    """d(gas)/dr per unit released fraction r: SO2 only."""
    dx = np.zeros_like(gas)
    dx[:, _SO2] = gas[:, _SO2]
    return dx


class ReleaseMarginal(So2MultiplierMarginal):
    """Released fraction r: SO2 times 1 + r = e^v, v = ln(1 + r) >= 0 (M2)."""

    _param_floor, _param_ceiling = 0.0, np.inf

    def _v_support(self):
        hi = min(float(np.log1p(self.dist.upper)), V_CEILING) if np.isfinite(self.dist.upper) else V_CEILING
        return float(np.log1p(max(self.dist.lower, 0.0))), hi

    def _pure_so2_multiplier(self):
        return True

    def param_of_v(self, v):
        return np.expm1(v)

    def change(self, gas, h2s_return):
        return release_change_vector(gas)
