"""Re-equilibration of the gas on its way to the vent ("quench").

The gas made at the degassing pressure and temperature keeps reacting as it
rises and cools (SO2 + 3 H2 = H2S + 2 H2O, CO2 + H2 = CO + H2O, ...) until
the reactions freeze at a quench temperature near the surface; what reaches
the instrument is the gas re-speciated there. Two end members (Giggenbach
1987, Applied Geochemistry 2:143-161, describes both buffering regimes for
high-temperature volcanic gas; common practice):

* "gas_buffered": the gas keeps its own H, C, O and S atoms; its fO2 at the
  quench state follows from its composition. Solved as four unknowns
  (ln fH2O, ln fCO2, ln fS2, ln fO2) with a fourth equation, the oxygen
  balance written as the gas's excess oxygen over its fully oxidised form,
  O - H/2 - 2 C - 2 S (a conserved linear combination of the element totals
  that, unlike O/H, is not the small difference of two large numbers).
* "rock_buffered": fO2 is held at the magma's buffer offset (dFMQ) at the
  quench temperature and pressure; H, C and S are conserved, as in
  `chemistry.speciation.speciate`.
* "none": the gas reaches the vent as it left the magma.

The same reactions and NASA-7 data as the speciation at depth are used
(`chemistry.thermochemistry`), with the model's equation of state.
"""
import math

import numpy as np
from numba import njit

from ventsource.chemistry.buffers import log10_fo2_from_dfmq
from ventsource.chemistry.eos import log_fugacity_coefficients_kernel
from ventsource.chemistry.speciation import (
    SCRATCH_SIZE, STATUS_NOT_CONVERGED, STATUS_OK, UNKNOWN_EXPONENTS, log_fugacity_offsets,
    _start as _start_offsets, speciate, speciate_state,
)
from ventsource.chemistry.species import C_ATOMS, ELEMENT_MATRIX, H_ATOMS, O_ATOMS, S_ATOMS
from ventsource.chemistry.thermochemistry import LN10, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k_kernel

QUENCH_MODELS = ("gas_buffered", "rock_buffered", "none")
N_SP = H_ATOMS.size
MAX_ITERATIONS = 100
NEAR = 0.2  # gases this close in ln C/H, ln S/H and excess O start from each other's root
TOLERANCE = 1e-13


def _fo2_exponents():
    """Exponent of fO2 in each species' fugacity at fixed (fH2O, fCO2, fS2), read
    off the solver's own offsets so the two stay the same reactions."""
    zero = np.zeros(REACTION_MATRIX.shape[1])
    a, b = np.empty(N_SP), np.empty(N_SP)
    log_fugacity_offsets(zero, 0.0, a)
    log_fugacity_offsets(zero, 1.0, b)
    return b - a


FO2_EXPONENTS = _fo2_exponents()
# Excess oxygen per molecule over the fully oxidised gas (H2O, CO2, SO2): O - H/2 - 2C - 2S.
EXCESS_O = O_ATOMS - 0.5 * H_ATOMS - 2.0 * C_ATOMS - 2.0 * S_ATOMS
_H, _C, _O, _S = (np.ascontiguousarray(a, dtype=float) for a in (H_ATOMS, C_ATOMS, O_ATOMS, S_ATOMS))


@njit(cache=True, error_model='numpy')
def _residual4(v, c, g_w, ln_c_h, ln_s_h, x, res, jac):
    """Residuals and Jacobian of the four equations at v = (ln fH2O, ln fCO2, ln fS2, ln fO2);
    returns the merit sum(res^2), inf where a sum is not positive and finite.

    Monomial form (as speciation._poly_residual): with a = e^u0, b = e^u1, r = e^(u2/2)
    and o = e^(w/2) every mole fraction is x_i = c_i a^p b^q r^s o^t, so one evaluation
    costs four exponentials. Exponents (p, q, s, t/2) follow speciation.UNKNOWN_EXPONENTS
    and FO2_EXPONENTS (checked by tests/test_quench.py)."""
    a = math.exp(v[0])
    b = math.exp(v[1])
    r = math.exp(0.5 * v[2])
    o = math.exp(0.5 * v[3])
    io = 1.0 / o
    x[0] = c[0] * a
    x[1] = c[1] * a * io
    x[2] = c[2] * o * o
    x[3] = c[3] * b
    x[4] = c[4] * b * io
    x[5] = c[5] * a * a * b * io * io * io * io
    x[6] = c[6] * r * o * o
    x[7] = c[7] * a * r * io
    x[8] = c[8] * r * r
    x[9] = c[9] * b * r * io
    # d/du0, d/du1, d/du2, d/dw of each sum (sum_i w_i x_i a_ik)
    tot = x[0] + x[1] + x[2] + x[3] + x[4] + x[5] + x[6] + x[7] + x[8] + x[9]
    red = x[1] + x[4] + x[7] + x[9]  # the species with fO2^-1/2
    t0 = x[0] + x[1] + 2.0 * x[5] + x[7]
    t1 = x[3] + x[4] + x[5] + x[9]
    t2 = 0.5 * (x[6] + x[7] + x[9]) + x[8]
    t3 = x[2] + x[6] - 0.5 * red - 2.0 * x[5]
    hs = 2.0 * (x[0] + x[1] + x[7]) + 4.0 * x[5]
    h0 = 2.0 * (x[0] + x[1] + x[7]) + 8.0 * x[5]
    h1 = 4.0 * x[5]
    h2 = x[7]
    h3 = -x[1] - x[7] - 8.0 * x[5]
    cs = t1
    c0 = 2.0 * x[5]
    c2 = 0.5 * x[9]
    c3 = -0.5 * (x[4] + x[9]) - 2.0 * x[5]
    ss = x[6] + x[7] + 2.0 * x[8] + x[9]
    s0 = x[7]
    s1 = x[9]
    s2 = 0.5 * (x[6] + x[7] + x[9]) + 2.0 * x[8]
    s3 = x[6] - 0.5 * (x[7] + x[9])
    gs = 0.0
    gabs = 0.0
    g0 = g1 = g2 = g3 = 0.0
    k0 = k1 = k2 = k3 = 0.0
    for i in range(10):
        gi = g_w[i] * x[i]
        ai = abs(gi)
        gs += gi
        gabs += ai
    # exponent-weighted sums of the excess-oxygen terms, species by species
    for i, e0, e1, e2, e3 in ((0, 1.0, 0.0, 0.0, 0.0), (1, 1.0, 0.0, 0.0, -0.5),
                              (2, 0.0, 0.0, 0.0, 1.0), (4, 0.0, 1.0, 0.0, -0.5),
                              (5, 2.0, 1.0, 0.0, -2.0), (6, 0.0, 0.0, 0.5, 1.0),
                              (7, 1.0, 0.0, 0.5, -0.5), (8, 0.0, 0.0, 1.0, 0.0),
                              (9, 0.0, 1.0, 0.5, -0.5)):
        gi = g_w[i] * x[i]
        ai = abs(gi)
        g0 += gi * e0
        g1 += gi * e1
        g2 += gi * e2
        g3 += gi * e3
        k0 += ai * e0
        k1 += ai * e1
        k2 += ai * e2
        k3 += ai * e3
    if not (tot > 0.0 and hs > 0.0 and cs > 0.0 and ss > 0.0 and gabs > 0.0 and tot < 1e300
            and hs < 1e300 and cs < 1e300 and ss < 1e300 and gabs < 1e300):
        return math.inf
    r3 = gs / gabs
    res[0] = math.log(tot)
    res[1] = math.log(cs / hs) - ln_c_h
    res[2] = math.log(ss / hs) - ln_s_h
    res[3] = r3
    it, ih, ic, i_s, ig = 1.0 / tot, 1.0 / hs, 1.0 / cs, 1.0 / ss, 1.0 / gabs
    jac[0, 0], jac[0, 1], jac[0, 2], jac[0, 3] = t0 * it, t1 * it, t2 * it, t3 * it
    jac[1, 0] = c0 * ic - h0 * ih
    jac[1, 1] = 1.0 - h1 * ih
    jac[1, 2] = c2 * ic - h2 * ih
    jac[1, 3] = c3 * ic - h3 * ih
    jac[2, 0] = s0 * i_s - h0 * ih
    jac[2, 1] = s1 * i_s - h1 * ih
    jac[2, 2] = s2 * i_s - h2 * ih
    jac[2, 3] = s3 * i_s - h3 * ih
    jac[3, 0] = (g0 - r3 * k0) * ig
    jac[3, 1] = (g1 - r3 * k1) * ig
    jac[3, 2] = (g2 - r3 * k2) * ig
    jac[3, 3] = (g3 - r3 * k3) * ig
    return res[0] ** 2 + res[1] ** 2 + res[2] ** 2 + res[3] ** 2


@njit(cache=True, error_model='numpy')
def _solve4(a, b, out, m):
    """a x = b by Gaussian elimination with partial pivoting in m (4x5 work); False if singular."""
    for i in range(4):
        for j in range(4):
            m[i, j] = a[i, j]
        m[i, 4] = b[i]
    for c in range(4):
        p = c
        for r in range(c + 1, 4):
            if abs(m[r, c]) > abs(m[p, c]):
                p = r
        if not abs(m[p, c]) > 1e-300:
            return False
        if p != c:
            for j in range(5):
                m[c, j], m[p, j] = m[p, j], m[c, j]
        for r in range(c + 1, 4):
            f = m[r, c] / m[c, c]
            for j in range(c, 5):
                m[r, j] -= f * m[c, j]
    for r in range(3, -1, -1):
        s = m[r, 4]
        for j in range(r + 1, 4):
            s -= m[r, j] * out[j]
        out[r] = s / m[r, r]
        if not math.isfinite(out[r]):
            return False
    return True


@njit(cache=True, error_model='numpy')
def _newton4(v, c, g_w, ln_c_h, ln_s_h, x_out, buf):
    """Damped Newton from v (updated in place); fills x_out on success;
    returns (status, iterations)."""
    x, res, res_t, trial, step, neg = buf[0], buf[1], buf[2], buf[3], buf[4], buf[5]
    jac, jac_t, mwork = buf[6:10, :4], buf[10:14, :4], buf[20:24, :5]
    merit = _residual4(v, c, g_w, ln_c_h, ln_s_h, x, res, jac)
    tol2 = TOLERANCE * TOLERANCE
    for it in range(MAX_ITERATIONS):
        if not merit < math.inf:
            return STATUS_NOT_CONVERGED, it
        if merit < tol2:
            for i in range(x.shape[0]):
                x_out[i] = x[i]
            return STATUS_OK, it
        for k in range(4):
            neg[k] = -res[k]
        if not _solve4(jac, neg, step, mwork):
            return STATUS_NOT_CONVERGED, it
        biggest = max(abs(step[0]), abs(step[1]), abs(step[2]), abs(step[3]))
        scale = 1.0 if biggest < 5.0 else 5.0 / biggest  # at most 5 ln units a step
        accepted = False
        m_t = math.inf
        for _ in range(40):
            for k in range(4):
                trial[k] = v[k] + scale * step[k]
            m_t = _residual4(trial, c, g_w, ln_c_h, ln_s_h, x, res_t, jac_t)
            if m_t < merit * (1.0 - 1e-4 * scale) or m_t < tol2:
                accepted = True
                break
            scale *= 0.5
        if not accepted:
            return STATUS_NOT_CONVERGED, it
        for k in range(4):
            v[k] = trial[k]
            res[k] = res_t[k]
            for j in range(4):
                jac[k, j] = jac_t[k, j]
        merit = m_t
    return STATUS_NOT_CONVERGED, MAX_ITERATIONS


@njit(cache=True, error_model='numpy')
def _excess_o_mismatch(x, g_w):
    """Signed excess-oxygen mismatch of a speciated gas, scaled to [-1, 1]."""
    top = 0.0
    bottom = 0.0
    for i in range(x.shape[0]):
        top += g_w[i] * x[i]
        bottom += abs(g_w[i]) * x[i]
    return top / bottom


@njit(cache=True, error_model='numpy')
def _nested(ln_k, ln_phi, ln_p, b_h, b_c, b_s, w0, exps, h_w, c_w, s_w, g_w, x_out, scratch):
    """Fallback: Illinois root search on ln fO2, each step a fixed-fO2 speciation
    (the package's own kernel); slower, but bracketed. Returns status."""
    lo, hi = w0 - 2.0, w0 + 2.0
    st, _ = speciate_state(ln_k, lo, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w, x_out, scratch)
    f_lo = _excess_o_mismatch(x_out, g_w) if st == STATUS_OK else math.nan
    st, _ = speciate_state(ln_k, hi, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w, x_out, scratch)
    f_hi = _excess_o_mismatch(x_out, g_w) if st == STATUS_OK else math.nan
    width = 4.0
    while not (f_lo < 0.0 and f_hi > 0.0):  # the mismatch rises with fO2
        if not (math.isfinite(f_lo) and math.isfinite(f_hi)) or width > 200.0:
            return STATUS_NOT_CONVERGED
        width *= 2.0
        if f_lo >= 0.0:
            lo -= width
            st, _ = speciate_state(ln_k, lo, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w,
                                   x_out, scratch)
            f_lo = _excess_o_mismatch(x_out, g_w) if st == STATUS_OK else math.nan
        else:
            hi += width
            st, _ = speciate_state(ln_k, hi, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w,
                                   x_out, scratch)
            f_hi = _excess_o_mismatch(x_out, g_w) if st == STATUS_OK else math.nan
    side = 0
    for _ in range(200):
        w = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        st, _ = speciate_state(ln_k, w, ln_phi, ln_p, b_h, b_c, b_s, exps, h_w, c_w, s_w, x_out, scratch)
        if st != STATUS_OK:
            return STATUS_NOT_CONVERGED
        f = _excess_o_mismatch(x_out, g_w)
        if abs(f) < TOLERANCE or hi - lo < 1e-13:
            return STATUS_OK
        if f < 0.0:
            lo, f_lo = w, f
            if side == -1:
                f_hi *= 0.5
            side = -1
        else:
            hi, f_hi = w, f
            if side == 1:
                f_lo *= 0.5
            side = 1
    return STATUS_NOT_CONVERGED


@njit(cache=True, error_model='numpy')
def _start_fo2(ln_k, ln_phi, ln_h2o_over_h2, temperature_k):
    """ln fO2 that the gas's own H2O/H2 gives at the quench state (H2 + 1/2 O2 = H2O);
    FMQ (Frost 1991 Table 1) where that ratio is not finite."""
    w = 2.0 * (ln_h2o_over_h2 + ln_phi[0] - ln_phi[1] - ln_k[0])
    if math.isfinite(w):
        return w
    return LN10 * (-25096.3 / temperature_k + 8.735)


@njit(cache=True, error_model='numpy')
def _gas_buffered_batch(temperature_k, pressure_bar, ideal, gas, coeffs, t_mid, nu, exps, t_exp,
                        h_w, c_w, o_w, s_w, excess_o, x, status, iters):
    n_sp = h_w.shape[0]
    ln_k = np.empty(nu.shape[1])
    ln_phi = np.zeros(n_sp)
    base = np.empty(n_sp)
    g_w = np.empty(n_sp)
    cexp = np.empty(n_sp)
    buf = np.empty((24, n_sp))
    scratch = np.empty(SCRATCH_SIZE)
    v = np.empty(4)
    t_last = p_last = math.nan
    v_prev = np.empty(4)
    v_warm = np.empty(4)
    prev = np.empty(3)
    warm = False
    for j in range(temperature_k.shape[0]):
        t, p = temperature_k[j], pressure_bar[j]
        b_h = b_c = b_o = b_s = 0.0
        for i in range(n_sp):
            b_h += h_w[i] * gas[j, i]
            b_c += c_w[i] * gas[j, i]
            b_o += o_w[i] * gas[j, i]
            b_s += s_w[i] * gas[j, i]
        q = (b_o - 0.5 * b_h - 2.0 * b_c - 2.0 * b_s) / b_h
        if not (b_h > 0.0 and b_c > 0.0 and b_s > 0.0 and math.isfinite(q) and t > 0.0 and p > 0.0):
            status[j] = STATUS_NOT_CONVERGED
            warm = False
            for i in range(n_sp):
                x[j, i] = math.nan
            continue
        if t != t_last or p != p_last:  # a batch usually shares one quench state
            warm = False
            ln_k_kernel(t, coeffs, t_mid, nu, ln_k)
            if not ideal:
                log_fugacity_coefficients_kernel(t, p, ln_phi)
            t_last, p_last = t, p
        ln_p = math.log(p)
        log_fugacity_offsets(ln_k, 0.0, base)
        for i in range(n_sp):
            base[i] -= ln_phi[i] + ln_p
            g_w[i] = excess_o[i] - q * h_w[i]
        w0 = _start_fo2(ln_k, ln_phi, math.log(gas[j, 0]) - math.log(gas[j, 1]), t)
        for i in range(n_sp):
            scratch[i] = base[i] + t_exp[i] * w0
        v[0], v[1], v[2] = _start_offsets(scratch, b_h, b_c, b_s)
        v[3] = w0
        ln_c_h = math.log(b_c / b_h)
        ln_s_h = math.log(b_s / b_h)
        for i in range(n_sp):
            cexp[i] = math.exp(base[i])
        st = STATUS_NOT_CONVERGED
        near = abs(ln_c_h - prev[0]) + abs(ln_s_h - prev[1]) + abs(q - prev[2]) < NEAR
        if warm and near:  # the previous gas's root: a pressure sweep's neighbour (see below)
            for k in range(4):
                v_warm[k] = v_prev[k]
            st, iters[j] = _newton4(v_warm, cexp, g_w, ln_c_h, ln_s_h, x[j], buf)
            if st == STATUS_OK:
                for k in range(4):
                    v[k] = v_warm[k]
        if st != STATUS_OK:
            st, iters[j] = _newton4(v, cexp, g_w, ln_c_h, ln_s_h, x[j], buf)
        warm = st == STATUS_OK
        prev[0], prev[1], prev[2] = ln_c_h, ln_s_h, q
        for k in range(4):
            v_prev[k] = v[k]
        if st != STATUS_OK:
            iters[j] += 1000  # marks the fallback
            st = _nested(ln_k, ln_phi, ln_p, b_h, b_c, b_s, w0, exps, h_w, c_w, s_w, g_w,
                         x[j], scratch)
        status[j] = st
        total = 0.0
        for i in range(n_sp):
            total += x[j, i]
        for i in range(n_sp):
            x[j, i] = x[j, i] / total if st == STATUS_OK else math.nan


def element_totals(gas):
    """(n, 4) moles of H, C, O, S per mole of gas."""
    return np.asarray(gas, dtype=float) @ ELEMENT_MATRIX


def gas_buffered(gas, temperature_c, pressure_bar, eos="real"):
    """Gas re-equilibrated at (T, P) with its own H, C, O and S: (mole fractions (n, 10),
    ok (n,), Newton iterations (n,), 1000 added where the bracketed fallback ran)."""
    x0 = np.atleast_2d(np.asarray(gas, dtype=float))
    n = x0.shape[0]
    t_k = np.ascontiguousarray(np.broadcast_to(np.asarray(temperature_c, dtype=float) + 273.15, (n,)))
    p = np.ascontiguousarray(np.broadcast_to(np.asarray(pressure_bar, dtype=float), (n,)))
    x = np.empty((n, N_SP))
    status = np.empty(n, dtype=np.int64)
    iters = np.zeros(n, dtype=np.int64)
    _gas_buffered_batch(t_k, p, eos == "ideal", np.ascontiguousarray(x0), NASA_COEFFS, NASA_T_MID,
                        REACTION_MATRIX, UNKNOWN_EXPONENTS, FO2_EXPONENTS, _H, _C, _O, _S, EXCESS_O,
                        x, status, iters)
    return x, status == STATUS_OK, iters


def rock_buffered(gas, temperature_c, pressure_bar, dfmq, eos="real"):
    """Gas re-speciated at (T, P) with fO2 at FMQ + dfmq there (Frost 1991) and its own
    H, C and S: (mole fractions (n, 10), ok (n,))."""
    x0 = np.atleast_2d(np.asarray(gas, dtype=float))
    n = x0.shape[0]
    t_k = np.broadcast_to(np.asarray(temperature_c, dtype=float) + 273.15, (n,))
    p = np.broadcast_to(np.asarray(pressure_bar, dtype=float), (n,))
    el = element_totals(x0)
    good = np.isfinite(el).all(axis=1) & (el[:, [0, 1, 3]] > 0.0).all(axis=1)
    x = np.full((n, N_SP), np.nan)
    ok = np.zeros(n, dtype=bool)
    if np.any(good):
        lf = log10_fo2_from_dfmq(np.broadcast_to(dfmq, (n,))[good], t_k[good], p[good])
        res = speciate(t_k[good], p[good], lf, el[good, 0], el[good, 1], el[good, 3], eos=eos)
        ok[good] = res.converged
        x[good] = np.where(res.converged[:, None], res.mole_fractions, np.nan)
    return x, ok


def quench(gas, model, temperature_c, pressure_bar=1.0, dfmq=None, eos="real"):
    """The gas as it leaves the vent, before any scrubbing: (mole fractions (n, 10), ok (n,)).

    model: one of QUENCH_MODELS; dfmq (the magma's buffer offset) is needed for
    "rock_buffered". Rows whose input is not a finite gas come back NaN and not ok.
    """
    if model == "none":
        x = np.array(gas, dtype=float)
        return x, np.isfinite(x).all(axis=1)
    if model == "gas_buffered":
        return gas_buffered(gas, temperature_c, pressure_bar, eos)[:2]
    if model == "rock_buffered":
        if dfmq is None:
            raise ValueError("rock_buffered quench needs the magma's dfmq")
        return rock_buffered(gas, temperature_c, pressure_bar, dfmq, eos)
    raise ValueError(f"unknown quench model '{model}' (allowed: {', '.join(QUENCH_MODELS)})")
