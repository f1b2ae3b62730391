"""H2O solubility in silicate melt: scalar numba kernels and array wrappers.

Laws (ids are stable; the registry maps names to them):
  LAW_MOORE1998 = 0  Moore, Vennemann & Carmichael (1998), Am. Mineral. 83:36-42, their
                     regression eq.: ln (X_H2O)^2 = a/T + sum_i b_i X_i (P/T) + c ln f_H2O + d,
                     i.e. the SQUARE of the melt H2O mole fraction (water dissolving as OH
                     pairs, X^2 ~ f_H2O). X_i: anhydrous oxide mole fractions (Al2O3, FeO
                     with total iron as FeO, Na2O); X_H2O: H2O among H2O + oxides as written;
                     T in K, P and f_H2O in bar. Coefficients a, b_i, c = 1.171 and
                     d = -14.21: from memory, recalled twice (see MOORE1998_* below).
  LAW_LIU2005   = 1  Liu, Zhang & Behrens (2005), J. Volcanol. Geotherm. Res. 143:219-235,
                     eq. for H2Ot (wt%) in rhyolite with mixed H2O-CO2 fluid, Pw and Pc the
                     partial pressures in MPa. Coefficients from memory, recalled twice.

Kernel signature (all laws):
  h2o_wt_percent(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k)
"""
import math

import numpy as np
from numba import njit

from ventsource.magma import melt as _melt

LAW_MOORE1998 = 0
LAW_LIU2005 = 1
LAW_POWER = 2      # wt% = k * f_H2O^n (k, n given in the prior file)
LAW_INSOLUBLE = 9  # nothing dissolves: a limiting case for checks

# Moore et al. (1998) regression coefficients (their fit table): from memory, recalled
# twice independently with the same values.
# The earlier version of this module used ln X (not ln X^2) with c = 0.5 and
# d = -6.471 and gave ~8.5 wt% H2O for MORB at 1200 C, 100 MPa. With the
# squared form and c = 1.171, d = -14.21 both independent magnitude checks in
# tests/test_solubility.py pass (MORB ~3.3 wt% at 1200 C / 100 MPa; rhyolite
# ~6.0 wt% at 850 C / 200 MPa with an IAPWS-95 fugacity).
MOORE1998_A = 2565.0
MOORE1998_B = {"Al2O3": -1.997, "FeOt": -0.9275, "Na2O": 2.736}
MOORE1998_C = 1.171
MOORE1998_D = -14.21
# Not checked against the paper's own table (the text of the paper could not be
# consulted here). Checked against independent pure-H2O experiments read from
# published abstracts (tests/test_solubility_experiments.py): haplogranites at
# 2 kbar (Holtz et al. 1992) and albite at 2 kbar (Behrens 1995; albite-nepheline
# study at 200 MPa), all within 8 %; see README.md for the table.
MOORE1998_VERIFIED = False
MOORE1998_MAGNITUDE_CHECKED = True

# Liu et al. (2005) rhyolite H2Ot coefficients, from memory, recalled twice (checked
# within 9 % against haplogranite and pantellerite pure-H2O data from published
# abstracts, tests/test_solubility_experiments.py):
# H2Ot = (354.94 Pw^0.5 + 9.623 Pw - 1.5223 Pw^1.5)/T + 0.0012439 Pw^1.5
#        + Pc (-1.084e-4 Pw^0.5 - 1.362e-5 Pw)
LIU2005_H2O = (354.94, 9.623, -1.5223, 0.0012439, -1.084e-4, -1.362e-5)

_BAR_PER_MPA = 10.0


def prepare_moore1998(melt_oxides_wt):
    """Parameter vector [sum_i b_i X_i, anhydrous mean molar mass g/mol] for LAW_MOORE1998."""
    x = _melt.anhydrous_mole_fractions(melt_oxides_wt)
    bx = sum(b * x.get(k, 0.0) for k, b in MOORE1998_B.items())
    return np.array([bx, _melt.mean_molar_mass_g_mol(melt_oxides_wt)], dtype=np.float64)


def prepare_power(melt_oxides_wt, coefficient, exponent):
    """[k, n] for LAW_POWER: dissolved H2O (wt%) = k * f_H2O(bar)^n."""
    return np.array([float(coefficient), float(exponent)], dtype=np.float64)


def prepare_liu2005(melt_oxides_wt):
    """Liu et al. (2005) has no composition term (rhyolite only); the vector holds SiO2 wt% for reference."""
    m = _melt.validate_melt(melt_oxides_wt)
    return np.array([m["SiO2"]], dtype=np.float64)


@njit(cache=True)
def _moore1998(params, f_h2o_bar, pressure_bar, temperature_k):
    if f_h2o_bar <= 0.0:
        return 0.0
    # Moore et al. (1998): the regression gives ln(X^2), so halve it for ln X.
    ln_x2 = (MOORE1998_A / temperature_k + params[0] * pressure_bar / temperature_k
             + MOORE1998_C * math.log(f_h2o_bar) + MOORE1998_D)
    x = math.exp(0.5 * ln_x2)
    if x >= 1.0:
        return math.nan
    a = x * 18.015
    return 100.0 * a / (a + (1.0 - x) * params[1])


@njit(cache=True)
def _liu2005(p_h2o_bar, p_co2_bar, temperature_k):
    pw = p_h2o_bar / _BAR_PER_MPA
    pc = p_co2_bar / _BAR_PER_MPA
    if pw <= 0.0:
        return 0.0
    if pc < 0.0:
        pc = 0.0
    s = math.sqrt(pw)
    p15 = pw * s
    return ((354.94 * s + 9.623 * pw - 1.5223 * p15) / temperature_k + 0.0012439 * p15
            + pc * (-1.084e-4 * s - 1.362e-5 * pw))


@njit(cache=True)
def h2o_wt_percent(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k):
    """Dissolved H2O (wt%) for one state; NaN for an unknown law id."""
    if law_id == LAW_MOORE1998:
        return _moore1998(params, f_h2o_bar, pressure_bar, temperature_k)
    if law_id == LAW_LIU2005:
        return _liu2005(p_h2o_bar, p_co2_bar, temperature_k)
    if law_id == LAW_POWER:
        # Square-root (n = 0.5) dependence on fH2O: water dissolves mainly as OH
        # pairs at low content (Stolper 1982, Contrib. Mineral. Petrol. 81:1-17).
        # The demo constants (k = 0.095, n = 0.5) under-predict an alkaline mafic
        # melt by 20-30 % at 400-500 MPa (tests/test_solubility_experiments.py).
        if f_h2o_bar <= 0.0:
            return 0.0
        return params[0] * f_h2o_bar ** params[1]
    if law_id == LAW_INSOLUBLE:
        return 0.0
    return math.nan


@njit(cache=True)
def _h2o_loop(law_id, params, ph, pc, fh, fc, p, t, out):
    for i in range(out.size):
        out[i] = h2o_wt_percent(law_id, params, ph[i], pc[i], fh[i], fc[i], p[i], t[i])


def h2o_wt_percent_array(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k):
    """Array wrapper of h2o_wt_percent; inputs broadcast together, result has the broadcast shape."""
    shape, flat = _melt.broadcast_flat(p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar,
                                       temperature_k)
    out = np.empty(flat[0].size, dtype=np.float64)
    _h2o_loop(int(law_id), np.ascontiguousarray(params, dtype=np.float64), *flat, out)
    return out.reshape(shape)


def pure_h2o_curve(law_id, params, pressure_bar, temperature_k, fugacity_coefficient=1.0):
    """Dissolved H2O (wt%) vs pressure for a pure H2O fluid: p_H2O = P, f_H2O = phi * P."""
    p = np.asarray(pressure_bar, dtype=np.float64)
    phi = np.asarray(fugacity_coefficient, dtype=np.float64)
    return h2o_wt_percent_array(law_id, params, p, 0.0, phi * p, 0.0, p, temperature_k)
