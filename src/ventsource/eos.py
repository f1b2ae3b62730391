"""Pure-species fugacity coefficients of the gas species, mixed by Lewis-Randall.

Lewis-Randall rule: the fugacity of species i in the gas mixture is
f_i = x_i * phi_i(T, P) * P, where phi_i is the fugacity coefficient of pure
i at the same T and P (Lewis and Randall 1923, Thermodynamics, McGraw-Hill;
common practice for magmatic gases). phi therefore depends on T and P only.

Laws used (one per species, in SPECIES order):

=======  ==============================================================
H2O      CORK, Holland & Powell 1991 (Contrib. Mineral. Petrol. 109:265)
CO2      CORK, Holland & Powell 1991
H2       Peng & Robinson 1976 (Ind. Eng. Chem. Fundam. 15:59-64)
O2, CO,  corresponding-states CORK, Holland & Powell 1991, with the
CH4,     critical constants below
SO2,
H2S,
S2, COS
=======  ==============================================================

Why Peng-Robinson for H2: the corresponding-states CORK with the true
critical point of H2 (Tc = 33 K, so T/Tc ~ 30-50 here) overestimates phi
by more than 100 % at 5 kbar against the Leachman et al. (2009) reference
equation in CoolProp; Peng-Robinson stays within ~6 % (tests/test_eos.py).
For the other gases Peng-Robinson under-predicts phi by 20-35 % at 5 kbar
while the corresponding-states CORK stays within ~16 %, so CORK is kept.

Measured against CoolProp 8.0 (tests/test_eos.py, 873-1273 K, 1-5000 bar):
H2O (IAPWS-95) max |dev| 2.7 %, CO2 (Span-Wagner, <= 1100 K) max 2.3 %,
H2 (Leachman, <= 1000 K) max 4.9 %, O2 (Schmidt-Wagner, <= 800 bar) 4.9 %;
CH4 +16 % at 2-5 kbar (Setzmann-Wagner, 500-625 K); in-box comparisons against
extrapolated references: CH4 15 %, CO 13 %, H2S 10 %, SO2 9 %.
"""
import math

import numpy as np
from numba import njit

from .eos_cork import largest_cubic_root, ln_phi_co2, ln_phi_corresponding_states, ln_phi_h2o
from .species import N_SPECIES, SPECIES

# Critical temperature (K) and pressure (bar), SPECIES order. Values as tabulated
# in the `chemicals` library 1.5 (critical-point compilations; IAPWS-95 for H2O,
# Span & Wagner 1996 for CO2); cross-checked in tests/test_eos.py.
# S2 is not in that library: Tc = 208.15 K, Pc = 72.954 bar, from memory
# (the value used for S2 in the corresponding-states literature on volcanic gases).
CRITICAL_TEMPERATURE_K = np.array([
    647.096,   # H2O
    33.145,    # H2
    154.581,   # O2
    304.1282,  # CO2
    132.86,    # CO
    190.564,   # CH4
    430.64,    # SO2
    373.1,     # H2S
    208.15,    # S2 (from memory)
    378.77,    # COS
])
CRITICAL_PRESSURE_BAR = np.array([
    220.64,    # H2O
    12.964,    # H2
    50.43,     # O2
    73.773,    # CO2
    34.94,     # CO
    45.992,    # CH4
    78.866,    # SO2
    90.0,      # H2S
    72.954,    # S2 (from memory)
    63.70,     # COS
])
# Acentric factor of H2 (chemicals 1.5), used by Peng-Robinson only.
H2_ACENTRIC = -0.219

_R_J = 8.314462618  # J/(mol K), CODATA 2018
_SQRT2 = math.sqrt(2.0)

_H2O, _H2, _CO2 = SPECIES.index("H2O"), SPECIES.index("H2"), SPECIES.index("CO2")
_TC = CRITICAL_TEMPERATURE_K.copy()
_PC = CRITICAL_PRESSURE_BAR.copy()


@njit(cache=True)
def ln_phi_peng_robinson(temperature_k, pressure_bar, tc_k, pc_bar, acentric):
    """ln(phi) of a pure gas, Peng & Robinson (1976) eqs 3-5, 15 (vapour/supercritical root)."""
    p_pa = pressure_bar * 1e5
    pc_pa = pc_bar * 1e5
    kappa = 0.37464 + 1.54226 * acentric - 0.26992 * acentric * acentric
    alpha = (1.0 + kappa * (1.0 - math.sqrt(temperature_k / tc_k))) ** 2
    a = 0.45724 * _R_J * _R_J * tc_k * tc_k / pc_pa * alpha
    b = 0.07780 * _R_J * tc_k / pc_pa
    rt = _R_J * temperature_k
    big_a = a * p_pa / (rt * rt)
    big_b = b * p_pa / rt
    # Z^3 - (1-B) Z^2 + (A - 3B^2 - 2B) Z - (AB - B^2 - B^3) = 0; largest root = gas
    z = largest_cubic_root(-(1.0 - big_b), big_a - 3.0 * big_b * big_b - 2.0 * big_b,
                           -(big_a * big_b - big_b * big_b - big_b ** 3))
    if not z > big_b:
        z = 1.0 + big_b
    return (z - 1.0 - math.log(z - big_b)
            - big_a / (2.0 * _SQRT2 * big_b)
            * math.log((z + (1.0 + _SQRT2) * big_b) / (z + (1.0 - _SQRT2) * big_b)))


@njit(cache=True)
def log_fugacity_coefficients_kernel(temperature_k, pressure_bar, out):
    """Fill out[0:10] with ln(phi_i) of the pure species at (T, P), SPECIES order.

    Scalar kernel for compiled solvers; no input checking (callers check).
    """
    for i in range(N_SPECIES):
        if i == _H2O:
            out[i] = ln_phi_h2o(temperature_k, pressure_bar)
        elif i == _CO2:
            out[i] = ln_phi_co2(temperature_k, pressure_bar)
        elif i == _H2:
            out[i] = ln_phi_peng_robinson(temperature_k, pressure_bar, _TC[i], _PC[i], H2_ACENTRIC)
        else:
            out[i] = ln_phi_corresponding_states(temperature_k, pressure_bar, _TC[i], _PC[i])


@njit(cache=True)
def _log_phi_table(temperature_k, pressure_bar):
    n = temperature_k.shape[0]
    out = np.empty((n, N_SPECIES))
    row = np.empty(N_SPECIES)
    for j in range(n):
        log_fugacity_coefficients_kernel(temperature_k[j], pressure_bar[j], row)
        out[j, :] = row
    return out


def _as_positive_1d(value, name):
    arr = np.atleast_1d(np.asarray(value, dtype=float))
    if arr.ndim != 1:
        raise ValueError(f"{name}: expected a scalar or 1-D array, got shape {arr.shape}")
    bad = ~np.isfinite(arr) | (arr <= 0.0)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        raise ValueError(f"{name}: element {k} is {arr[k]!r}; must be finite and > 0")
    return arr


def fugacity_coefficients(temperature_k, pressure_bar, ideal=False):
    """Pure-species fugacity coefficients phi, shape (n, 10), columns in SPECIES order.

    temperature_k, pressure_bar: scalars or 1-D arrays (broadcast together).
    ideal=True returns ones (ideal-gas switch). Designed for 1-5000 bar and
    873-1573 K; finite (smoothly extrapolated) down to 500 K and up to 6000 bar.
    """
    t = _as_positive_1d(temperature_k, "temperature_k")
    p = _as_positive_1d(pressure_bar, "pressure_bar")
    try:
        t, p = np.broadcast_arrays(t, p)
    except ValueError:
        raise ValueError(f"temperature_k (length {t.size}) and pressure_bar (length {p.size}) "
                         "cannot be broadcast together") from None
    if ideal:
        return np.ones((t.size, N_SPECIES))
    return np.exp(_log_phi_table(np.ascontiguousarray(t), np.ascontiguousarray(p)))
