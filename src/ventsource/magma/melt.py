"""Silicate melt composition: validation and mole/cation bases.

Input is a dict of oxide wt% on an anhydrous basis (volatiles are model
parameters, not part of the melt dict). Iron is given as total FeO (FeOt).
All outputs are anhydrous. Molar masses from IUPAC 2013 atomic weights.
"""
import math

import numpy as np

REQUIRED_OXIDES = ("SiO2", "TiO2", "Al2O3", "FeOt", "MgO", "CaO", "Na2O", "K2O")
OPTIONAL_OXIDES = ("MnO", "P2O5", "Cr2O3", "NiO")
ALLOWED_OXIDES = REQUIRED_OXIDES + OPTIONAL_OXIDES

# g/mol (IUPAC 2013: Si 28.085, Ti 47.867, Al 26.982, Fe 55.845, Mg 24.305,
# Ca 40.078, Na 22.990, K 39.098, Mn 54.938, P 30.974, Cr 51.996, Ni 58.693, O 15.999)
OXIDE_MOLAR_MASS_G_MOL = {
    "SiO2": 60.083, "TiO2": 79.865, "Al2O3": 101.961, "FeOt": 71.844,
    "MgO": 40.304, "CaO": 56.077, "Na2O": 61.979, "K2O": 94.195,
    "MnO": 70.937, "P2O5": 141.943, "Cr2O3": 151.989, "NiO": 74.692,
}
CATIONS_PER_OXIDE = {
    "SiO2": 1, "TiO2": 1, "Al2O3": 2, "FeOt": 1, "MgO": 1, "CaO": 1,
    "Na2O": 2, "K2O": 2, "MnO": 1, "P2O5": 2, "Cr2O3": 2, "NiO": 1,
}
OXYGENS_PER_OXIDE = {
    "SiO2": 2, "TiO2": 2, "Al2O3": 3, "FeOt": 1, "MgO": 1, "CaO": 1,
    "Na2O": 1, "K2O": 1, "MnO": 1, "P2O5": 5, "Cr2O3": 3, "NiO": 1,
}

H2O_MOLAR_MASS_G_MOL = 18.015
CO2_MOLAR_MASS_G_MOL = 44.009

# An analysis summing outside this window is not an anhydrous major-element
# analysis (common practice, no source: good microprobe totals 98.5-101.5 wt%,
# hydrous glasses down to ~93 wt%).
SUM_MIN_WT = 90.0
SUM_MAX_WT = 105.0


def validate_melt(melt_oxides_wt):
    """Check an oxide wt% dict; return it normalised to 100 wt% (float values).

    Raises ValueError with a one-line message naming the offending oxide.
    """
    if not isinstance(melt_oxides_wt, dict):
        raise ValueError(f"melt composition: expected a dict of oxide wt%, got {type(melt_oxides_wt).__name__}")
    for name in REQUIRED_OXIDES:
        if name not in melt_oxides_wt:
            raise ValueError(f"melt composition: missing oxide '{name}' (required: {', '.join(REQUIRED_OXIDES)})")
    clean = {}
    for name, value in melt_oxides_wt.items():
        if name not in ALLOWED_OXIDES:
            raise ValueError(f"melt composition: unknown oxide '{name}' (allowed: {', '.join(ALLOWED_OXIDES)}; "
                             "iron as total FeO 'FeOt', volatiles are separate parameters)")
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise ValueError(f"melt composition: oxide '{name}' value {value!r} is not a number") from None
        if not math.isfinite(v):
            raise ValueError(f"melt composition: oxide '{name}' value {v} is not finite")
        if v < 0.0:
            raise ValueError(f"melt composition: oxide '{name}' is negative ({v} wt%)")
        clean[name] = v
    total = sum(clean.values())
    if not (SUM_MIN_WT <= total <= SUM_MAX_WT):
        raise ValueError(f"melt composition: oxides sum to {total:.2f} wt%, expected {SUM_MIN_WT:g}-{SUM_MAX_WT:g} wt%")
    if clean["SiO2"] <= 0.0:
        raise ValueError("melt composition: oxide 'SiO2' must be positive")
    return {k: 100.0 * v / total for k, v in clean.items()}


def oxide_moles_per_100g(melt_oxides_wt):
    """Moles of each oxide in 100 g of (normalised, anhydrous) melt."""
    m = validate_melt(melt_oxides_wt)
    return {k: v / OXIDE_MOLAR_MASS_G_MOL[k] for k, v in m.items()}


def anhydrous_mole_fractions(melt_oxides_wt):
    """Mole fractions of the oxides as written (SiO2, Al2O3, Na2O, ...)."""
    n = oxide_moles_per_100g(melt_oxides_wt)
    tot = sum(n.values())
    return {k: v / tot for k, v in n.items()}


def cation_fractions(melt_oxides_wt):
    """Cation fractions keyed by oxide name (single-cation basis: AlO1.5, NaO0.5, ...)."""
    n = oxide_moles_per_100g(melt_oxides_wt)
    c = {k: v * CATIONS_PER_OXIDE[k] for k, v in n.items()}
    tot = sum(c.values())
    return {k: v / tot for k, v in c.items()}


def mean_molar_mass_g_mol(melt_oxides_wt):
    """Mean molar mass of the anhydrous melt per mole of oxides as written."""
    n = oxide_moles_per_100g(melt_oxides_wt)
    return 100.0 / sum(n.values())


def molar_mass_per_cation_g_mol(melt_oxides_wt):
    """Anhydrous melt mass per mole of cations (single-cation oxide basis)."""
    n = oxide_moles_per_100g(melt_oxides_wt)
    return 100.0 / sum(v * CATIONS_PER_OXIDE[k] for k, v in n.items())


def molar_mass_per_oxygen_g_mol(melt_oxides_wt):
    """Anhydrous melt mass per mole of oxygen (one-oxygen basis)."""
    n = oxide_moles_per_100g(melt_oxides_wt)
    return 100.0 / sum(v * OXYGENS_PER_OXIDE[k] for k, v in n.items())


def h2o_wt_percent_from_mole_fraction(x_h2o, anhydrous_molar_mass_g_mol):
    """wt% H2O from its mole fraction among H2O + anhydrous units of the given molar mass."""
    x = np.asarray(x_h2o, dtype=float)
    a = x * H2O_MOLAR_MASS_G_MOL
    return 100.0 * a / (a + (1.0 - x) * anhydrous_molar_mass_g_mol)


def h2o_mole_fraction_from_wt_percent(h2o_wt, anhydrous_molar_mass_g_mol):
    """Inverse of h2o_wt_percent_from_mole_fraction."""
    w = np.asarray(h2o_wt, dtype=float)
    nw = w / H2O_MOLAR_MASS_G_MOL
    return nw / (nw + (100.0 - w) / anhydrous_molar_mass_g_mol)


def broadcast_flat(*arrays):
    """(common shape, contiguous 1-D float copies) of arrays broadcast together;
    the array wrappers of the solubility kernels use it."""
    arrs = np.broadcast_arrays(*[np.asarray(a, dtype=np.float64) for a in arrays])
    return arrs[0].shape, [np.ascontiguousarray(a).ravel() for a in arrs]
