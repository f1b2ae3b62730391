"""Closed-system melt-gas equilibrium of one context.

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
"""
import math

from ventsource.magma.closed_residuals import _evaluate
from ventsource.magma.closed_start import G_START_MIN, _initial_guess
from ventsource.magma.degassing_context import (
    _C_SK, _caps_at_water, _W_JAC, _W_JACT, _W_ITER, _W_M, _W_MGT, _W_R, _W_RT, _W_STEP, _W_TRIAL, _W_XT, MG_SIZE,
    STATUS_FAILED, STATUS_GAS, STATUS_NO_GAS, _kernel,
)
from ventsource.magma.newton_step import _solve_newton

MAX_NEWTON = 100
G_SCALE = 1e-5
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
    # a warm start (the same state at a nearby fO2) keeps the law elasticities in mg
    st = _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work, use_guess)
    if st == STATUS_FAILED and use_guess and g_start < 0.0:
        # H and C alone dissolve: before calling it "no gas", try once from a start
        # where S makes a small gas
        _initial_guess(ctx, h_law, h_par, c_law, c_par, z, True)
        st = _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work, True)
    if st == STATUS_FAILED and g_start < 0.0:
        # Above saturation the 4-D iteration can stall at g < 0 (with D_S the S
        # balance has no root there); the H-C system alone, g_start < 0, already
        # shows the magma holds its H2O and CO2, and S alone did not make a gas.
        z[3] = g_start
        return STATUS_NO_GAS
    return st


@_kernel
def _newton(ctx, h_law, h_par, c_law, c_par, z, x, mg, work, refresh):
    """Damped Newton iteration from z; STATUS_GAS, STATUS_NO_GAS (root with g <= 0)
    or STATUS_FAILED. refresh: recompute the law elasticities at the start (a cold
    start); a warm start reuses those in mg (the line search refreshes them while
    the merit is above REFRESH_MERIT)."""
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
    merit = _evaluate(z, ctx, h_law, h_par, c_law, c_par, x, mg, r, jac, refresh)
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
    if ctx[_C_SK] > 0.0:
        _caps_at_water(ctx, 0.5 * mg[3])  # the cap in force is the final state's
    # normalise away the last 1e-12 of the sum
    s = 0.0
    for j in range(10):
        s += x[j]
    for j in range(10):
        x[j] /= s
    if z[3] <= 0.0:
        return STATUS_NO_GAS
    return STATUS_GAS
