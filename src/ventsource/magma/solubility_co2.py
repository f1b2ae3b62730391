"""CO2 solubility in silicate melt: scalar numba kernels and array wrappers.

Laws (ids are stable; the registry maps names to them):
  LAW_SHISHKINA2014 = 0  Shishkina et al. (2014), Chem. Geol. 388:112-129, basaltic melts:
                         ln CO2(ppm) = 1.150 ln P(MPa) + 6.71 Pi* - 1.345, with
                         Pi* = (Ca + 0.8 K + 0.7 Na + 0.4 Mg + 0.4 Fe) / (Si + Al) in cation
                         fractions. Coefficients from memory, recalled twice. P is taken as the CO2 partial
                         pressure (the paper's fit is to CO2-dominated fluid).
  LAW_LIU2005       = 1  Liu, Zhang & Behrens (2005), J. Volcanol. Geotherm. Res. 143:219-235,
                         rhyolite: CO2(ppm) = Pc (5668 - 55.99 Pw)/T + Pc (0.4133 Pw^0.5
                         + 2.041e-3 Pw^1.5), Pw, Pc partial pressures in MPa. From memory, recalled twice.

Kernel signature (all laws):
  co2_ppm(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k)
"""
import math

import numpy as np
from numba import njit

from ventsource.magma import melt as _melt

LAW_SHISHKINA2014 = 0
LAW_LIU2005 = 1

# Neither CO2 law is checked against experiments yet: no open experiment with a full melt
# composition and measured CO2 could be read (README.md, solubility check table).
SHISHKINA2014 = (1.150, 6.71, -1.345)  # from memory, recalled twice
LIU2005_CO2 = (5668.0, -55.99, 0.4133, 2.041e-3)  # from memory, recalled twice

_BAR_PER_MPA = 10.0


def pi_star(melt_oxides_wt):
    """Shishkina et al. (2014) composition parameter Pi* from cation fractions (FeOt as Fe2+)."""
    c = _melt.cation_fractions(melt_oxides_wt)
    num = c["CaO"] + 0.8 * c["K2O"] + 0.7 * c["Na2O"] + 0.4 * c["MgO"] + 0.4 * c["FeOt"]
    return num / (c["SiO2"] + c["Al2O3"])


def prepare_shishkina2014(melt_oxides_wt):
    """Parameter vector [Pi*] for LAW_SHISHKINA2014."""
    return np.array([pi_star(melt_oxides_wt)], dtype=np.float64)


def prepare_liu2005(melt_oxides_wt):
    """No composition term (rhyolite only); the vector holds SiO2 wt% for reference."""
    m = _melt.validate_melt(melt_oxides_wt)
    return np.array([m["SiO2"]], dtype=np.float64)


LAW_INSOLUBLE = 9  # nothing dissolves: a limiting case for checks


@njit(cache=True)
def _shishkina2014(params, p_co2_bar):
    pc = p_co2_bar / _BAR_PER_MPA
    if pc <= 0.0:
        return 0.0
    return math.exp(1.150 * math.log(pc) + 6.71 * params[0] - 1.345)


@njit(cache=True)
def _liu2005(p_h2o_bar, p_co2_bar, temperature_k):
    pc = p_co2_bar / _BAR_PER_MPA
    pw = p_h2o_bar / _BAR_PER_MPA
    if pc <= 0.0:
        return 0.0
    if pw < 0.0:
        pw = 0.0
    s = math.sqrt(pw)
    return pc * (5668.0 - 55.99 * pw) / temperature_k + pc * (0.4133 * s + 2.041e-3 * pw * s)


@njit(cache=True)
def co2_ppm(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k):
    """Dissolved CO2 (ppm by weight) for one state; NaN for an unknown law id."""
    if law_id == LAW_SHISHKINA2014:
        return _shishkina2014(params, p_co2_bar)
    if law_id == LAW_LIU2005:
        return _liu2005(p_h2o_bar, p_co2_bar, temperature_k)
    if law_id == LAW_INSOLUBLE:
        return 0.0
    return math.nan


@njit(cache=True)
def _co2_loop(law_id, params, ph, pc, fh, fc, p, t, out):
    for i in range(out.size):
        out[i] = co2_ppm(law_id, params, ph[i], pc[i], fh[i], fc[i], p[i], t[i])


def co2_ppm_array(law_id, params, p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar, temperature_k):
    """Array wrapper of co2_ppm; inputs broadcast together, result has the broadcast shape."""
    shape, flat = _melt.broadcast_flat(p_h2o_bar, p_co2_bar, f_h2o_bar, f_co2_bar, pressure_bar,
                                       temperature_k)
    out = np.empty(flat[0].size, dtype=np.float64)
    _co2_loop(int(law_id), np.ascontiguousarray(params, dtype=np.float64), *flat, out)
    return out.reshape(shape)


def pure_co2_curve(law_id, params, pressure_bar, temperature_k, fugacity_coefficient=1.0):
    """Dissolved CO2 (ppm) vs pressure for a pure CO2 fluid: p_CO2 = P, f_CO2 = phi * P."""
    p = np.asarray(pressure_bar, dtype=np.float64)
    phi = np.asarray(fugacity_coefficient, dtype=np.float64)
    return co2_ppm_array(law_id, params, 0.0, p, 0.0, phi * p, p, temperature_k)
