"""C-O-H-S gas speciation at fixed temperature, pressure and oxygen fugacity.

The melt buffers oxygen, so fO2 is imposed and only the totals of H, C and S
are conserved. With fO2 fixed, every species' fugacity is a monomial in three
unknowns, u = (ln fH2O, ln fCO2, ln fS2), through the independent reactions
of `thermochemistry.REACTIONS`. Three equations close the system:

    ln sum(x_i)                          = 0        (partial pressures add to P)
    ln sum(C_i x_i) - ln sum(H_i x_i)    = ln(C/H)  (element ratios)
    ln sum(S_i x_i) - ln sum(H_i x_i)    = ln(S/H)

Each left side is a log-sum-exp of affine functions of u, which keeps the
damped Newton iteration well behaved over many orders of magnitude. Mixture
fugacities use the Lewis-Randall rule, f_i = x_i phi_i(T, P) P, so the
fugacity coefficients are constants for a state and the solver is the same
for ideal and real gas.
"""
import math

import numpy as np
from numba import njit

from ventsource.chemistry.species import SPECIES, H_ATOMS, C_ATOMS, S_ATOMS, INDEX
from ventsource.chemistry.thermochemistry import LN10, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k_kernel

N_SP = len(SPECIES)
I_H2O, I_H2, I_O2, I_CO2, I_CO, I_CH4, I_SO2, I_H2S, I_S2, I_COS = (
    INDEX[s] for s in SPECIES)

# Exponents of (fH2O, fCO2, fS2) in each species' fugacity.
UNKNOWN_EXPONENTS = np.zeros((N_SP, 3))
UNKNOWN_EXPONENTS[I_H2O] = (1, 0, 0)
UNKNOWN_EXPONENTS[I_H2] = (1, 0, 0)
UNKNOWN_EXPONENTS[I_CO2] = (0, 1, 0)
UNKNOWN_EXPONENTS[I_CO] = (0, 1, 0)
UNKNOWN_EXPONENTS[I_CH4] = (2, 1, 0)
UNKNOWN_EXPONENTS[I_SO2] = (0, 0, 0.5)
UNKNOWN_EXPONENTS[I_H2S] = (1, 0, 0.5)
UNKNOWN_EXPONENTS[I_S2] = (0, 0, 1)
UNKNOWN_EXPONENTS[I_COS] = (0, 1, 0.5)

STATUS_OK = 0
STATUS_NOT_CONVERGED = 1
MAX_ITERATIONS = 200
TOLERANCE = 1e-13


@njit(cache=True, error_model='numpy')
def log_fugacity_offsets(ln_k, ln_fo2, out):
    """ln f_i = out_i + exponents_i . u; ln_k are natural-log K of REACTIONS."""
    k1, k2, k3, k4, k5, k6 = ln_k[0], ln_k[1], ln_k[2], ln_k[3], ln_k[4], ln_k[5]
    out[0] = 0.0                          # H2O
    out[1] = -k1 - 0.5 * ln_fo2           # H2
    out[2] = ln_fo2                       # O2
    out[3] = 0.0                          # CO2
    out[4] = -k2 - 0.5 * ln_fo2           # CO
    out[5] = -k3 - 2.0 * ln_fo2           # CH4
    out[6] = k4 + ln_fo2                  # SO2
    out[7] = -k5 - 0.5 * ln_fo2           # H2S
    out[8] = 0.0                          # S2
    out[9] = k6 - k2 - 0.5 * ln_fo2       # COS


@njit(cache=True, error_model='numpy')
def _weighted_lse(log_x, weights, exps, grad):
    """ln sum(w_i x_i) and its gradient in u; weights >= 0."""
    m = -1e300
    for i in range(log_x.shape[0]):
        if weights[i] > 0.0 and log_x[i] > m:
            m = log_x[i]
    total = 0.0
    g0 = 0.0
    g1 = 0.0
    g2 = 0.0
    for i in range(log_x.shape[0]):
        if weights[i] > 0.0:
            e = weights[i] * np.exp(log_x[i] - m)
            total += e
            g0 += e * exps[i, 0]
            g1 += e * exps[i, 1]
            g2 += e * exps[i, 2]
    grad[0] = g0 / total
    grad[1] = g1 / total
    grad[2] = g2 / total
    return m + np.log(total)


@njit(cache=True, error_model='numpy')
def _residual(u, offsets, exps, ones, h_w, c_w, s_w, ln_c_h, ln_s_h, log_x, jac, res, work):
    n = offsets.shape[0]
    m = -1e300
    for i in range(n):
        log_x[i] = offsets[i] + exps[i, 0] * u[0] + exps[i, 1] * u[1] + exps[i, 2] * u[2]
        if log_x[i] > m:
            m = log_x[i]
    # One exponential per species, shifted by the largest; the weighted sums
    # fall back to their own shift only if they underflow.
    sums = work[4]
    for k in range(4):
        sums[k] = 0.0
        work[k, 0] = 0.0
        work[k, 1] = 0.0
        work[k, 2] = 0.0
    for i in range(n):
        e = np.exp(log_x[i] - m)
        e0 = e * exps[i, 0]
        e1 = e * exps[i, 1]
        e2 = e * exps[i, 2]
        sums[0] += e
        work[0, 0] += e0
        work[0, 1] += e1
        work[0, 2] += e2
        w = h_w[i]
        if w > 0.0:
            sums[1] += w * e
            work[1, 0] += w * e0
            work[1, 1] += w * e1
            work[1, 2] += w * e2
        w = c_w[i]
        if w > 0.0:
            sums[2] += w * e
            work[2, 0] += w * e0
            work[2, 1] += w * e1
            work[2, 2] += w * e2
        w = s_w[i]
        if w > 0.0:
            sums[3] += w * e
            work[3, 0] += w * e0
            work[3, 1] += w * e1
            work[3, 2] += w * e2
    lse = work[5]
    for k in range(4):
        if sums[k] > 1e-250:
            lse[k] = m + np.log(sums[k])
            for j in range(3):
                work[k, j] /= sums[k]
        else:
            weights = ones if k == 0 else (h_w if k == 1 else (c_w if k == 2 else s_w))
            lse[k] = _weighted_lse(log_x, weights, exps, work[k])
    res[0] = lse[0]
    res[1] = lse[2] - lse[1] - ln_c_h
    res[2] = lse[3] - lse[1] - ln_s_h
    for k in range(3):
        jac[0, k] = work[0, k]
        jac[1, k] = work[2, k] - work[1, k]
        jac[2, k] = work[3, k] - work[1, k]
    return res[0] ** 2 + res[1] ** 2 + res[2] ** 2


@njit(cache=True, error_model='numpy')
def solve_3x3(a, b, out):
    """Cramer's rule; returns False if singular."""
    det = (a[0, 0] * (a[1, 1] * a[2, 2] - a[1, 2] * a[2, 1])
           - a[0, 1] * (a[1, 0] * a[2, 2] - a[1, 2] * a[2, 0])
           + a[0, 2] * (a[1, 0] * a[2, 1] - a[1, 1] * a[2, 0]))
    if not np.isfinite(det) or abs(det) < 1e-300:
        return False
    out[0] = (b[0] * (a[1, 1] * a[2, 2] - a[1, 2] * a[2, 1])
              - a[0, 1] * (b[1] * a[2, 2] - a[1, 2] * b[2])
              + a[0, 2] * (b[1] * a[2, 1] - a[1, 1] * b[2])) / det
    out[1] = (a[0, 0] * (b[1] * a[2, 2] - a[1, 2] * b[2])
              - b[0] * (a[1, 0] * a[2, 2] - a[1, 2] * a[2, 0])
              + a[0, 2] * (a[1, 0] * b[2] - b[1] * a[2, 0])) / det
    out[2] = (a[0, 0] * (a[1, 1] * b[2] - b[1] * a[2, 1])
              - a[0, 1] * (a[1, 0] * b[2] - b[1] * a[2, 0])
              + b[0] * (a[1, 0] * a[2, 1] - a[1, 1] * a[2, 0])) / det
    return True


SCRATCH_SIZE = 3 * 10 + 6 * 3 + 2 * 9 + 6 * 4 + 10


@njit(cache=True, error_model='numpy')
def _speciate_state_logspace(ln_k, ln_fo2, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w, x_out, scratch):
    """Log-space solver (fallback of speciate_state); fills x_out; returns (status, iterations).

    ln_phi: ln fugacity coefficients; ln_p: ln total pressure (bar);
    b_h, b_c, b_s: moles of H, C, S in any common unit (only ratios matter).
    scratch: float64 work array of SCRATCH_SIZE (no allocation per state).
    """
    n = ln_phi.shape[0]
    offsets = scratch[0:10]
    ones = scratch[10:20]
    log_x = scratch[20:30]
    u = scratch[30:33]
    res = scratch[33:36]
    step = scratch[36:39]
    trial = scratch[39:42]
    res_t = scratch[42:45]
    neg = scratch[45:48]
    jac = scratch[48:57].reshape((3, 3))
    jac_t = scratch[57:66].reshape((3, 3))
    work = scratch[66:90].reshape((6, 4))
    log_fugacity_offsets(ln_k, ln_fo2, offsets)
    for i in range(n):
        offsets[i] -= ln_phi[i] + ln_p  # ln x = ln f - ln phi - ln P
        ones[i] = 1.0
    ln_c_h = np.log(b_c / b_h)
    ln_s_h = np.log(b_s / b_h)

    # Safe start: H as H2O + H2, C as CO2 + CO, S as SO2 + H2S, ratios set by fO2.
    r_h2 = np.exp(offsets[1] - offsets[0])
    r_co = np.exp(offsets[4] - offsets[3])
    n_h2o = 0.5 * b_h / (1.0 + r_h2)
    n_co2 = b_c / (1.0 + r_co)
    tot = 0.5 * b_h + b_c + b_s
    x_h2o = n_h2o / tot
    x_co2 = n_co2 / tot
    u[0] = np.log(x_h2o) - offsets[0]
    u[1] = np.log(x_co2) - offsets[3]
    # split S between SO2 and H2S: ln(x_SO2/x_H2S) = off6 - off7 - u0 (the S2 terms cancel)
    ln_r = offsets[6] - offsets[7] - u[0]
    if ln_r > 0:
        frac_so2 = 1.0 / (1.0 + np.exp(-ln_r))
    else:
        er = np.exp(ln_r)
        frac_so2 = er / (1.0 + er)
    x_s = max(frac_so2, 1e-300) * b_s / tot
    u[2] = 2.0 * (np.log(x_s) - offsets[6])

    merit = _residual(u, offsets, exps, ones, h_w, c_w, s_w, ln_c_h, ln_s_h, log_x, jac, res, work)
    status = STATUS_NOT_CONVERGED
    it = 0
    for it in range(MAX_ITERATIONS):
        if merit < TOLERANCE * TOLERANCE:
            status = STATUS_OK
            break
        neg[0] = -res[0]
        neg[1] = -res[1]
        neg[2] = -res[2]
        if not solve_3x3(jac, neg, step):
            break
        # limit the step to 10 natural-log units, then backtrack on the merit
        biggest = max(abs(step[0]), abs(step[1]), abs(step[2]))
        scale = 1.0 if biggest < 10.0 else 10.0 / biggest
        accepted = False
        for _ in range(40):
            for k in range(3):
                trial[k] = u[k] + scale * step[k]
            m_t = _residual(trial, offsets, exps, ones, h_w, c_w, s_w, ln_c_h, ln_s_h,
                            log_x, jac_t, res_t, work)
            if m_t < merit * (1.0 - 1e-4 * scale) or m_t < TOLERANCE * TOLERANCE:
                accepted = True
                break
            scale *= 0.5
        if not accepted:
            break
        for k in range(3):
            u[k] = trial[k]
            res[k] = res_t[k]
            for j in range(3):
                jac[k, j] = jac_t[k, j]
        merit = m_t
    else:
        if merit < TOLERANCE * TOLERANCE:
            status = STATUS_OK
    # log_x holds the last point evaluated, which is the accepted one
    for i in range(n):
        x_out[i] = np.exp(log_x[i])
    if status == STATUS_OK:
        # Close the sum exactly; a common factor on every species but O2 keeps the
        # element ratios and fO2 exact and moves the equilibria by < 1e-12.
        s = 0.0
        for i in range(n):
            s += x_out[i]
        f = (1.0 - x_out[2]) / (s - x_out[2])
        for i in range(n):
            if i != 2:
                x_out[i] *= f
    return status, it


@njit(cache=True, error_model='numpy')
def _poly_residual(u0, u1, u2, c, ln_scale_c, ln_scale_s):
    """Residuals and Jacobian of the three equations in monomial form.

    With a = e^u0, b = e^u1, r = e^(u2/2) every mole fraction is a monomial
    x_i = c_i a^p b^q r^s (c_i = e^offset_i, computed once per state), so one
    evaluation costs three exponentials and three logarithms instead of one
    exponential per species. Returns (merit, r0, r1, r2, J00, ..., J22);
    merit is inf where a sum is not a positive finite number.
    """
    a = math.exp(u0)
    b = math.exp(u1)
    r = math.exp(0.5 * u2)
    x0 = c[0] * a
    x1 = c[1] * a
    x3 = c[3] * b
    x4 = c[4] * b
    x5 = c[5] * a * a * b
    x6 = c[6] * r
    x7 = c[7] * a * r
    x8 = c[8] * r * r
    x9 = c[9] * b * r
    # sums and their derivatives in u (exponent-weighted sums)
    h2 = x0 + x1
    c2 = x3 + x4
    total = h2 + c[2] + c2 + x5 + x6 + x7 + x8 + x9
    t0 = h2 + 2.0 * x5 + x7
    t1 = c2 + x5 + x9
    t2 = 0.5 * (x6 + x7 + x9) + x8
    hs = 2.0 * h2 + 4.0 * x5 + 2.0 * x7
    h0 = 2.0 * h2 + 8.0 * x5 + 2.0 * x7
    h1 = 4.0 * x5
    h2d = x7
    cs = t1
    c0 = 2.0 * x5
    c2d = 0.5 * x9
    ss = x6 + x7 + 2.0 * x8 + x9
    s0 = x7
    s1 = x9
    s2 = 0.5 * (x6 + x7 + x9) + 2.0 * x8
    if not (total > 0.0 and hs > 0.0 and cs > 0.0 and ss > 0.0
            and total < 1e300 and hs < 1e300 and cs < 1e300 and ss < 1e300):
        return (math.inf, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0)
    inv_t = 1.0 / total
    inv_h = 1.0 / hs
    inv_c = 1.0 / cs
    inv_s = 1.0 / ss
    res0 = math.log(total)
    res1 = math.log(cs * inv_h) - ln_scale_c
    res2 = math.log(ss * inv_h) - ln_scale_s
    dh0 = h0 * inv_h
    dh1 = h1 * inv_h
    dh2 = h2d * inv_h
    return (res0 * res0 + res1 * res1 + res2 * res2, res0, res1, res2,
            t0 * inv_t, t1 * inv_t, t2 * inv_t,
            c0 * inv_c - dh0, 1.0 - dh1, c2d * inv_c - dh2,
            s0 * inv_s - dh0, s1 * inv_s - dh1, s2 * inv_s - dh2)


@njit(cache=True, error_model='numpy')
def _poly_fractions(u0, u1, u2, c, x_out):
    a = math.exp(u0)
    b = math.exp(u1)
    r = math.exp(0.5 * u2)
    x_out[0] = c[0] * a
    x_out[1] = c[1] * a
    x_out[2] = c[2]
    x_out[3] = c[3] * b
    x_out[4] = c[4] * b
    x_out[5] = c[5] * a * a * b
    x_out[6] = c[6] * r
    x_out[7] = c[7] * a * r
    x_out[8] = c[8] * r * r
    x_out[9] = c[9] * b * r


@njit(cache=True, error_model='numpy')
def _start(offsets, b_h, b_c, b_s):
    """Safe start: H as H2O + H2, C as CO2 + CO, S as SO2 + H2S, ratios set by fO2."""
    r_h2 = math.exp(offsets[1] - offsets[0])
    r_co = math.exp(offsets[4] - offsets[3])
    n_h2o = 0.5 * b_h / (1.0 + r_h2)
    n_co2 = b_c / (1.0 + r_co)
    tot = 0.5 * b_h + b_c + b_s
    u0 = math.log(n_h2o / tot) - offsets[0]
    u1 = math.log(n_co2 / tot) - offsets[3]
    # split S between SO2 and H2S: ln(x_SO2/x_H2S) = off6 - off7 - u0 (the S2 terms cancel)
    ln_r = offsets[6] - offsets[7] - u0
    if ln_r > 0:
        frac_so2 = 1.0 / (1.0 + math.exp(-ln_r))
    else:
        er = math.exp(ln_r)
        frac_so2 = er / (1.0 + er)
    x_s = max(frac_so2, 1e-300) * b_s / tot
    u2 = 2.0 * (math.log(x_s) - offsets[6])
    return u0, u1, u2


@njit(cache=True, error_model='numpy')
def _speciate_monomial(offsets, b_h, b_c, b_s, x_out, c):
    """Damped Newton on the monomial form; returns (status, iterations)."""
    for i in range(10):
        c[i] = math.exp(offsets[i])
    ln_c_h = math.log(b_c / b_h)
    ln_s_h = math.log(b_s / b_h)
    u0, u1, u2 = _start(offsets, b_h, b_c, b_s)
    (merit, r0, r1, r2, j00, j01, j02, j10, j11, j12, j20, j21, j22) = _poly_residual(
        u0, u1, u2, c, ln_c_h, ln_s_h)
    tol2 = TOLERANCE * TOLERANCE
    if not merit < math.inf:
        return STATUS_NOT_CONVERGED, 0
    it = 0
    while it < MAX_ITERATIONS:
        if merit < tol2:
            _poly_fractions(u0, u1, u2, c, x_out)
            return STATUS_OK, it
        it += 1
        # Newton step by Cramer's rule
        m00 = j11 * j22 - j12 * j21
        m01 = j10 * j22 - j12 * j20
        m02 = j10 * j21 - j11 * j20
        det = j00 * m00 - j01 * m01 + j02 * m02
        if not (abs(det) > 1e-300 and abs(det) < math.inf):
            break
        inv = -1.0 / det
        d0 = (r0 * m00 - j01 * (r1 * j22 - j12 * r2) + j02 * (r1 * j21 - j11 * r2)) * inv
        d1 = (j00 * (r1 * j22 - j12 * r2) - r0 * m01 + j02 * (j10 * r2 - r1 * j20)) * inv
        d2 = (j00 * (j11 * r2 - r1 * j21) - j01 * (j10 * r2 - r1 * j20) + r0 * m02) * inv
        # limit the step to 10 natural-log units, then backtrack on the merit
        biggest = max(abs(d0), abs(d1), abs(d2))
        scale = 1.0 if biggest < 10.0 else 10.0 / biggest
        accepted = False
        for _ in range(40):
            t = _poly_residual(u0 + scale * d0, u1 + scale * d1, u2 + scale * d2, c,
                               ln_c_h, ln_s_h)
            if t[0] < merit * (1.0 - 1e-4 * scale) or t[0] < tol2:
                accepted = True
                break
            scale *= 0.5
        if not accepted:
            break
        u0 += scale * d0
        u1 += scale * d1
        u2 += scale * d2
        (merit, r0, r1, r2, j00, j01, j02, j10, j11, j12, j20, j21, j22) = t
    return STATUS_NOT_CONVERGED, it


@njit(cache=True, error_model='numpy')
def speciate_state(ln_k, ln_fo2, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w, x_out, scratch):
    """Solve one state; fills mole fractions x_out; returns (status, iterations).

    ln_phi: ln fugacity coefficients; ln_p: ln total pressure (bar);
    b_h, b_c, b_s: moles of H, C, S in any common unit (only ratios matter).
    scratch: float64 work array of SCRATCH_SIZE (no allocation per state).
    The monomial-form Newton iteration is tried first; a state it cannot
    finish is solved again by the log-sum-exp iteration.
    """
    n = ln_phi.shape[0]
    offsets = scratch[0:10]
    log_fugacity_offsets(ln_k, ln_fo2, offsets)
    for i in range(n):
        offsets[i] -= ln_phi[i] + ln_p  # ln x = ln f - ln phi - ln P
    status, it = _speciate_monomial(offsets, b_h, b_c, b_s, x_out, scratch[90:100])
    if status != STATUS_OK:
        st2, it2 = _speciate_state_logspace(ln_k, ln_fo2, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w,
                                            c_w, s_w, x_out, scratch)
        return st2, it + it2
    # Close the sum exactly; a common factor on every species but O2 keeps the
    # element ratios and fO2 exact and moves the equilibria by < 1e-12.
    s = 0.0
    for i in range(n):
        s += x_out[i]
    f = (1.0 - x_out[2]) / (s - x_out[2])
    for i in range(n):
        if i != 2:
            x_out[i] *= f
    return status, it


@njit(cache=True, error_model='numpy')
def _speciate_batch(temperature_k, ln_fo2, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w,
                    coeffs, t_mid, nu, x, status, iters):
    ln_k = np.empty(nu.shape[1])
    scratch = np.empty(SCRATCH_SIZE)
    for j in range(ln_fo2.shape[0]):
        ln_k_kernel(temperature_k[j], coeffs, t_mid, nu, ln_k)
        st, it = speciate_state(ln_k, ln_fo2[j], ln_phi[j], ln_p[j], b_h[j], b_c[j], b_s[j],
                                exps, h_w, c_w, s_w, x[j], scratch)
        status[j] = st
        iters[j] = it


class SpeciationResult:
    """Outcome of `speciate` for n states (arrays over states)."""

    def __init__(self, mole_fractions, fugacity_coefficients, log10_fo2, status, iterations,
                 temperature_k, pressure_bar):
        self.mole_fractions = mole_fractions
        self.fugacity_coefficients = fugacity_coefficients
        self.log10_fo2 = log10_fo2
        self.status = status
        self.iterations = iterations
        self.temperature_k = temperature_k
        self.pressure_bar = pressure_bar

    @property
    def fugacities_bar(self):
        return self.mole_fractions * self.fugacity_coefficients * self.pressure_bar[:, None]

    @property
    def converged(self):
        return self.status == STATUS_OK

    def as_dict(self, i=0):
        return {name: float(self.mole_fractions[i, k]) for k, name in enumerate(SPECIES)}


def speciate(temperature_k, pressure_bar, log10_fo2, h_moles, c_moles, s_moles, eos="real"):
    """Equilibrium gas speciation for arrays of states.

    temperature_k, pressure_bar, log10_fo2 (bar) and the element totals are
    broadcast to a common 1-D shape. eos: "real" (Lewis-Randall mixing of
    pure-species fugacity coefficients from `eos`) or "ideal". States that do
    not converge keep status STATUS_NOT_CONVERGED; nothing is hidden.
    """
    t, p, lf, bh, bc, bs = (np.atleast_1d(np.asarray(a, dtype=float)) for a in
                            (temperature_k, pressure_bar, log10_fo2, h_moles, c_moles, s_moles))
    t, p, lf, bh, bc, bs = (np.ascontiguousarray(a) for a in np.broadcast_arrays(t, p, lf, bh, bc, bs))
    n = t.size
    if eos == "ideal":
        phi = np.ones((n, N_SP))
    elif eos == "real":
        from ventsource.chemistry.eos import fugacity_coefficients
        phi = np.ascontiguousarray(fugacity_coefficients(t, p))
    else:
        raise ValueError(f"unknown eos '{eos}': use 'real' or 'ideal'")
    x = np.empty((n, N_SP))
    status = np.empty(n, dtype=np.int64)
    iters = np.empty(n, dtype=np.int64)
    _speciate_batch(t, lf * LN10, np.log(phi), np.log(p), bh, bc, bs,
                    UNKNOWN_EXPONENTS, H_ATOMS.copy(), C_ATOMS.copy(), S_ATOMS.copy(),
                    NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, x, status, iters)
    return SpeciationResult(x, phi, lf, status, iters, t, p)
