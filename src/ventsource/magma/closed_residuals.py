"""Residuals and analytic Jacobian of the closed-system melt-gas equations.

Unknowns z = (ln fH2O, ln fCO2, ln fS2, g) of one context; equations
sum(x_i) = 1 and the H, C and S balances in log form (see closed_solve).
"""
import math

from ventsource.chemistry.species import MOLAR_MASS_G_MOL
from ventsource.magma.degassing_context import (
    _C_DS, _C_LNRMAX, _C_MONO, _C_NC, _C_NH, _C_NS, _C_P, _C_PHIC, _C_PHIH, _C_SK, _C_T,
    _CO2_MOL_PER_PPM,
    _H2O_MOL_PER_WT_PERCENT, _caps_at_water, _kernel,
)
from ventsource.magma.solubility_co2 import co2_ppm
from ventsource.magma.solubility_h2o import h2o_wt_percent

# Balance residuals are ln(q) with q = (g n_gas + (1-g) n_melt) / n_bulk, so a
# trace element is as well conditioned as a major one; below Q_LINEAR the log
# is continued linearly (C1) so that q <= 0 stays defined for the line search.
Q_LINEAR = 1e-8
_LN_Q_LINEAR = math.log(Q_LINEAR)
# Relative step for the derivatives of the solubility laws (forward difference).
LAW_STEP = 1e-7

_M0, _M1, _M2, _M3, _M4, _M5, _M6, _M7, _M8, _M9 = (float(m) for m in MOLAR_MASS_G_MOL)


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
    if sk > 0.0:
        # A sulfide liquid or anhydrite may take the S the melt and gas cannot hold:
        # either no phase (q = 1) below the cap on fS2, or a phase (q < 1) with fS2
        # buffered at the cap. max(ln q, u2 - u2_cap) = 0 says both at once
        # (complementarity; Newton follows the active branch). The SCSS cap moves with
        # the melt's H2O (n_w = mh / 2 mol per gram), so its branch depends on u0, u1.
        d_cap = _caps_at_water(ctx, 0.5 * mh)
        cap = z[2] - 2.0 * ctx[_C_LNRMAX]
        if cap > res:
            r[3] = cap
            jac[12] = -d_cap * h2o_0 * _H2O_MOL_PER_WT_PERCENT
            jac[13] = -d_cap * h2o_1 * _H2O_MOL_PER_WT_PERCENT
            jac[14] = 1.0
            jac[15] = 0.0
    s = 0.0
    for k in range(4):
        s += r[k] * r[k]
    if not math.isfinite(s):
        return math.inf
    for k in range(16):
        if not math.isfinite(jac[k]):
            return math.inf
    return s
