"""Start of the closed-system iteration: a one-dimensional H2O-CO2 solution
(lever rule in the H-C plane, root in logit of the gas C fraction) with the
S carriers added from the S balance.
"""
import math

from ventsource.chemistry.species import MOLAR_MASS_G_MOL
from ventsource.magma.degassing_context import (
    _C_DS, _C_LNRMAX, _C_MONO, _C_NC, _C_NH, _C_NS, _C_OFF, _C_P, _C_PHIC, _C_PHIH, _C_SK, _C_T,
    _CO2_MOL_PER_PPM, _H2O_MOL_PER_WT_PERCENT, D_S_START, M_CO2, M_H2O, _kernel,
)
from ventsource.magma.solubility_co2 import co2_ppm
from ventsource.magma.solubility_h2o import h2o_wt_percent

MOLAR_MASS_C = MOLAR_MASS_G_MOL.copy()
M_SO2 = 64.058
GUESS_PASSES = 6
ZS_MAX = 0.6   # cap of the S-carrier fraction in the start
GUESS_ROUNDS = 1
T_TOL = 0.3  # logit tolerance of the start; the 4-D Newton iteration finishes the job
M_H2S = 34.076
G_START_MIN = 1e-4  # smallest gas fraction a start (and the Newton iteration) begins from


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
    z[2] = min(2.0 * math.log(max(r_s, 1e-300)), 2.0 * ctx[_C_LNRMAX])  # a sulfur phase caps fS2
    z[3] = g
    return g_hc
