"""Molar gas ratios written the trade's way: 'SO2/CO2', 'H2S/SO2', 'CO2/ST'.

A side of a ratio is a species, a named sum (ST = SO2 + H2S, total sulfur
as measured by in-plume sensors; common practice, no source) or an explicit
sum such as 'CO2+CO'.
"""
import numpy as np

from ventsource.common.errors import InputError
from ventsource.chemistry.species import INDEX, SPECIES

NAMED_SUMS = {"ST": ("SO2", "H2S")}
DEFAULT_RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def _side(text, ratio):
    names = []
    for part in text.split("+"):
        part = part.strip()
        if part in NAMED_SUMS:
            names.extend(NAMED_SUMS[part])
        elif part in INDEX:
            names.append(part)
        else:
            raise InputError(f"ratio '{ratio}': unknown species or sum '{part}' "
                             f"(species: {', '.join(SPECIES)}; sums: {', '.join(NAMED_SUMS)})")
    weights = np.zeros(len(SPECIES))
    for name in names:
        weights[INDEX[name]] += 1.0
    return weights


def ratio_weights(ratio):
    """(numerator weights, denominator weights) over SPECIES for one ratio name."""
    if not isinstance(ratio, str) or ratio.count("/") != 1:
        raise InputError(f"ratio '{ratio}' must be written NUMERATOR/DENOMINATOR, e.g. SO2/CO2")
    top, bottom = ratio.split("/")
    return _side(top, ratio), _side(bottom, ratio)


def weight_matrices(ratio_names):
    """(numerators, denominators): two (n_species, m) weight matrices."""
    pairs = [ratio_weights(name) for name in ratio_names]
    return (np.column_stack([p[0] for p in pairs]), np.column_stack([p[1] for p in pairs]))


def ratios(gas_mole_fractions, ratio_names, weights=None):
    """(n, m) molar ratios of the named observables; weights from weight_matrices
    may be passed to skip parsing the names."""
    x = np.asarray(gas_mole_fractions, dtype=float)
    top, bottom = weights if weights is not None else weight_matrices(ratio_names)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (x @ top) / (x @ bottom)
