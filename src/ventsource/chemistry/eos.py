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

All laws live in this one module on purpose: numba's on-disk cache of a
function is keyed on its own source file only, so a compiled caller in one
file would keep stale copies of kernels edited in another file.
"""
import math

import numpy as np
from numba import njit

from ventsource.chemistry.species import N_SPECIES, SPECIES

# --- CORK, Holland & Powell (1991) Contrib. Mineral. Petrol. 109:265-273 ---
# Units inside follow HP91: P in kbar, V in kJ/kbar, R in kJ/(mol K).
# Coefficients and the table/equation numbers cited below are from memory;
# the coefficients are verified numerically against CoolProp in tests/test_eos.py.
R_KJ = 8.314e-3  # kJ/(mol K), value used by HP91

# HP91 Table 1, H2O (supercritical branch, T > 673 K): a = a0 + a1 dT + a2 dT^2 + a3 dT^3,
# dT = T - 673 K; virial c = c0 + c1 T, d = d0 + d1 T, applied above P0 = 2 kbar.
H2O_A = (1113.4, -0.22291, -3.8022e-4, 1.7791e-7)
H2O_B = 1.465
H2O_C = (-3.025650e-2, -5.343144e-6)
H2O_D = (-3.2297554e-3, 2.2215221e-6)
H2O_P0_KBAR = 2.0
H2O_TREF_K = 673.0

# HP91 Table 1, CO2: a = a0 + a1 T + a2 T^2; virial above P0 = 5 kbar.
CO2_A = (741.2, -0.10891, -3.4203e-4)
CO2_B = 3.057
CO2_C = (-2.26924e-1, 7.73793e-5)
CO2_D = (1.33790e-2, -1.01740e-5)
CO2_P0_KBAR = 5.0

# HP91 Table 2, corresponding-states constants (Tc in K, Pc in kbar).
CS_A0, CS_A1 = 5.45963e-5, -8.63920e-6
CS_B0 = 9.18301e-4
CS_C0, CS_C1 = -3.30558e-5, 2.30524e-6
CS_D0, CS_D1 = 6.93054e-7, -8.38293e-8


@njit(cache=True)
def largest_cubic_root(c2, c1, c0):
    """Largest real root of x^3 + c2 x^2 + c1 x + c0 = 0.

    Closed form (Cardano / trigonometric), then two Newton steps to polish.
    """
    q = (c2 * c2 - 3.0 * c1) / 9.0
    r = (2.0 * c2 * c2 * c2 - 9.0 * c2 * c1 + 27.0 * c0) / 54.0
    q3 = q * q * q
    if r * r < q3:
        # three real roots: take the largest of the trigonometric set
        theta = math.acos(max(-1.0, min(1.0, r / math.sqrt(q3))))
        x = -2.0 * math.sqrt(q) * math.cos(theta / 3.0) - c2 / 3.0
        for k in (1.0, -1.0):
            y = -2.0 * math.sqrt(q) * math.cos((theta + 2.0 * k * math.pi) / 3.0) - c2 / 3.0
            if y > x:
                x = y
    else:
        s = -math.copysign(1.0, r) * math.exp(math.log(abs(r) + math.sqrt(r * r - q3)) / 3.0)
        t = q / s if s != 0.0 else 0.0
        x = s + t - c2 / 3.0
    for _ in range(2):
        f = ((x + c2) * x + c1) * x + c0
        df = (3.0 * x + 2.0 * c2) * x + c1
        if df != 0.0:
            x -= f / df
    return x


@njit(cache=True)
def ln_phi_mrk(a, b, temperature_k, pressure_kbar):
    """ln(phi) of the MRK gas P = RT/(V-b) - a/(sqrt(T) V (V+b)) (HP91 eqs 4, 8).

    The largest volume root is the gas (or supercritical fluid) branch.
    """
    rt = R_KJ * temperature_k
    sq = math.sqrt(temperature_k)
    p = pressure_kbar
    # cubic in V: V^3 - (RT/P) V^2 - (b RT/P + b^2 - a/(P sqrtT)) V - a b/(P sqrtT) = 0
    c2 = -rt / p
    c1 = -(b * rt / p + b * b - a / (p * sq))
    c0 = -a * b / (p * sq)
    v = largest_cubic_root(c2, c1, c0)
    if not v > b:  # only reached if roundoff defeats the root; stay physical
        v = rt / p + b
    z = p * v / rt
    big_a = a / (b * rt * sq)
    big_b = b * p / rt
    return z - 1.0 - math.log(z - big_b) - big_a * math.log(1.0 + big_b / z)


@njit(cache=True)
def ln_phi_virial(c, d, temperature_k, pressure_kbar, p0_kbar):
    """CORK virial-type term above P0: RT ln(phi) += 2/3 c (P-P0)^1.5 + d/2 (P-P0)^2 (HP91 eq 9)."""
    if pressure_kbar <= p0_kbar:
        return 0.0
    dp = pressure_kbar - p0_kbar
    return (2.0 / 3.0 * c * dp * math.sqrt(dp) + 0.5 * d * dp * dp) / (R_KJ * temperature_k)


@njit(cache=True)
def ln_phi_h2o(temperature_k, pressure_bar):
    """ln(phi) of pure H2O, HP91 CORK (supercritical a(T); also used, as a smooth
    extrapolation of the gas branch, below 673 K)."""
    p = pressure_bar * 1e-3
    dt = temperature_k - H2O_TREF_K
    a = H2O_A[0] + dt * (H2O_A[1] + dt * (H2O_A[2] + dt * H2O_A[3]))
    out = ln_phi_mrk(a, H2O_B, temperature_k, p)
    c = H2O_C[0] + H2O_C[1] * temperature_k
    d = H2O_D[0] + H2O_D[1] * temperature_k
    return out + ln_phi_virial(c, d, temperature_k, p, H2O_P0_KBAR)


@njit(cache=True)
def ln_phi_co2(temperature_k, pressure_bar):
    """ln(phi) of pure CO2, HP91 CORK."""
    p = pressure_bar * 1e-3
    t = temperature_k
    a = CO2_A[0] + CO2_A[1] * t + CO2_A[2] * t * t
    out = ln_phi_mrk(a, CO2_B, t, p)
    c = CO2_C[0] + CO2_C[1] * t
    d = CO2_D[0] + CO2_D[1] * t
    return out + ln_phi_virial(c, d, t, p, CO2_P0_KBAR)


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
    """ln(phi) of a pure gas, Peng & Robinson (1976), vapour/supercritical root
    (standard PR a, b, kappa(omega) and ln(phi) expressions, from memory)."""
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


def _corresponding_states_table():
    """Per-species constants of the corresponding-states CORK (HP91 eqs 9-10,
    Table 2), computed once: a = a0 + a1 T, b, c = c0 + c1 T, d = d0 + d1 T,
    with P and Pc in kbar. The kernel then uses the closed form
    RT ln f = RT ln P + bP + a/(b sqrt T) [ln(RT+bP) - ln(RT+2bP)] + 2/3 c P^1.5 + d/2 P^2."""
    table = np.zeros((N_SPECIES, 7))
    for i in range(N_SPECIES):
        tc = _TC[i]
        pc = _PC[i] * 1e-3
        table[i] = (CS_A0 * tc ** 2.5 / pc, CS_A1 * tc ** 1.5 / pc, CS_B0 * tc / pc,
                    CS_C0 * tc / pc ** 1.5, CS_C1 / pc ** 1.5, CS_D0 * tc / (pc * pc),
                    CS_D1 / (pc * pc))
    return table


_CS_TABLE = _corresponding_states_table()


@njit(cache=True)
def log_fugacity_coefficients_kernel(temperature_k, pressure_bar, out):
    """Fill out[0:10] with ln(phi_i) of the pure species at (T, P), SPECIES order.

    Scalar kernel for compiled solvers; no input checking (callers check).
    """
    t = temperature_k
    p = pressure_bar * 1e-3
    rt = R_KJ * t
    sqrt_t = math.sqrt(t)
    p15 = p * math.sqrt(p)
    for i in range(N_SPECIES):
        if i == _H2O:
            out[i] = ln_phi_h2o(temperature_k, pressure_bar)
        elif i == _CO2:
            out[i] = ln_phi_co2(temperature_k, pressure_bar)
        elif i == _H2:
            out[i] = ln_phi_peng_robinson(temperature_k, pressure_bar, _TC[i], _PC[i], H2_ACENTRIC)
        else:
            k = _CS_TABLE[i]
            a = k[0] + k[1] * t
            b = k[2]
            c = k[3] + k[4] * t
            d = k[5] + k[6] * t
            bp = b * p
            out[i] = (bp + a / (b * sqrt_t) * math.log((rt + bp) / (rt + 2.0 * bp))
                      + 2.0 / 3.0 * c * p15 + 0.5 * d * p * p) / rt


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
