"""Melt-gas equilibrium: closed- and open-system degassing of a magma at pressure P.

Closed system: the magma's bulk H2O, CO2 and S are shared between melt and
a gas in equilibrium with it at T, P and the melt-buffered fO2. Unknowns
are u = (ln fH2O, ln fCO2, ln fS2) of the gas and the gas mass fraction g;
the equations are sum(x_i) = 1 and the mass balances of H, C and S

    n_E(bulk) = g n_E(gas, per g) + (1 - g) n_E(melt, per g),   E = H, C, S

with melt H2O and CO2 from a solubility law and melt S from a fluid/melt
partition coefficient D_S. Oxygen is exchanged with the melt (buffered), so
it is not balanced. Each balance is solved in log form, ln(q_E) = 0 with
q_E = (g n_E,gas + (1 - g) n_E,melt) / n_E,bulk, so an element present only in
traces (CO2 late on an open-system path) is as well conditioned as a major
one. The root is found by a damped Newton iteration with an analytic
Jacobian, on (u, asinh(g / G_SCALE)), started from a one-dimensional H2O-CO2
solution with the S carriers added from the S balance; g is left free in
sign, so a state with g <= 0 is a magma that is undersaturated at P and
releases no gas.

Open system: from the saturation pressure down to P in geometric steps,
the gas made in each step is removed and the next step starts from the
melt; the gas made in the last step is the gas measured at P. An element the
melt has lost keeps VANISHING_MOL_PER_G so its balance stays defined.

A magma still gas-saturated at P_SAT_CAP_BAR (gas at every pressure of the
search range, e.g. D_S * S near or above the S mass fraction a gas can hold)
has no saturation pressure to start from. Its open path starts at the cap
instead: the gas in closed-system equilibrium with the magma at the cap is the
first batch removed, then the path steps down from the cap to P as usual (at
P >= P_SAT_CAP_BAR the gas is the closed-system gas at P). Deeper than the cap
the gas is thus taken as kept with its magma. Such states have status 0, a
saturation pressure of inf ("above the cap") and closed_above_cap True in
DegassingResult, so a caller can tell them apart or leave them out.
"""
import math

import numpy as np
from numba import njit

from ventsource.chemistry.eos import log_fugacity_coefficients_kernel
from ventsource.chemistry.species import C_ATOMS, H_ATOMS, MOLAR_MASS_G_MOL, S_ATOMS
from ventsource.chemistry.speciation import UNKNOWN_EXPONENTS, log_fugacity_offsets
from ventsource.magma.solubility_co2 import co2_ppm
from ventsource.magma.solubility_h2o import h2o_wt_percent
from ventsource.chemistry.thermochemistry import LN10, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k_kernel
from ventsource.chemistry.buffers import FMQ_COEFFICIENTS

# Every kernel except _degas_batch runs without numba's reference-counted memory
# (NRT; `_nrt` is numba's own flag for it): none allocates, and with the NRT each
# array argument or view costs a pair of atomic reference-count updates per call
# (about 150 per state, a third of the forward model's run time under perf).
# _degas_batch allocates and owns every array and keeps the NRT; a new kernel
# that must allocate (np.empty) takes plain njit. The callees from other modules
# (EOS, ln K, solubility laws) are compiled into these kernels, so they must not
# allocate either. No fastmath anywhere: results stay bitwise reproducible.
_kernel = njit(cache=True, error_model='numpy', _nrt=False)

STATUS_GAS = 0
STATUS_NO_GAS = 1
STATUS_FAILED = 2

M_H2O = 18.015
M_CO2 = 44.009
M_S = 32.06
P_SAT_CAP_BAR = 20000.0

# Context vector layout (one per state), filled by _fill_context.
_C_OFF = 0        # 10 ln x offsets
_C_P = 10
_C_T = 11
_C_LNPHI = 12     # 10 ln phi
_C_NH = 22
_C_NC = 23
_C_NS = 24
_C_DS = 25
_C_DFMQ = 26
_C_MONO = 27      # 10 exp(offsets): x_i = c_i a^p b^q r^s (see speciation)
_C_PHIH = 37      # fugacity coefficient of H2O
_C_PHIC = 38      # fugacity coefficient of CO2
_C_LNFO2 = 39     # ln fO2 (bar)
_C_CSA = 40       # sulfide capacity: ln C_S = A + B/T (NaN: partition coefficient instead)
_C_CSB = 41
_C_SK = 42        # melt S (mol/g) = SK * fS2^0.5 in sulfide-capacity mode, 0 otherwise
CTX_SIZE = 43
# Jugo et al. (2010) sulfate fraction is capped so the total stays finite.
MAX_SULFATE_FRACTION = 0.999
D_S_START = 100.0  # effective gas/melt S partition used only for the start in capacity mode

# Bulk amounts below this (mol per gram of magma) are raised to it on the
# open-system path: an element stripped from the melt keeps a vanishing but
# non-zero amount, so its balance (and gas ratios) stay defined.
VANISHING_MOL_PER_G = 1e-200

# Balance residuals are ln(q) with q = (g n_gas + (1-g) n_melt) / n_bulk, so a
# trace element is as well conditioned as a major one; below Q_LINEAR the log
# is continued linearly (C1) so that q <= 0 stays defined for the line search.
Q_LINEAR = 1e-8
_LN_Q_LINEAR = math.log(Q_LINEAR)
# Relative step for the derivatives of the solubility laws (forward difference).
LAW_STEP = 1e-7

# mg vector: (nH_g, nC_g, nS_g, nH_m, nC_m, nS_m, sum_x) and the elasticities
# d ln(law)/d ln x of the H2O law in x_H2O, x_CO2 and of the CO2 law in x_H2O, x_CO2.
MG_SIZE = 11

# Work array layout for solve_closed (no allocation per state).
_W_R = 0                      # 4 residuals
_W_RT = 4                     # 4 trial residuals
_W_JAC = 8                    # 16 Jacobian
_W_JACT = 24                  # 16 trial Jacobian
_W_STEP = 40                  # 4
_W_TRIAL = 44                 # 4
_W_XT = 48                    # 10 trial mole fractions
_W_MGT = 58                   # MG_SIZE trial gas/melt amounts
_W_M = _W_MGT + MG_SIZE       # 24: elimination matrix (4 x 5) and right side
_W_Z = _W_M + 24              # 4 spare z (saturation pressure)
_W_X = _W_Z + 4               # 10 spare x (saturation pressure)
_W_MG = _W_X + 10             # MG_SIZE spare mg (saturation pressure)
_W_CTX = _W_MG + MG_SIZE      # CTX_SIZE copy of a context (saturation pressure)
_W_ITER = _W_CTX + CTX_SIZE   # Newton iterations of the last solve (diagnostics)
WORK_SIZE = _W_ITER + 1


@_kernel
def _fill_context(ctx, temperature_k, pressure_bar, dfmq, n_h, n_c, n_s, d_s, ideal, ln_k, ln_phi,
                  same_temperature=False):
    """same_temperature: ln_k already holds the values at temperature_k (a new
    pressure on a path at fixed T), so the temperature-only work is skipped."""
    a, b, c = FMQ_COEFFICIENTS
    ln_fo2 = (a / temperature_k + b + c * (pressure_bar - 1.0) / temperature_k + dfmq) * LN10
    if not same_temperature:
        ln_k_kernel(temperature_k, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k)
    if ideal:
        for i in range(10):
            ln_phi[i] = 0.0
    else:
        log_fugacity_coefficients_kernel(temperature_k, pressure_bar, ln_phi)
    log_fugacity_offsets(ln_k, ln_fo2, ctx[_C_OFF:_C_OFF + 10])
    lnp = math.log(pressure_bar)
    for i in range(10):
        ctx[_C_OFF + i] -= ln_phi[i] + lnp
        ctx[_C_LNPHI + i] = ln_phi[i]
        ctx[_C_MONO + i] = math.exp(ctx[_C_OFF + i])
    ctx[_C_PHIH] = math.exp(ln_phi[0])
    ctx[_C_PHIC] = math.exp(ln_phi[3])
    ctx[_C_P] = pressure_bar
    ctx[_C_T] = temperature_k
    ctx[_C_NH] = n_h
    ctx[_C_NC] = n_c
    ctx[_C_NS] = n_s
    ctx[_C_DS] = d_s
    ctx[_C_DFMQ] = dfmq
    ctx[_C_LNFO2] = ln_fo2
    _update_sulfide_factor(ctx)


@_kernel
def _update_sulfide_factor(ctx):
    """Sulfide-capacity sulfur: S2- (wt%) = C_S (fS2/fO2)^0.5 (O'Neill and
    Mavrogenes 2002, J. Petrol. 43:1049, definition of C_S) with ln C_S = A + B/T
    from the prior file; total S = S2- / (1 - S6+/ST) with the sulfate fraction
    S6+/ST = 1/(1 + 10^(2.1 - 2 dFMQ)) of Jugo et al. (2010), Geochim. Cosmochim.
    Acta 74:5926. NaN A means the partition coefficient is used instead."""
    a = ctx[_C_CSA]
    if not math.isfinite(a):
        ctx[_C_SK] = 0.0
        return
    t = ctx[_C_T]
    sulfate = 1.0 / (1.0 + 10.0 ** (2.1 - 2.0 * ctx[_C_DFMQ]))
    sulfate = min(sulfate, MAX_SULFATE_FRACTION)
    c_s = math.exp(a + ctx[_C_CSB] / t)
    ctx[_C_SK] = c_s * 0.01 / M_S * math.exp(-0.5 * ctx[_C_LNFO2]) / (1.0 - sulfate)


UNKNOWN_EXPONENTS_C = UNKNOWN_EXPONENTS.copy()
MOLAR_MASS_C = MOLAR_MASS_G_MOL.copy()
H_C = H_ATOMS.copy()
C_C = C_ATOMS.copy()
S_C = S_ATOMS.copy()
_M0, _M1, _M2, _M3, _M4, _M5, _M6, _M7, _M8, _M9 = (float(m) for m in MOLAR_MASS_G_MOL)
_H2O_MOL_PER_WT_PERCENT = 2.0 / 100.0 / M_H2O   # mol H per g melt per wt% H2O
_CO2_MOL_PER_PPM = 1e-6 / M_CO2                 # mol C per g melt per ppm CO2


@_kernel
def _log_balance(q):
    """(residual, d residual / d q) of one element balance, see Q_LINEAR."""
    if q >= Q_LINEAR:
        return math.log(q), 1.0 / q
    return _LN_Q_LINEAR + (q - Q_LINEAR) / Q_LINEAR, 1.0 / Q_LINEAR


@_kernel
def _evaluate(z, ctx, h_law, h_par, c_law, c_par, x, mg, r, jac, refresh):
    """Residuals r (4) and analytic Jacobian jac (4 x 4, row-major) at z; returns the merit.

    x: gas mole fractions; mg (MG_SIZE) = (nH_g, nC_g, nS_g, nH_m, nC_m, nS_m, sum_x,
    law elasticities), gas amounts per gram of gas, melt amounts per gram of melt.
    The gas part is differentiated exactly; the solubility laws through their
    elasticities, by a forward difference when refresh is set.
    """
    p = ctx[_C_P]
    t = ctx[_C_T]
    a = math.exp(z[0])
    b = math.exp(z[1])
    rr = math.exp(0.5 * z[2])
    x0 = ctx[_C_MONO + 0] * a
    x1 = ctx[_C_MONO + 1] * a
    x2 = ctx[_C_MONO + 2]
    x3 = ctx[_C_MONO + 3] * b
    x4 = ctx[_C_MONO + 4] * b
    x5 = ctx[_C_MONO + 5] * a * a * b
    x6 = ctx[_C_MONO + 6] * rr
    x7 = ctx[_C_MONO + 7] * a * rr
    x8 = ctx[_C_MONO + 8] * rr * rr
    x9 = ctx[_C_MONO + 9] * b * rr
    x[0] = x0
    x[1] = x1
    x[2] = x2
    x[3] = x3
    x[4] = x4
    x[5] = x5
    x[6] = x6
    x[7] = x7
    x[8] = x8
    x[9] = x9
    # sums over species and their derivatives in u (exponents of UNKNOWN_EXPONENTS)
    total = x0 + x1 + x2 + x3 + x4 + x5 + x6 + x7 + x8 + x9
    dt0 = x0 + x1 + 2.0 * x5 + x7
    dt1 = x3 + x4 + x5 + x9
    dt2 = 0.5 * (x6 + x7 + x9) + x8
    m0 = _M0 * x0
    m1 = _M1 * x1
    m3 = _M3 * x3
    m4 = _M4 * x4
    m5 = _M5 * x5
    m6 = _M6 * x6
    m7 = _M7 * x7
    m8 = _M8 * x8
    m9 = _M9 * x9
    mbar = m0 + m1 + _M2 * x2 + m3 + m4 + m5 + m6 + m7 + m8 + m9
    dm0 = m0 + m1 + 2.0 * m5 + m7
    dm1 = m3 + m4 + m5 + m9
    dm2 = 0.5 * (m6 + m7 + m9) + m8
    nh = 2.0 * (x0 + x1 + x7) + 4.0 * x5
    dh0 = 2.0 * (x0 + x1 + x7) + 8.0 * x5
    dh1 = 4.0 * x5
    dh2 = x7
    nc = x3 + x4 + x5 + x9
    dc0 = 2.0 * x5
    dc1 = nc
    dc2 = 0.5 * x9
    ns = x6 + x7 + 2.0 * x8 + x9
    ds0 = x7
    ds1 = x9
    ds2 = 0.5 * (x6 + x7 + x9) + 2.0 * x8
    if not (total > 0.0 and total < 1e300 and mbar < 1e300):
        return math.inf
    inv_m = 1.0 / mbar
    # per gram of gas (composition normalised so the balance uses a physical gas)
    gh = nh * inv_m
    gc = nc * inv_m
    gs = ns * inv_m
    mg[0] = gh
    mg[1] = gc
    mg[2] = gs
    mg[6] = total
    # d(n_E / mbar)/du_k = (dN_E,k - n_E,g dM_k) / mbar
    gh0 = (dh0 - gh * dm0) * inv_m
    gh1 = (dh1 - gh * dm1) * inv_m
    gh2 = (dh2 - gh * dm2) * inv_m
    gc0 = (dc0 - gc * dm0) * inv_m
    gc1 = (dc1 - gc * dm1) * inv_m
    gc2 = (dc2 - gc * dm2) * inv_m
    gs0 = (ds0 - gs * dm0) * inv_m
    gs1 = (ds1 - gs * dm1) * inv_m
    gs2 = (ds2 - gs * dm2) * inv_m
    # melt: H2O and CO2 laws depend on x_H2O (u0 only) and x_CO2 (u1 only)
    phi_h = ctx[_C_PHIH]
    phi_c = ctx[_C_PHIC]
    p_h2o = x[0] * p
    p_co2 = x[3] * p
    f_h2o = p_h2o * phi_h
    f_co2 = p_co2 * phi_c
    h2o_m = h2o_wt_percent(h_law, h_par, p_h2o, p_co2, f_h2o, f_co2, p, t)
    co2_m = co2_ppm(c_law, c_par, p_h2o, p_co2, f_h2o, f_co2, p, t)
    if refresh:
        # elasticities d ln(law) / d ln x_k by a forward difference (p and f move
        # together); between refreshes they are reused, which keeps the Jacobian
        # exact for power laws and nearly so otherwise (Newton only needs it close)
        e = 1.0 + LAW_STEP
        h2o_a = h2o_wt_percent(h_law, h_par, p_h2o * e, p_co2, f_h2o * e, f_co2, p, t)
        h2o_b = h2o_wt_percent(h_law, h_par, p_h2o, p_co2 * e, f_h2o, f_co2 * e, p, t)
        co2_a = co2_ppm(c_law, c_par, p_h2o * e, p_co2, f_h2o * e, f_co2, p, t)
        co2_b = co2_ppm(c_law, c_par, p_h2o, p_co2 * e, f_h2o, f_co2 * e, p, t)
        if h2o_m != 0.0:
            mg[7] = (h2o_a / h2o_m - 1.0) / LAW_STEP
            mg[8] = (h2o_b / h2o_m - 1.0) / LAW_STEP
        else:
            mg[7] = 0.0
            mg[8] = 0.0
        if co2_m != 0.0:
            mg[9] = (co2_a / co2_m - 1.0) / LAW_STEP
            mg[10] = (co2_b / co2_m - 1.0) / LAW_STEP
        else:
            mg[9] = 0.0
            mg[10] = 0.0
    h2o_0 = mg[7] * h2o_m
    h2o_1 = mg[8] * h2o_m
    co2_0 = mg[9] * co2_m
    co2_1 = mg[10] * co2_m
    mh = h2o_m * _H2O_MOL_PER_WT_PERCENT
    mc = co2_m * _CO2_MOL_PER_PPM
    d_s = ctx[_C_DS]
    sk = ctx[_C_SK]
    if sk > 0.0:
        inv_d = 0.0
        ms = sk * rr
    else:
        inv_d = 1.0 / d_s if d_s > 0 else 0.0
        ms = gs * inv_d
    mg[3] = mh
    mg[4] = mc
    mg[5] = ms
    g = z[3]
    g1 = 1.0 - g
    r[0] = math.log(total)
    inv_t = 1.0 / total
    jac[0] = dt0 * inv_t
    jac[1] = dt1 * inv_t
    jac[2] = dt2 * inv_t
    jac[3] = 0.0
    # H
    inv_b = 1.0 / ctx[_C_NH]
    res, dq = _log_balance((g * gh + g1 * mh) * inv_b)
    dq *= inv_b
    r[1] = res
    jac[4] = dq * (g * gh0 + g1 * h2o_0 * _H2O_MOL_PER_WT_PERCENT)
    jac[5] = dq * (g * gh1 + g1 * h2o_1 * _H2O_MOL_PER_WT_PERCENT)
    jac[6] = dq * g * gh2
    jac[7] = dq * (gh - mh)
    # C
    inv_b = 1.0 / ctx[_C_NC]
    res, dq = _log_balance((g * gc + g1 * mc) * inv_b)
    dq *= inv_b
    r[2] = res
    jac[8] = dq * (g * gc0 + g1 * co2_0 * _CO2_MOL_PER_PPM)
    jac[9] = dq * (g * gc1 + g1 * co2_1 * _CO2_MOL_PER_PPM)
    jac[10] = dq * g * gc2
    jac[11] = dq * (gc - mc)
    # S (melt S = gas S / D_S)
    inv_b = 1.0 / ctx[_C_NS]
    res, dq = _log_balance((g * gs + g1 * ms) * inv_b)
    dq *= inv_b
    w = g + g1 * inv_d
    r[3] = res
    jac[12] = dq * w * gs0
    jac[13] = dq * w * gs1
    jac[14] = dq * (w * gs2 + (g1 * 0.5 * ms if sk > 0.0 else 0.0))
    jac[15] = dq * (gs - ms)
    s = 0.0
    for k in range(4):
        s += r[k] * r[k]
    if not math.isfinite(s):
        return math.inf
    for k in range(16):
        if not math.isfinite(jac[k]):
            return math.inf
    return s


M_SO2 = 64.058
GUESS_PASSES = 6
ZS_MAX = 0.6   # cap of the S-carrier fraction in the start
GUESS_ROUNDS = 1
T_TOL = 0.3  # logit tolerance of the start; the 4-D Newton iteration finishes the job
M_H2S = 34.076


@_kernel
def _guess_sign(tt, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc, h_law, h_par, c_law,
                c_par):
    """Lever-rule test of the H-C start at logit(y) = tt with a fraction zs of S
    carriers (molar mass ms) in the gas; returns (d, g, y, 1 - y)."""
    if tt > 0.0:
        e = math.exp(-tt)
        y = 1.0 / (1.0 + e)
        y1 = e / (1.0 + e)
    else:
        e = math.exp(tt)
        y = e / (1.0 + e)
        y1 = 1.0 / (1.0 + e)
    hc = 1.0 - zs
    # H carriers H2O + H2 and C carriers CO2 + CO in the fO2-set ratios
    ph = hc * y1 / (1.0 + rh) * p
    pc = hc * y / (1.0 + rc) * p
    h2o_m = h2o_wt_percent(h_law, h_par, ph, pc, ph * phi_h, pc * phi_c, p, t)
    co2_m = co2_ppm(c_law, c_par, ph, pc, ph * phi_h, pc * phi_c, p, t)
    nh_m = h2o_m * _H2O_MOL_PER_WT_PERCENT
    nc_m = co2_m * _CO2_MOL_PER_PPM
    mbar = hc * (y1 * mh + y * mc) + zs * ms
    nh_g = 2.0 * hc * y1 / mbar
    nc_g = hc * y / mbar
    # cross product of bulk-minus-melt and gas-minus-melt in the (H, C) plane (zero
    # when bulk, melt and gas are collinear: the lever rule), each element scaled by
    # its bulk and the whole by the 1-norms: bounded, so false position works well
    ah = (n_h - nh_m) / n_h
    ac = (n_c - nc_m) / n_c
    bh = (nh_g - nh_m) / n_h
    bc = (nc_g - nc_m) / n_c
    d = (ah * bc - ac * bh) / ((abs(ah) + abs(ac)) * (abs(bh) + abs(bc)) + 1e-300)
    if abs(nc_g - nc_m) * n_h > abs(nh_g - nh_m) * n_c:
        g = (n_c - nc_m) / (nc_g - nc_m)
    else:
        g = (n_h - nh_m) / (nh_g - nh_m)
    return d, g, y, y1


@_kernel
def _root_logit(lo, hi, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc, h_law, h_par,
                c_law, c_par):
    """Root in logit(y) of the lever-rule test: bracket from [lo, hi] (widened
    geometrically within [-650, 40] if needed), then Illinois false position with
    bisection when it stalls. Returns (tt, g, y, 1 - y)."""
    t_default = 0.5 * (lo + hi)
    f_lo, g, y, y1 = _guess_sign(lo, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                 h_law, h_par, c_law, c_par)
    f_hi, g, y, y1 = _guess_sign(hi, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                 h_law, h_par, c_law, c_par)
    # widen geometrically until the test changes sign (or the range ends)
    width = 8.0
    while f_lo > 0.0 and lo > -650.0:
        hi = lo
        f_hi = f_lo
        lo = max(lo - width, -650.0)
        width *= 2.0
        f_lo, g, y, y1 = _guess_sign(lo, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                     h_law, h_par, c_law, c_par)
    while f_hi < 0.0 and hi < 40.0:
        lo = hi
        f_lo = f_hi
        hi = min(hi + width, 40.0)
        width *= 2.0
        f_hi, g, y, y1 = _guess_sign(hi, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                     h_law, h_par, c_law, c_par)
    if not (f_lo <= 0.0 and f_hi >= 0.0):
        # no sign change (H and C alone dissolve at every gas composition): start
        # from the bulk C fraction plus the usual offset
        tt = t_default
        f, g, y, y1 = _guess_sign(tt, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                  h_law, h_par, c_law, c_par)
        return tt, g, y, y1
    tt = lo
    side = 0
    width = hi - lo
    for it in range(100):
        if f_lo == 0.0:
            tt = lo
            break
        if f_hi == 0.0:
            tt = hi
            break
        t_new = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        if not (t_new >= lo and t_new <= hi):
            t_new = 0.5 * (lo + hi)
        done = abs(t_new - tt) < T_TOL or hi - lo < T_TOL
        if it % 3 == 2 and hi - lo > 0.5 * width:
            t_new = 0.5 * (lo + hi)  # false position is stalling: bisect
            done = False
        if it % 3 == 2:
            width = hi - lo
        tt = t_new
        f, g, y, y1 = _guess_sign(tt, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                  h_law, h_par, c_law, c_par)
        if done or f == 0.0:
            return tt, g, y, y1
        if f < 0.0:
            lo = tt
            f_lo = f
            if side == -1:
                f_hi *= 0.5
            side = -1
        else:
            hi = tt
            f_hi = f
            if side == 1:
                f_lo *= 0.5
            side = 1
    f, g, y, y1 = _guess_sign(tt, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                              h_law, h_par, c_law, c_par)
    return tt, g, y, y1


@_kernel
def _s_fraction(g, n_s, d_s, ms, m_hc):
    """Mole fraction of S carriers (molar mass ms) in a gas whose H-C part has mean
    molar mass m_hc, from the S balance zs/mbar * (g + (1-g)/D_S) = n_S."""
    g_pos = max(g, G_START_MIN)
    w = g_pos + (1.0 - g_pos) / d_s if d_s > 0 else g_pos
    den = w - n_s * (ms - m_hc)
    zs = n_s * m_hc / den if den > 0.0 else ZS_MAX
    return min(max(zs, 1e-300), ZS_MAX)


@_kernel
def _initial_guess(ctx, h_law, h_par, c_law, c_par, z, s_first):
    """Start for the 4-D iteration: H and C carriers (H2O + H2, CO2 + CO in fO2-set
    ratios) from a 1-D root in logit of the gas C fraction, the S carriers (SO2 + H2S)
    from the S balance (S atoms in SO2 + H2S + S2); the S fraction dilutes H2O and
    CO2, so where S is what makes the gas the two are alternated a few times.

    s_first: start from the S fraction of a small gas (g = 1e-3) and keep the full
    bracket, for magmas where S is what makes the gas (a retry of solve_closed).
    Returns g of the H-C system alone: S only adds gas, so g_hc > 0 means gas.
    """
    p = ctx[_C_P]
    t = ctx[_C_T]
    phi_h = ctx[_C_PHIH]
    phi_c = ctx[_C_PHIC]
    n_h = ctx[_C_NH]
    n_c = ctx[_C_NC]
    n_s = ctx[_C_NS]
    d_s = ctx[_C_DS] if ctx[_C_SK] == 0.0 else D_S_START
    rh = ctx[_C_MONO + 1] / ctx[_C_MONO + 0]     # x_H2 / x_H2O at this fO2
    rc = ctx[_C_MONO + 4] / ctx[_C_MONO + 3]     # x_CO / x_CO2
    mh = (M_H2O + rh * MOLAR_MASS_C[1]) / (1.0 + rh)
    mc = (M_CO2 + rc * MOLAR_MASS_C[4]) / (1.0 + rc)
    ms = 0.5 * (M_SO2 + M_H2S)
    zs = _s_fraction(1e-3, n_s, d_s, ms, mh) if s_first else 0.0
    # With all volatiles in the gas, logit(y) = ln(2 n_C / n_H); CO2 is the less
    # soluble, so the root lies above that (by 0 to ~8 over the shipped priors).
    lo = math.log(2.0 * n_c / n_h) - 0.5
    hi = lo + 9.0
    tt = 0.0
    g = 0.0
    y = 0.5
    y1 = 0.5
    frac_so2 = 0.5
    u0 = 0.0
    g_hc = 0.0
    for _pass in range(GUESS_PASSES):
        tt, g, y, y1 = _root_logit(lo, hi, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                   h_law, h_par, c_law, c_par)
        if _pass == 0:
            g_hc = g
            good = (tt, g, y, y1, zs)
        elif tt > -650.0 and tt < 40.0 and g > 0.0:
            good = (tt, g, y, y1, zs)
        else:
            # the S-diluted problem lost its root: keep the last good start
            tt, g, y, y1, zs = good
            break
        x_h2o = (1.0 - zs) * y1 / (1.0 + rh)
        u0 = math.log(max(x_h2o, 1e-300)) - ctx[_C_OFF + 0]
        ln_r = ctx[_C_OFF + 6] - ctx[_C_OFF + 7] - u0
        frac_so2 = 1.0 / (1.0 + math.exp(-ln_r)) if ln_r > -700 else 0.0
        ms = frac_so2 * M_SO2 + (1.0 - frac_so2) * M_H2S
        zs_new = _s_fraction(g, n_s, d_s, ms, y1 * mh + y * mc)
        if (_pass == 0 and g >= G_START_MIN) or abs(zs_new - zs) <= 1e-2 * zs_new:
            # usual case: H and C alone already make a gas; the S dilution is
            # handled below and by the 4-D iteration
            zs = zs_new
            break
        # H and C alone (nearly) dissolve: S is what makes the gas, iterate on the
        # S fraction (damped, the g <-> zs coupling is strong here)
        zs = zs_new if _pass == 0 else 0.5 * (zs + zs_new)
        if not s_first:
            lo = tt - 1.0
            hi = tt + 1.0
    # g for the S-diluted gas at the same C fraction (one more test, no root)
    for _round in range(GUESS_ROUNDS):
        _, g, y, y1 = _guess_sign(tt, zs, ms, p, t, phi_h, phi_c, n_h, n_c, rh, rc, mh, mc,
                                  h_law, h_par, c_law, c_par)
        zs = _s_fraction(g, n_s, d_s, ms, y1 * mh + y * mc)
    x_h2o = y1 * (1.0 - zs) / (1.0 + rh)
    x_co2 = y * (1.0 - zs) / (1.0 + rc)
    z[0] = math.log(max(x_h2o, 1e-300)) - ctx[_C_OFF + 0]
    z[1] = math.log(max(x_co2, 1e-300)) - ctx[_C_OFF + 3]
    # S atoms in SO2 + H2S + S2 = zs: with r = e^(u2/2), c6 r + c7 a r + 2 c8 r^2 = zs,
    # a quadratic in r (stable root form)
    lin = ctx[_C_MONO + 6] + ctx[_C_MONO + 7] * math.exp(z[0])
    quad = 2.0 * ctx[_C_MONO + 8]
    r_s = 2.0 * zs / (lin + math.sqrt(lin * lin + 4.0 * quad * zs))
    z[2] = 2.0 * math.log(max(r_s, 1e-300))
    z[3] = g
    return g_hc


@_kernel
def _solve_newton(jac, r, out, m):
    """Newton step out = -J^-1 r for the 4 x 4 Jacobian (row-major) of _evaluate.

    Row 0 (sum of x) does not depend on g: eliminate g with the balance row whose g
    entry is largest, solve the remaining 3 x 3 system in u by Cramer's rule, and
    back-substitute g. Falls back to pivoted elimination if that pivot is tiny.
    """
    p = 1
    if abs(jac[11]) > abs(jac[4 * p + 3]):
        p = 2
    if abs(jac[15]) > abs(jac[4 * p + 3]):
        p = 3
    piv = jac[4 * p + 3]
    big = 0.0
    for k in range(16):
        big = max(big, abs(jac[k]))
    if not abs(piv) > 1e-12 * big:
        for i in range(4):
            m[16 + i] = -r[i]
        return _solve4(jac, m[16:20], out, m)
    q1 = 1 if p != 1 else 2
    q2 = 3 if p != 3 else 2
    f1 = jac[4 * q1 + 3] / piv
    f2 = jac[4 * q2 + 3] / piv
    # 3 x 3 system: row 0, and rows q1, q2 minus f * row p (g eliminated)
    a00 = jac[0]
    a01 = jac[1]
    a02 = jac[2]
    b0 = -r[0]
    a10 = jac[4 * q1] - f1 * jac[4 * p]
    a11 = jac[4 * q1 + 1] - f1 * jac[4 * p + 1]
    a12 = jac[4 * q1 + 2] - f1 * jac[4 * p + 2]
    b1 = -r[q1] + f1 * r[p]
    a20 = jac[4 * q2] - f2 * jac[4 * p]
    a21 = jac[4 * q2 + 1] - f2 * jac[4 * p + 1]
    a22 = jac[4 * q2 + 2] - f2 * jac[4 * p + 2]
    b2 = -r[q2] + f2 * r[p]
    c00 = a11 * a22 - a12 * a21
    c01 = a10 * a22 - a12 * a20
    c02 = a10 * a21 - a11 * a20
    det = a00 * c00 - a01 * c01 + a02 * c02
    if not (abs(det) > 0.0 and math.isfinite(det)):
        for i in range(4):
            m[16 + i] = -r[i]
        return _solve4(jac, m[16:20], out, m)
    inv = 1.0 / det
    out[0] = (b0 * c00 - a01 * (b1 * a22 - a12 * b2) + a02 * (b1 * a21 - a11 * b2)) * inv
    out[1] = (a00 * (b1 * a22 - a12 * b2) - b0 * c01 + a02 * (a10 * b2 - b1 * a20)) * inv
    out[2] = (a00 * (a11 * b2 - b1 * a21) - a01 * (a10 * b2 - b1 * a20) + b0 * c02) * inv
    out[3] = (-r[p] - jac[4 * p] * out[0] - jac[4 * p + 1] * out[1]
              - jac[4 * p + 2] * out[2]) / piv
    return True


@_kernel
def _solve4(a, b, out, m):
    """Gaussian elimination with partial pivoting for a 4x4 system (a row-major, 16);
    m: 20-element work array. False if singular."""
    for i in range(4):
        for j in range(4):
            m[i * 5 + j] = a[i * 4 + j]
        m[i * 5 + 4] = b[i]
    for col in range(4):
        piv = col
        for i in range(col + 1, 4):
            if abs(m[i * 5 + col]) > abs(m[piv * 5 + col]):
                piv = i
        if abs(m[piv * 5 + col]) < 1e-300 or not math.isfinite(m[piv * 5 + col]):
            return False
        if piv != col:
            for j in range(5):
                tmp = m[col * 5 + j]
                m[col * 5 + j] = m[piv * 5 + j]
                m[piv * 5 + j] = tmp
        for i in range(col + 1, 4):
            f = m[i * 5 + col] / m[col * 5 + col]
            for j in range(col, 5):
                m[i * 5 + j] -= f * m[col * 5 + j]
    for i in range(3, -1, -1):
        s = m[i * 5 + 4]
        for j in range(i + 1, 4):
            s -= m[i * 5 + j] * out[j]
        out[i] = s / m[i * 5 + i]
    return True


MAX_NEWTON = 100
G_SCALE = 1e-5
G_START_MIN = 1e-4
MERIT_TOL = 1e-20       # sum of squared residuals: balances to ~1e-11 relative
REFRESH_MERIT = 1e-6    # law elasticities are refreshed until the merit is below this


@_kernel
def solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, use_guess, work):
    """Closed-system equilibrium for one context; z = (u0, u1, u2, g) in/out. Returns status.

    work: float64 array of WORK_SIZE (no allocation per state).
    """
    if use_guess:
        g_start = _initial_guess(ctx, h_law, h_par, c_law, c_par, z, False)
    else:
        g_start = z[3]
    st = _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work)
    if st == STATUS_FAILED and use_guess and g_start < 0.0:
        # H and C alone dissolve: before calling it "no gas", try once from a start
        # where S makes a small gas
        _initial_guess(ctx, h_law, h_par, c_law, c_par, z, True)
        st = _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work)
    if st == STATUS_FAILED and g_start < 0.0:
        # Above saturation the 4-D iteration can stall at g < 0 (with D_S the S
        # balance has no root there); the H-C system alone, g_start < 0, already
        # shows the magma holds its H2O and CO2, and S alone did not make a gas.
        z[3] = g_start
        return STATUS_NO_GAS
    return st


@_kernel
def _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work):
    """Damped Newton iteration from z; STATUS_GAS, STATUS_NO_GAS (root with g <= 0)
    or STATUS_FAILED."""
    # S (and the S dilution of H2O and CO2) only add gas, so the true g is above the
    # H-C estimate; a start on the positive side keeps the iteration off the g < 0
    # region where the S balance may have no root.
    z[3] = max(z[3], G_START_MIN)
    r = work[_W_R:_W_R + 4]
    rt = work[_W_RT:_W_RT + 4]
    jac = work[_W_JAC:_W_JAC + 16]
    jact = work[_W_JACT:_W_JACT + 16]
    step = work[_W_STEP:_W_STEP + 4]
    trial = work[_W_TRIAL:_W_TRIAL + 4]
    xt = work[_W_XT:_W_XT + 10]
    mgt = work[_W_MGT:_W_MGT + MG_SIZE]
    m = work[_W_M:_W_M + 20]
    # The iteration runs on v = asinh(g / G_SCALE): log-like for |g| >> G_SCALE, so a
    # trace element whose balance is ~ ln(g) + u stays near-linear, and g < 0 remains
    # reachable (undersaturated magma).
    v = math.asinh(z[3] / G_SCALE)
    merit = _evaluate(z, ctx, h_law, h_par, c_law, c_par, x, mg, r, jac, True)
    dg = math.sqrt(G_SCALE * G_SCALE + z[3] * z[3])  # dg/dv = G_SCALE cosh(v)
    for i in range(4):
        jac[4 * i + 3] *= dg
    converged = False
    if math.isfinite(merit):
        for it in range(MAX_NEWTON):
            work[_W_ITER] = it
            if merit < MERIT_TOL:
                converged = True
                break
            if not _solve_newton(jac, r, step, m):
                break
            biggest = max(abs(step[0]), abs(step[1]), abs(step[2]), abs(step[3]))
            scale = 1.0 if biggest < 5.0 else 5.0 / biggest
            accepted = False
            m_t = merit
            v_t = v
            for _ls in range(30):
                for j in range(3):
                    trial[j] = z[j] + scale * step[j]
                v_t = v + scale * step[3]
                trial[3] = G_SCALE * math.sinh(v_t)
                for j in range(7, MG_SIZE):
                    mgt[j] = mg[j]
                m_t = _evaluate(trial, ctx, h_law, h_par, c_law, c_par, xt, mgt, rt, jact,
                                merit > REFRESH_MERIT)
                if m_t < merit * (1.0 - 1e-4 * scale) or m_t < MERIT_TOL:
                    accepted = True
                    break
                scale *= 0.5
            if not accepted:
                break
            v = v_t
            dg = math.sqrt(G_SCALE * G_SCALE + trial[3] * trial[3])
            for j in range(4):
                z[j] = trial[j]
                r[j] = rt[j]
            for j in range(16):
                jac[j] = jact[j]
            for i in range(4):
                jac[4 * i + 3] *= dg
            for j in range(10):
                x[j] = xt[j]
            for j in range(MG_SIZE):
                mg[j] = mgt[j]
            merit = m_t
    if not converged and merit < 1e-20:
        converged = True
    if not converged:
        return STATUS_FAILED
    # normalise away the last 1e-12 of the sum
    s = 0.0
    for j in range(10):
        s += x[j]
    for j in range(10):
        x[j] /= s
    if z[3] <= 0.0:
        return STATUS_NO_GAS
    return STATUS_GAS


@_kernel
def _set_pressure(ctx, pressure_bar, ln_k, ln_phi, ideal):
    """Same state at a new pressure; ln_k must hold the values at ctx's temperature."""
    _fill_context(ctx, ctx[_C_T], pressure_bar, ctx[_C_DFMQ], ctx[_C_NH], ctx[_C_NC], ctx[_C_NS],
                  ctx[_C_DS], ideal, ln_k, ln_phi, True)


@_kernel
def saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi, work):
    """Pressure (bar) at which the gas fraction reaches zero; inf above P_SAT_CAP_BAR."""
    z = work[_W_Z:_W_Z + 4]
    x = work[_W_X:_W_X + 10]
    mg = work[_W_MG:_W_MG + MG_SIZE]
    c2 = work[_W_CTX:_W_CTX + CTX_SIZE]
    for i in range(CTX_SIZE):
        c2[i] = ctx[i]
    lo = 1.0
    hi = P_SAT_CAP_BAR
    _set_pressure(c2, hi, ln_k, ln_phi, ideal)
    st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work)
    if st == STATUS_GAS:
        return math.inf
    _set_pressure(c2, lo, ln_k, ln_phi, ideal)
    st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work)
    if st != STATUS_GAS:
        return math.nan
    for _ in range(50):
        mid = math.sqrt(lo * hi)
        _set_pressure(c2, mid, ln_k, ln_phi, ideal)
        st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work)
        if st == STATUS_GAS:
            lo = mid
        elif st == STATUS_NO_GAS:
            hi = mid
        else:
            return math.nan
        if hi / lo < 1.0 + 1e-6:
            break
    return math.sqrt(lo * hi)


@njit(cache=True, error_model='numpy')
def _degas_batch(temperature_k, pressure_bar, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s, open_system,
                 n_open_steps, want_psat, ideal, h_law, h_par, c_law, c_par, ln_cs_a, ln_cs_b_k,
                 x_out, g_out, melt_out, psat_out, status_out, cap_out):
    ctx = np.empty(CTX_SIZE)
    ln_k = np.empty(6)
    ln_phi = np.empty(10)
    z = np.empty(4)
    mg = np.empty(MG_SIZE)
    work = np.empty(WORK_SIZE)
    ctx[_C_CSA] = ln_cs_a
    ctx[_C_CSB] = ln_cs_b_k
    for j in range(temperature_k.shape[0]):
        n_h = 2.0 * h2o_wt[j] / 100.0 / M_H2O
        n_c = co2_ppm_bulk[j] * 1e-6 / M_CO2
        n_s = s_ppm[j] * 1e-6 / M_S
        _fill_context(ctx, temperature_k[j], pressure_bar[j], dfmq[j], n_h, n_c, n_s, d_s[j],
                      ideal, ln_k, ln_phi)
        psat = math.nan
        if want_psat or open_system:
            # works on a copy: ctx still describes the state at P afterwards
            psat = saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi, work)
        psat_out[j] = psat
        cap_out[j] = False
        if open_system and math.isfinite(psat) and psat > pressure_bar[j]:
            st = _open_path(ctx, psat, pressure_bar[j], n_open_steps, h_law, h_par, c_law, c_par,
                            ideal, ln_k, ln_phi, z, x_out[j], mg, work, False)
        elif open_system and math.isinf(psat):
            # gas-saturated at the cap: the path starts there from the closed-system gas
            cap_out[j] = True
            if pressure_bar[j] < P_SAT_CAP_BAR:
                st = _open_path(ctx, P_SAT_CAP_BAR, pressure_bar[j], n_open_steps, h_law, h_par,
                                c_law, c_par, ideal, ln_k, ln_phi, z, x_out[j], mg, work, True)
            else:
                st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x_out[j], mg, True, work)
        elif open_system and math.isnan(psat):
            st = STATUS_FAILED  # the saturation search itself failed: no start for the path
        else:
            st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x_out[j], mg, True, work)
        status_out[j] = st
        g_out[j] = z[3] if st == STATUS_GAS else 0.0
        # melt contents: H2O wt%, CO2 ppm, S ppm
        melt_out[j, 0] = mg[3] * M_H2O * 100.0 / 2.0
        melt_out[j, 1] = mg[4] * M_CO2 * 1e6
        melt_out[j, 2] = mg[5] * M_S * 1e6
        if st != STATUS_GAS:
            for i in range(10):
                x_out[j, i] = math.nan
            if st == STATUS_NO_GAS:
                melt_out[j, 0] = h2o_wt[j]
                melt_out[j, 1] = co2_ppm_bulk[j]
                melt_out[j, 2] = s_ppm[j]


@_kernel
def _open_path(ctx, psat, pressure_bar, n_steps, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi,
               z, x, mg, work, remove_at_start):
    """Step from just below psat to P, removing the gas each step.

    remove_at_start: the magma is gas-saturated at psat (the search cap); its
    closed-system gas there is removed first, the path then starts from that melt.
    """
    st = STATUS_FAILED
    if remove_at_start:
        _set_pressure(ctx, psat, ln_k, ln_phi, ideal)
        st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work)
        if st == STATUS_FAILED:
            return st
        if st == STATUS_GAS:
            ctx[_C_NH] = max(mg[3], VANISHING_MOL_PER_G)
            ctx[_C_NC] = max(mg[4], VANISHING_MOL_PER_G)
            ctx[_C_NS] = max(mg[5], VANISHING_MOL_PER_G)
    ratio = (pressure_bar / psat) ** (1.0 / n_steps)
    for k in range(n_steps):
        p = psat * ratio ** (k + 1) if k < n_steps - 1 else pressure_bar
        _set_pressure(ctx, p, ln_k, ln_phi, ideal)
        st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work)
        if st == STATUS_FAILED:
            return st
        if st == STATUS_GAS and k < n_steps - 1:
            # remove the gas: the next step starts from this melt
            ctx[_C_NH] = max(mg[3], VANISHING_MOL_PER_G)
            ctx[_C_NC] = max(mg[4], VANISHING_MOL_PER_G)
            ctx[_C_NS] = max(mg[5], VANISHING_MOL_PER_G)
    return st


class DegassingResult:
    """Arrays over states: gas mole fractions (n, 10) in SPECIES order (NaN where
    no gas), gas mass fraction, melt H2O (wt%), CO2 (ppm), S (ppm), saturation
    pressure (bar; NaN if not computed, inf if above P_SAT_CAP_BAR) and status codes.

    closed_above_cap (bool): open style only, True where the magma is still
    gas-saturated at P_SAT_CAP_BAR and its open path starts at the cap from the
    closed-system gas there (see the module doc); always False in the closed style.
    """

    def __init__(self, gas, gas_wt_fraction, melt, saturation_pressure_bar, status,
                 closed_above_cap):
        self.gas = gas
        self.gas_wt_fraction = gas_wt_fraction
        self.melt_h2o_wt = melt[:, 0]
        self.melt_co2_ppm = melt[:, 1]
        self.melt_s_ppm = melt[:, 2]
        self.saturation_pressure_bar = saturation_pressure_bar
        self.status = status
        self.closed_above_cap = closed_above_cap


def degas(temperature_c, pressure_bar, dfmq, h2o_wt, co2_ppm, s_ppm, s_partition, h2o_law, co2_law,
          style="closed", eos="real", saturation=True, open_steps=20, sulfide_capacity=None):
    """Melt-gas equilibrium for arrays of states.

    h2o_law, co2_law: (law_id, params) from solubility_registry. s_partition:
    fluid/melt S partition coefficient D_S (mass fraction in gas / in melt).
    sulfide_capacity: None, or (A, B) with ln C_S = A + B/T(K): melt S from the
    sulfide capacity and the Jugo et al. (2010) sulfate fraction instead of D_S
    (s_partition is then ignored).
    style: "closed" or "open". saturation: also compute the saturation pressure
    (always computed in the open style, where it starts the path; a magma still
    gas-saturated at P_SAT_CAP_BAR starts it at the cap, see closed_above_cap).
    """
    if style not in ("closed", "open"):
        raise ValueError(f"unknown degassing style '{style}': use 'closed' or 'open'")
    if eos not in ("real", "ideal"):
        raise ValueError(f"unknown eos '{eos}': use 'real' or 'ideal'")
    inputs = [np.atleast_1d(np.asarray(a, dtype=float)) for a in
              (temperature_c, pressure_bar, dfmq, h2o_wt, co2_ppm, s_ppm, s_partition)]
    n0 = inputs[0].size
    if not all(a.ndim == 1 and a.size == n0 for a in inputs):  # the sampler's case skips this
        inputs = np.broadcast_arrays(*inputs)
    t_c, p, d, h2o, co2, s, ds = (np.ascontiguousarray(a).ravel() for a in inputs)
    n = t_c.size
    gas = np.empty((n, 10))
    g = np.empty(n)
    melt = np.empty((n, 3))
    psat = np.empty(n)
    status = np.empty(n, dtype=np.int64)
    cap = np.empty(n, dtype=np.bool_)
    _degas_batch(t_c + 273.15, p, d, h2o, co2, s, ds, style == "open", int(open_steps),
                 bool(saturation), eos == "ideal", int(h2o_law[0]),
                 np.ascontiguousarray(h2o_law[1], dtype=float), int(co2_law[0]),
                 np.ascontiguousarray(co2_law[1], dtype=float),
                 float(sulfide_capacity[0]) if sulfide_capacity is not None else math.nan,
                 float(sulfide_capacity[1]) if sulfide_capacity is not None else 0.0,
                 gas, g, melt, psat, status, cap)
    return DegassingResult(gas, g, melt, psat, status, cap)
