"""Composition laws of sulfur in silicate melt: sulfide capacity, sulfide
saturation (SCSS) and anhydrite saturation (SCAS).

Each law is reduced, once per melt composition, to a few numbers that the
compiled degassing kernels evaluate at every temperature and pressure
(degassing_context._update_sulfide_factor, _update_sulfur_caps):

* sulfide capacity: ln C_S = A + B/T, C_S in wt% S per (fS2/fO2)^0.5 (bar);
* SCSS: ln [S] (ppm) = A + B/T + C P (P in bar);
* SCAS: ln [S] (ppm) = A + B/T.

Coefficients below are recalled from memory (marked so beside each); none could
be read from the papers themselves here. The checks in tests/test_sulfur_laws.py
compare them with experiments, also recalled from memory.
"""
import math

import numpy as np

from ventsource.magma.melt import (
    CATIONS_PER_OXIDE, H2O_MOLAR_MASS_G_MOL, anhydrous_mole_fractions, cation_fractions,
    mean_molar_mass_g_mol,
)

M_S_G_MOL = 32.06
LN_PPM_PER_WT_PERCENT = math.log(1.0e4)

# O'Neill (2021), "The thermodynamic controls on sulfide saturation in silicate melts
# with application to ocean floor basalts", in Magma Redox Geochemistry (AGU Geophys.
# Monogr. 266), the temperature-dependent sulfide capacity of anhydrous melts:
#   ln C_S (ppm) = 8.77 - 23590/T + (1673/T) [6.7 (X_Na + X_K) + 4.9 X_Mg + 8.1 X_Ca
#       + 8.9 (X_Fe + X_Mn) + 5.0 X_Ti + 1.8 X_Al - 22.2 X_Ti (X_Fe + X_Mn)
#       + 7.2 X_Fe X_Si] - 2.06 erf[-7.2 (X_Fe + X_Mn)]
# with X cation fractions (single-cation oxide basis). From memory. It extends the
# 1400 C law of O'Neill and Mavrogenes (2002), J. Petrol. 43:1049, whose definition
# C_S = [S] (fO2/fS2)^0.5 it keeps. Calibrated on 1 bar experiments, ~1200-1500 C,
# basaltic to komatiitic melts. Iron here is total Fe as Fe2+ (FeOt).
ONEILL2021_CS = {"const": 8.77, "inv_t": -23590.0, "t_ref_k": 1673.0, "NaK": 6.7, "Mg": 4.9,
                 "Ca": 8.1, "FeMn": 8.9, "Ti": 5.0, "Al": 1.8, "Ti_FeMn": -22.2, "Fe_Si": 7.2,
                 "erf": -2.06, "erf_scale": -7.2}

# Li and Ripley (2009), Econ. Geol. 104:405-412, SCSS of mafic melts (their eq. with
# the pressure term): ln X_S = -1.76 - 4740/T - 0.021 P(kbar) + 5.559 X_FeO
#   + 2.565 X_TiO2 + 2.709 X_CaO - 3.192 X_SiO2 - 3.049 X_H2O,
# X mole fractions of the oxides in the hydrous melt. From memory. The H2O term acts
# through the melt's own H2O at each state (the kernels move the cap with it):
# X_i = X_i,dry (1 - phi) with phi = X_H2O, so ln X_S = (dry law) - phi (sum_i k_i
# X_i,dry + 3.049), and ppm = 1e6 X_S M_S / M_melt with the hydrous mean molar mass
# (scss_water_term). With 3-5 wt% H2O in a basalt it lowers SCSS by 13-21 % (MORB below).
# Calibration (from memory): basaltic to andesitic melts, 1 bar to ~9 GPa,
# 1200-1800 C; stated fit error about 20-30 % relative (from memory).
LI_RIPLEY2009_SCSS = {"const": -1.76, "inv_t": -4740.0, "per_kbar": -0.021, "FeOt": 5.559,
                      "TiO2": 2.565, "CaO": 2.709, "SiO2": -3.192, "H2O": -3.049}

# Anhydrite saturation: no published SCAS law's coefficients could be verified here
# (Chowdhury and Dasgupta 2019, Chem. Geol. 522:162, and Zajacz and Tsay 2019,
# GCA 261:288, are the laws to use once read). Provisional law: ln SCAS (ppm) =
# A + B/T through two experiment values recalled from memory, hydrous basalt at
# 1300 C, ~1 GPa: ~1.5 wt% S at anhydrite saturation (Jugo, Luth and Richards 2005,
# J. Petrol. 46:783), and hydrous dacite at 850 C, 200 MPa: ~0.1 wt% S (Carroll and
# Rutherford 1987, J. Petrol. 28:781). Not composition-dependent.
SCAS_ANCHORS = ((1573.15, 15000.0), (1123.15, 1000.0))


def _scas_line():
    (t1, s1), (t2, s2) = SCAS_ANCHORS
    b = (math.log(s1) - math.log(s2)) / (1.0 / t1 - 1.0 / t2)
    return math.log(s1) - b / t1, b


SCAS_A, SCAS_B_K = _scas_line()


def _cations(melt_oxides_wt):
    c = cation_fractions(melt_oxides_wt)
    return lambda name: c.get(name, 0.0)


def sulfide_capacity_oneill2021(melt_oxides_wt):
    """(A, B) with ln C_S (wt% S per (fS2/fO2)^0.5) = A + B/T(K); O'Neill (2021), see above."""
    k = ONEILL2021_CS
    x = _cations(melt_oxides_wt)
    fe_mn = x("FeOt") + x("MnO")
    comp = (k["NaK"] * (x("Na2O") + x("K2O")) + k["Mg"] * x("MgO") + k["Ca"] * x("CaO")
            + k["FeMn"] * fe_mn + k["Ti"] * x("TiO2") + k["Al"] * x("Al2O3")
            + k["Ti_FeMn"] * x("TiO2") * fe_mn + k["Fe_Si"] * x("FeOt") * x("SiO2"))
    a_ppm = k["const"] + k["erf"] * math.erf(k["erf_scale"] * fe_mn)
    b = k["inv_t"] + k["t_ref_k"] * comp
    return a_ppm - LN_PPM_PER_WT_PERCENT, b


def _dry_terms(melt_oxides_wt):
    k = LI_RIPLEY2009_SCSS
    x = anhydrous_mole_fractions(melt_oxides_wt)
    return sum(k[name] * x.get(name, 0.0) for name in ("FeOt", "TiO2", "CaO", "SiO2"))


def scss_li_ripley2009(melt_oxides_wt):
    """(A, B, C) with ln SCSS (ppm) = A + B/T(K) + C P(bar) of the dry melt; Li and
    Ripley (2009), see above (the H2O term: scss_water_term)."""
    k = LI_RIPLEY2009_SCSS
    comp = _dry_terms(melt_oxides_wt)
    # X_S is a mole fraction among the oxide units: ppm = 1e6 X_S M_S / M_melt (X_S << 1)
    to_ppm = math.log(1.0e6 * M_S_G_MOL / mean_molar_mass_g_mol(melt_oxides_wt))
    return k["const"] + comp + to_ppm, k["inv_t"], k["per_kbar"] / 1000.0


def scss_water_coefficient(melt_oxides_wt):
    """(W, dry mean molar mass g/mol): ln SCSS falls by W phi for an H2O mole fraction
    phi, besides the dilution of ppm by the lighter H2O units (scss_water_term)."""
    return (_dry_terms(melt_oxides_wt) - LI_RIPLEY2009_SCSS["H2O"],
            mean_molar_mass_g_mol(melt_oxides_wt))


def scss_water_term(melt_oxides_wt, h2o_wt):
    """ln SCSS(hydrous) - ln SCSS(dry) for a melt with h2o_wt wt% H2O (array)."""
    w, m_dry = scss_water_coefficient(melt_oxides_wt)
    h = np.asarray(h2o_wt, float) / 100.0
    n_w = h / H2O_MOLAR_MASS_G_MOL
    phi = n_w / (n_w + (1.0 - h) / m_dry)
    return -phi * w - np.log(1.0 - phi + phi * H2O_MOLAR_MASS_G_MOL / m_dry)


def prepare_sulfur_caps(melt_oxides_wt):
    """The seven cap terms the kernels read: SCSS (A, B, C per bar), SCAS (A, B), the
    SCSS H2O coefficient W and the dry melt's mean molar mass."""
    a, b, c = scss_li_ripley2009(melt_oxides_wt)
    w, m_dry = scss_water_coefficient(melt_oxides_wt)
    return np.array([a, b, c, SCAS_A, SCAS_B_K, w, m_dry], dtype=np.float64)


def scss_ppm(melt_oxides_wt, temperature_k, pressure_bar, h2o_wt=0.0):
    """SCSS (ppm) as array over temperature, pressure and the melt's H2O (wt%)."""
    a, b, c = scss_li_ripley2009(melt_oxides_wt)
    return np.exp(a + b / np.asarray(temperature_k, float) + c * np.asarray(pressure_bar, float)
                  + scss_water_term(melt_oxides_wt, h2o_wt))


def scas_ppm(temperature_k):
    """SCAS (ppm) of the provisional law, as array over temperature."""
    return np.exp(SCAS_A + SCAS_B_K / np.asarray(temperature_k, float))


def sulfide_capacity_wt(melt_oxides_wt, temperature_k):
    """C_S (wt% S per (fS2/fO2)^0.5) as array over temperature."""
    a, b = sulfide_capacity_oneill2021(melt_oxides_wt)
    return np.exp(a + b / np.asarray(temperature_k, float))


__all__ = ["CATIONS_PER_OXIDE", "prepare_sulfur_caps", "scas_ppm", "scss_ppm", "scss_water_term",
           "sulfide_capacity_oneill2021", "sulfide_capacity_wt", "scss_li_ripley2009"]
