"""Compensated Redlich-Kwong (CORK) fugacity coefficients of pure gases.

Holland, T. and Powell, R. (1991) A Compensated-Redlich-Kwong (CORK)
equation for volumes and fugacities of CO2 and H2O in the range 1 bar to
50 kbar and 100-1600 C. Contrib. Mineral. Petrol. 109, 265-273.

* H2O and CO2: modified Redlich-Kwong (MRK) volume with species-specific
  a(T), b, plus the virial-type correction above P0 (HP91 eqs 4-9, Table 1).
* Other gases: the corresponding-states CORK of the same paper (HP91 eqs
  9-10 with the universal constants of their Table 2), which needs only the
  critical temperature and pressure.

Units inside follow HP91: P in kbar, V in kJ/kbar, R in kJ/(mol K).
All functions are numba-compiled scalar kernels returning ln(phi).
"""
import math

from numba import njit

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
    r = (2.0 * c2 ** 3 - 9.0 * c2 * c1 + 27.0 * c0) / 54.0
    if r * r < q ** 3:
        # three real roots: take the largest of the trigonometric set
        theta = math.acos(max(-1.0, min(1.0, r / math.sqrt(q ** 3))))
        x = -2.0 * math.sqrt(q) * math.cos(theta / 3.0) - c2 / 3.0
        for k in (1.0, -1.0):
            y = -2.0 * math.sqrt(q) * math.cos((theta + 2.0 * k * math.pi) / 3.0) - c2 / 3.0
            if y > x:
                x = y
    else:
        s = -math.copysign(1.0, r) * (abs(r) + math.sqrt(r * r - q ** 3)) ** (1.0 / 3.0)
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
    return (2.0 / 3.0 * c * dp ** 1.5 + 0.5 * d * dp * dp) / (R_KJ * temperature_k)


@njit(cache=True)
def ln_phi_h2o(temperature_k, pressure_bar):
    """ln(phi) of pure H2O, HP91 CORK (supercritical a(T); also used, as a smooth
    extrapolation of the gas branch, below 673 K)."""
    p = pressure_bar * 1e-3
    dt = temperature_k - H2O_TREF_K
    a = H2O_A[0] + H2O_A[1] * dt + H2O_A[2] * dt * dt + H2O_A[3] * dt ** 3
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


@njit(cache=True)
def ln_phi_corresponding_states(temperature_k, pressure_bar, tc_k, pc_bar):
    """ln(phi) from the corresponding-states CORK (HP91 eqs 9-10, Table 2).

    RT ln f = RT ln P + bP + a/(b sqrt T) [ln(RT+bP) - ln(RT+2bP)] + 2/3 c P^1.5 + d/2 P^2,
    explicit in P, so no root finding is needed.
    """
    t = temperature_k
    p = pressure_bar * 1e-3
    pc = pc_bar * 1e-3
    a = CS_A0 * tc_k ** 2.5 / pc + CS_A1 * tc_k ** 1.5 / pc * t
    b = CS_B0 * tc_k / pc
    c = CS_C0 * tc_k / pc ** 1.5 + CS_C1 / pc ** 1.5 * t
    d = CS_D0 * tc_k / (pc * pc) + CS_D1 / (pc * pc) * t
    rt = R_KJ * t
    g = (b * p + a / (b * math.sqrt(t)) * (math.log(rt + b * p) - math.log(rt + 2.0 * b * p))
         + 2.0 / 3.0 * c * p ** 1.5 + 0.5 * d * p * p)
    return g / rt
