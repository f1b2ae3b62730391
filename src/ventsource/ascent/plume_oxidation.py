"""H2 burnt by air in the plume, after the quench and before the instrument.

Where hot magmatic gas meets air (above a lava lake or an open vent) H2 is
oxidised, H2 + 1/2 O2 = H2O, while CO is kinetically inert and keeps its
magmatic CO/CO2: measured log10 H2/H2O below -6 in a plume whose equilibrium
value is about -3 (Kazahaya et al. 2022, Frontiers in Earth Science
10:867562, abstract). The share of H2 that survives is a parameter,
`h2_retained_log10` (log10 of the fraction kept; 0 = none burnt). The oxygen
comes from air, which the gas ratios do not see, so it is not added to the gas.
"""
import numpy as np

from ventsource.chemistry.species import INDEX

_H2, _H2O = INDEX["H2"], INDEX["H2O"]


def oxidise_h2(gas_mole_fractions, h2_retained_log10):
    """Gas (n, n_species) with a fraction 1 - 10^h2_retained_log10 of its H2 turned into
    H2O, renormalised; NaN rows stay NaN."""
    x = np.array(gas_mole_fractions, dtype=float, copy=True)
    kept = np.power(10.0, np.asarray(h2_retained_log10, dtype=float))
    burnt = x[:, _H2] * (1.0 - kept)
    x[:, _H2] -= burnt
    x[:, _H2O] += burnt
    return x / x.sum(axis=1, keepdims=True)
