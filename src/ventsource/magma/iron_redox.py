"""Ferric/ferrous iron of a silicate melt at given T, P and fO2: Kress and
Carmichael (1991), Contrib. Mineral. Petrol. 108:82-92, their eq. 7:

    ln(X_Fe2O3 / X_FeO) = a ln fO2 + b/T + c + sum_i d_i X_i
                          + e [1 - T0/T - ln(T/T0)] + f P/T + g (T - T0) P/T + h P^2/T

with X the mole fractions of the anhydrous oxides (iron as total FeO in the sum),
T in K, P in Pa, T0 = 1673 K. Coefficients as widely reprinted, from memory, and
cross-checked against a second reprint of the same table (the documentation of the
petrobuffer package's ferric module): every value agrees.
Calibrated (from memory) on 1 bar experiments, 1200-1630 C, basalt to rhyolite, plus
the high-pressure volume terms.
"""
import math

import numpy as np

from ventsource.magma.melt import anhydrous_mole_fractions

KC91 = {"a": 0.196, "b": 1.1492e4, "c": -6.675, "e": -3.36, "f": -7.01e-7, "g": -1.54e-10,
        "h": 3.85e-17, "t0_k": 1673.0}
KC91_D = {"Al2O3": -2.243, "FeOt": -1.828, "CaO": 3.201, "Na2O": 5.854, "K2O": 6.215}
PA_PER_BAR = 1.0e5
# the same numbers as plain floats, for the compiled redox balance (redox_balance.py)
KC_A, KC_B, KC_C, KC_E = KC91["a"], KC91["b"], KC91["c"], KC91["e"]
KC_F, KC_G, KC_H, KC_T0 = KC91["f"], KC91["g"], KC91["h"], KC91["t0_k"]


def kc91_composition_term(melt_oxides_wt):
    """sum_i d_i X_i of Kress and Carmichael (1991) for one melt."""
    x = anhydrous_mole_fractions(melt_oxides_wt)
    return sum(d * x.get(name, 0.0) for name, d in KC91_D.items())


def ln_fe2o3_feo(composition_term, temperature_k, pressure_bar, ln_fo2):
    """ln(X_Fe2O3 / X_FeO); arrays broadcast."""
    k = KC91
    t = np.asarray(temperature_k, dtype=float)
    p = np.asarray(pressure_bar, dtype=float) * PA_PER_BAR
    t0 = k["t0_k"]
    return (k["a"] * np.asarray(ln_fo2, dtype=float) + k["b"] / t + k["c"] + composition_term
            + k["e"] * (1.0 - t0 / t - np.log(t / t0)) + k["f"] * p / t
            + k["g"] * (t - t0) * p / t + k["h"] * p * p / t)


def fe3_fraction(melt_oxides_wt, temperature_k, pressure_bar, log10_fo2):
    """Fe3+/Fe total of the melt (molar) at T, P and log10 fO2 (bar)."""
    r = np.exp(ln_fe2o3_feo(kc91_composition_term(melt_oxides_wt), temperature_k, pressure_bar,
                            np.asarray(log10_fo2, dtype=float) * math.log(10.0)))
    return 2.0 * r / (2.0 * r + 1.0)


def log10_fo2_from_fe3(melt_oxides_wt, temperature_k, pressure_bar, fe3_fraction_value):
    """Inverse of fe3_fraction: log10 fO2 (bar) of a melt with the given Fe3+/Fe total."""
    f = np.asarray(fe3_fraction_value, dtype=float)
    ln_r = np.log(f / (2.0 * (1.0 - f)))
    rest = ln_fe2o3_feo(kc91_composition_term(melt_oxides_wt), temperature_k, pressure_bar, 0.0)
    return (ln_r - rest) / KC91["a"] / math.log(10.0)
