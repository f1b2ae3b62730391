"""Water vapour from air temperature, relative humidity and pressure.

Saturation vapour pressure over liquid water: Buck (1981), J. Appl. Meteorol.
20, 1527-1532, the e_w1 form 6.1121 exp(17.502 T / (240.97 + T)) hPa (T in C)
with the enhancement factor for moist air f = 1.0007 + 3.46e-6 P (P in hPa),
stated there for about -20 to +50 C. Relative humidity is taken with respect
to water, as meteorological sensors report it (WMO convention, also below 0 C).
"""
import numpy as np


def saturation_vapour_pressure_hpa(temperature_c):
    """Buck (1981) e_w1 over a flat surface of pure liquid water, hPa."""
    t = np.asarray(temperature_c, dtype=float)
    return 6.1121 * np.exp(17.502 * t / (240.97 + t))


def enhancement_factor(pressure_hpa):
    """Buck (1981) f_w1 for water vapour in moist air."""
    return 1.0007 + 3.46e-6 * np.asarray(pressure_hpa, dtype=float)


def h2o_ppmv(temperature_c, relative_humidity_percent, pressure_hpa):
    """H2O mole fraction in ppmv: RH/100 * f(P) e_w(T) / P * 1e6."""
    p = np.asarray(pressure_hpa, dtype=float)
    e = (np.asarray(relative_humidity_percent, dtype=float) / 100.0
         * enhancement_factor(p) * saturation_vapour_pressure_hpa(temperature_c))
    return e / p * 1e6
