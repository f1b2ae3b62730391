"""Melt-gas equilibrium: closed- and open-system degassing of a magma at pressure P.

Closed system: the magma's bulk H2O, CO2 and S are shared between melt and
a gas in equilibrium with it at T, P and the melt-buffered fO2. Unknowns
are u = (ln fH2O, ln fCO2, ln fS2) of the gas and the gas mass fraction g;
the equations are sum(x_i) = 1 and the mass balances of H, C and S

    n_E(bulk) = g n_E(gas, per g) + (1 - g) n_E(melt, per g),   E = H, C, S

with melt H2O and CO2 from a solubility law and melt S from a fluid/melt
partition coefficient D_S. Oxygen is exchanged with the melt (buffered), so
it is not balanced. The root is found by a damped Newton iteration started
from a one-dimensional H2O-CO2 solution; g is left free in sign, so a state
with g <= 0 is a magma that is undersaturated at P and releases no gas.

Open system: from the saturation pressure down to P in geometric steps,
the gas made in each step is removed and the next step starts from the
melt; the gas made in the last step is the gas measured at P.
"""
import math

import numpy as np
from numba import njit

from .eos import log_fugacity_coefficients_kernel
from .species import C_ATOMS, H_ATOMS, MOLAR_MASS_G_MOL, S_ATOMS
from .speciation import UNKNOWN_EXPONENTS, log_fugacity_offsets
from .solubility_co2 import co2_ppm
from .solubility_h2o import h2o_wt_percent
from .thermochemistry import LN10, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k_kernel
from .buffers import FMQ_COEFFICIENTS

STATUS_GAS = 0
STATUS_NO_GAS = 1
STATUS_FAILED = 2

M_H2O = 18.015
M_CO2 = 44.009
M_S = 32.06
P_SAT_CAP_BAR = 20000.0

# Context vector layout (one per state), filled by _context.
_C_OFF = 0        # 10 ln x offsets
_C_P = 10
_C_T = 11
_C_LNPHI = 12     # 10 ln phi
_C_NH = 22
_C_NC = 23
_C_NS = 24
_C_DS = 25
_C_DFMQ = 26
CTX_SIZE = 27


@njit(cache=True)
def _fill_context(ctx, temperature_k, pressure_bar, dfmq, n_h, n_c, n_s, d_s, ideal, ln_k, ln_phi):
    a, b, c = FMQ_COEFFICIENTS
    ln_fo2 = (a / temperature_k + b + c * (pressure_bar - 1.0) / temperature_k + dfmq) * LN10
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
    ctx[_C_P] = pressure_bar
    ctx[_C_T] = temperature_k
    ctx[_C_NH] = n_h
    ctx[_C_NC] = n_c
    ctx[_C_NS] = n_s
    ctx[_C_DS] = d_s
    ctx[_C_DFMQ] = dfmq


@njit(cache=True)
def _melt_and_gas(z, ctx, h_law, h_par, c_law, c_par, x, out):
    """Gas mole fractions x for u = z[:3]; out = (nH_g, nC_g, nS_g, nH_m, nC_m, nS_m, sum_x)."""
    p = ctx[_C_P]
    t = ctx[_C_T]
    total = 0.0
    mbar = 0.0
    nh = 0.0
    nc = 0.0
    ns = 0.0
    for i in range(10):
        lx = (ctx[_C_OFF + i] + UNKNOWN_EXPONENTS_C[i, 0] * z[0] + UNKNOWN_EXPONENTS_C[i, 1] * z[1]
              + UNKNOWN_EXPONENTS_C[i, 2] * z[2])
        if lx > 700.0:
            lx = 700.0
        xi = math.exp(lx)
        x[i] = xi
        total += xi
        mbar += xi * MOLAR_MASS_C[i]
        nh += xi * H_C[i]
        nc += xi * C_C[i]
        ns += xi * S_C[i]
    # per gram of gas (composition normalised so the balance uses a physical gas)
    out[0] = nh / mbar
    out[1] = nc / mbar
    out[2] = ns / mbar
    p_h2o = x[0] * p
    p_co2 = x[3] * p
    f_h2o = p_h2o * math.exp(ctx[_C_LNPHI + 0])
    f_co2 = p_co2 * math.exp(ctx[_C_LNPHI + 3])
    h2o_m = h2o_wt_percent(h_law, h_par, p_h2o, p_co2, f_h2o, f_co2, p, t)
    co2_m = co2_ppm(c_law, c_par, p_h2o, p_co2, f_h2o, f_co2, p, t)
    s_gas_mass_fraction = out[2] * M_S
    d_s = ctx[_C_DS]
    s_m = 1e6 * s_gas_mass_fraction / d_s if d_s > 0 else 0.0
    out[3] = 2.0 * h2o_m / 100.0 / M_H2O
    out[4] = co2_m * 1e-6 / M_CO2
    out[5] = s_m * 1e-6 / M_S
    out[6] = total


UNKNOWN_EXPONENTS_C = UNKNOWN_EXPONENTS.copy()
MOLAR_MASS_C = MOLAR_MASS_G_MOL.copy()
H_C = H_ATOMS.copy()
C_C = C_ATOMS.copy()
S_C = S_ATOMS.copy()


@njit(cache=True)
def _residual(z, ctx, h_law, h_par, c_law, c_par, x, mg, r):
    _melt_and_gas(z, ctx, h_law, h_par, c_law, c_par, x, mg)
    g = z[3]
    r[0] = math.log(mg[6]) if mg[6] > 0 else -1e3
    for k in range(3):
        nb = ctx[_C_NH + k]
        r[1 + k] = (g * mg[k] + (1.0 - g) * mg[3 + k] - nb) / nb
    s = 0.0
    for k in range(4):
        if not math.isfinite(r[k]):
            return 1e300
        s += r[k] * r[k]
    return s


@njit(cache=True)
def _initial_guess(ctx, h_law, h_par, c_law, c_par, z):
    """1-D H2O-CO2 solution (S ignored) by bisection on the CO2 fraction y of the gas."""
    p = ctx[_C_P]
    t = ctx[_C_T]
    phi_h = math.exp(ctx[_C_LNPHI + 0])
    phi_c = math.exp(ctx[_C_LNPHI + 3])
    n_h = ctx[_C_NH]
    n_c = ctx[_C_NC]
    lo = 1e-12
    hi = 1.0 - 1e-12
    g = 0.0
    y = 0.5
    for _ in range(80):
        y = 0.5 * (lo + hi)
        ph = (1.0 - y) * p
        pc = y * p
        h2o_m = h2o_wt_percent(h_law, h_par, ph, pc, ph * phi_h, pc * phi_c, p, t)
        co2_m = co2_ppm(c_law, c_par, ph, pc, ph * phi_h, pc * phi_c, p, t)
        nh_m = 2.0 * h2o_m / 100.0 / M_H2O
        nc_m = co2_m * 1e-6 / M_CO2
        mbar = (1.0 - y) * M_H2O + y * M_CO2
        nh_g = 2.0 * (1.0 - y) / mbar
        nc_g = y / mbar
        d = (n_h - nh_m) * (nc_g - nc_m) - (n_c - nc_m) * (nh_g - nh_m)
        if abs(nc_g - nc_m) > abs(nh_g - nh_m):
            g = (n_c - nc_m) / (nc_g - nc_m)
        else:
            g = (n_h - nh_m) / (nh_g - nh_m)
        if d < 0.0:
            lo = y
        else:
            hi = y
    # S: mostly in the gas when g is large; sized from the S balance
    mbar = (1.0 - y) * M_H2O + y * M_CO2
    g_pos = max(g, 1e-6)
    d_s = ctx[_C_DS]
    denom = g_pos + (1.0 - g_pos) / d_s if d_s > 0 else g_pos
    zs = ctx[_C_NS] * mbar / denom
    zs = min(max(zs, 1e-12), 0.3)
    # split S between SO2 and H2S by the fO2-set ratio at this fH2O
    x_h2o = (1.0 - y) * (1.0 - zs)
    x_co2 = y * (1.0 - zs)
    z[0] = math.log(max(x_h2o, 1e-300)) - ctx[_C_OFF + 0]
    z[1] = math.log(max(x_co2, 1e-300)) - ctx[_C_OFF + 3]
    ln_r = ctx[_C_OFF + 6] - ctx[_C_OFF + 7] - z[0]
    frac_so2 = 1.0 / (1.0 + math.exp(-ln_r)) if ln_r > -700 else 0.0
    x_so2 = max(frac_so2 * zs, 1e-300)
    z[2] = 2.0 * (math.log(x_so2) - ctx[_C_OFF + 6])
    z[3] = g


@njit(cache=True)
def _solve4(a, b, out):
    """Gaussian elimination with partial pivoting for a 4x4 system; False if singular."""
    m = np.empty((4, 5))
    for i in range(4):
        for j in range(4):
            m[i, j] = a[i, j]
        m[i, 4] = b[i]
    for col in range(4):
        piv = col
        for i in range(col + 1, 4):
            if abs(m[i, col]) > abs(m[piv, col]):
                piv = i
        if abs(m[piv, col]) < 1e-300 or not math.isfinite(m[piv, col]):
            return False
        if piv != col:
            for j in range(5):
                tmp = m[col, j]
                m[col, j] = m[piv, j]
                m[piv, j] = tmp
        for i in range(col + 1, 4):
            f = m[i, col] / m[col, col]
            for j in range(col, 5):
                m[i, j] -= f * m[col, j]
    for i in range(3, -1, -1):
        s = m[i, 4]
        for j in range(i + 1, 4):
            s -= m[i, j] * out[j]
        out[i] = s / m[i, i]
    return True


@njit(cache=True)
def solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, use_guess):
    """Closed-system equilibrium for one context; z = (u0, u1, u2, g) in/out. Returns status."""
    if use_guess:
        _initial_guess(ctx, h_law, h_par, c_law, c_par, z)
    g_start = z[3]
    r = np.empty(4)
    rt = np.empty(4)
    jac = np.empty((4, 4))
    step = np.empty(4)
    trial = np.empty(4)
    zp = np.empty(4)
    rp = np.empty(4)
    xt = np.empty(10)
    mgt = np.empty(7)
    merit = _residual(z, ctx, h_law, h_par, c_law, c_par, x, mg, r)
    converged = False
    for _ in range(100):
        if merit < 1e-24:
            converged = True
            break
        # forward-difference Jacobian
        for k in range(4):
            for j in range(4):
                zp[j] = z[j]
            h = 1e-7 * max(1.0, abs(z[k])) if k < 3 else 1e-7 * max(1e-3, abs(z[k]))
            zp[k] += h
            _residual(zp, ctx, h_law, h_par, c_law, c_par, xt, mgt, rp)
            for i in range(4):
                jac[i, k] = (rp[i] - r[i]) / h
        neg = np.empty(4)
        for i in range(4):
            neg[i] = -r[i]
        if not _solve4(jac, neg, step):
            break
        biggest = max(abs(step[0]), abs(step[1]), abs(step[2]))
        scale = 1.0 if biggest < 5.0 else 5.0 / biggest
        accepted = False
        m_t = merit
        for _ls in range(30):
            for j in range(4):
                trial[j] = z[j] + scale * step[j]
            m_t = _residual(trial, ctx, h_law, h_par, c_law, c_par, xt, mgt, rt)
            if m_t < merit * (1.0 - 1e-4 * scale) or m_t < 1e-24:
                accepted = True
                break
            scale *= 0.5
        if not accepted:
            break
        for j in range(4):
            z[j] = trial[j]
            r[j] = rt[j]
        for j in range(10):
            x[j] = xt[j]
        for j in range(7):
            mg[j] = mgt[j]
        merit = m_t
    if not converged and merit < 1e-20:
        converged = True
    if not converged:
        # Well above saturation the 4-D iteration can stall at g < 0; the H2O-CO2
        # start already shows the magma holds all its volatiles there.
        if g_start < 0.0:
            z[3] = g_start
            return STATUS_NO_GAS
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


@njit(cache=True)
def _set_pressure(ctx, pressure_bar, ln_k, ln_phi, ideal):
    _fill_context(ctx, ctx[_C_T], pressure_bar, ctx[_C_DFMQ], ctx[_C_NH], ctx[_C_NC], ctx[_C_NS],
                  ctx[_C_DS], ideal, ln_k, ln_phi)


@njit(cache=True)
def saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi):
    """Pressure (bar) at which the gas fraction reaches zero; inf above P_SAT_CAP_BAR."""
    z = np.empty(4)
    x = np.empty(10)
    mg = np.empty(7)
    c2 = ctx.copy()
    lo = 1.0
    hi = P_SAT_CAP_BAR
    _set_pressure(c2, hi, ln_k, ln_phi, ideal)
    st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True)
    if st == STATUS_GAS:
        return math.inf
    _set_pressure(c2, lo, ln_k, ln_phi, ideal)
    st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True)
    if st != STATUS_GAS:
        return math.nan
    for _ in range(50):
        mid = math.sqrt(lo * hi)
        _set_pressure(c2, mid, ln_k, ln_phi, ideal)
        st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True)
        if st == STATUS_GAS:
            lo = mid
        elif st == STATUS_NO_GAS:
            hi = mid
        else:
            return math.nan
        if hi / lo < 1.0 + 1e-6:
            break
    return math.sqrt(lo * hi)


@njit(cache=True)
def _degas_batch(temperature_k, pressure_bar, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s, open_system,
                 n_open_steps, want_psat, ideal, h_law, h_par, c_law, c_par,
                 x_out, g_out, melt_out, psat_out, status_out):
    ctx = np.empty(CTX_SIZE)
    ln_k = np.empty(6)
    ln_phi = np.empty(10)
    z = np.empty(4)
    mg = np.empty(7)
    for j in range(temperature_k.shape[0]):
        n_h = 2.0 * h2o_wt[j] / 100.0 / M_H2O
        n_c = co2_ppm_bulk[j] * 1e-6 / M_CO2
        n_s = s_ppm[j] * 1e-6 / M_S
        _fill_context(ctx, temperature_k[j], pressure_bar[j], dfmq[j], n_h, n_c, n_s, d_s[j],
                      ideal, ln_k, ln_phi)
        psat = math.nan
        if want_psat or open_system:
            psat = saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi)
        psat_out[j] = psat
        if open_system and math.isfinite(psat) and psat > pressure_bar[j]:
            st = _open_path(ctx, psat, pressure_bar[j], n_open_steps, h_law, h_par, c_law, c_par,
                            ideal, ln_k, ln_phi, z, x_out[j], mg)
        elif open_system and (math.isinf(psat) or math.isnan(psat)):
            st = STATUS_FAILED  # no defined open-system path without a saturation pressure
        else:
            _fill_context(ctx, temperature_k[j], pressure_bar[j], dfmq[j], n_h, n_c, n_s, d_s[j],
                          ideal, ln_k, ln_phi)
            st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x_out[j], mg, True)
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


@njit(cache=True)
def _open_path(ctx, psat, pressure_bar, n_steps, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi,
               z, x, mg):
    """Step from just below psat to P, removing the gas each step."""
    st = STATUS_FAILED
    ratio = (pressure_bar / psat) ** (1.0 / n_steps)
    p = psat
    first = True
    for k in range(n_steps):
        p = psat * ratio ** (k + 1) if k < n_steps - 1 else pressure_bar
        _set_pressure(ctx, p, ln_k, ln_phi, ideal)
        st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, True)
        first = False
        if st == STATUS_FAILED:
            return st
        if st == STATUS_GAS and k < n_steps - 1:
            # remove the gas: the next step starts from this melt
            ctx[_C_NH] = mg[3]
            ctx[_C_NC] = mg[4]
            ctx[_C_NS] = mg[5]
    return st


class DegassingResult:
    """Arrays over states: gas mole fractions (n, 10) in SPECIES order (NaN where
    no gas), gas mass fraction, melt H2O (wt%), CO2 (ppm), S (ppm), saturation
    pressure (bar; NaN if not computed) and status codes."""

    def __init__(self, gas, gas_wt_fraction, melt, saturation_pressure_bar, status):
        self.gas = gas
        self.gas_wt_fraction = gas_wt_fraction
        self.melt_h2o_wt = melt[:, 0]
        self.melt_co2_ppm = melt[:, 1]
        self.melt_s_ppm = melt[:, 2]
        self.saturation_pressure_bar = saturation_pressure_bar
        self.status = status


def degas(temperature_c, pressure_bar, dfmq, h2o_wt, co2_ppm, s_ppm, s_partition, h2o_law, co2_law,
          style="closed", eos="real", saturation=True, open_steps=20):
    """Melt-gas equilibrium for arrays of states.

    h2o_law, co2_law: (law_id, params) from solubility_registry. s_partition:
    fluid/melt S partition coefficient D_S (mass fraction in gas / in melt).
    style: "closed" or "open". saturation: also compute the saturation pressure.
    """
    if style not in ("closed", "open"):
        raise ValueError(f"unknown degassing style '{style}': use 'closed' or 'open'")
    if eos not in ("real", "ideal"):
        raise ValueError(f"unknown eos '{eos}': use 'real' or 'ideal'")
    arrays = np.broadcast_arrays(*(np.atleast_1d(np.asarray(a, dtype=float)) for a in
                                   (temperature_c, pressure_bar, dfmq, h2o_wt, co2_ppm, s_ppm,
                                    s_partition)))
    t_c, p, d, h2o, co2, s, ds = (np.ascontiguousarray(a).ravel() for a in arrays)
    n = t_c.size
    gas = np.empty((n, 10))
    g = np.empty(n)
    melt = np.empty((n, 3))
    psat = np.empty(n)
    status = np.empty(n, dtype=np.int64)
    _degas_batch(t_c + 273.15, p, d, h2o, co2, s, ds, style == "open", int(open_steps),
                 bool(saturation), eos == "ideal", int(h2o_law[0]),
                 np.ascontiguousarray(h2o_law[1], dtype=float), int(co2_law[0]),
                 np.ascontiguousarray(co2_law[1], dtype=float), gas, g, melt, psat, status)
    return DegassingResult(gas, g, melt, psat, status)
