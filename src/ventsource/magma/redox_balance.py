"""Evolving redox: fO2 from a conserved electron (oxygen) balance over melt iron,
melt sulfur and the gas.

The redox budget of a gram of magma counts, relative to Fe2+, S2- (sulfide, H2S),
H+ (H2O) and C4+ (CO2, COS), the electrons its atoms could give up:

    E = n_Fe Fe3+/Fe + 8 S6+(melt) + 8 S(anhydrite) + g sum_i e_i x_i / M_gas,
    e = H2 -2, O2 +4, CO -2, CH4 -8, SO2 +6, S2 +4 (per molecule), others 0.

With O the only other element changing its oxidation state, E is conserved in a
closed system whose H, C, S, Fe and O stay together (the sum of all oxidation
numbers is zero), and on an open path the removed gas takes its share. Melt iron
follows Kress and Carmichael (1991, iron_redox.py), melt sulfate the split of Jugo
et al. (2010). The prior's dFMQ sets E of the undegassed magma at its temperature
and 1 bar (all volatiles dissolved, the sulfur above its caps in a sulfide or
anhydrite phase); at each pressure the dFMQ of the melt + gas is the one that
returns that E. Taking the reference at 1 bar instead of the saturation pressure
(which the closed style does not compute) keeps E the same at every pressure of a
closed path; at 3 kbar it puts the undegassed magma ~0.1 log units above the
prior's dFMQ (Kress and Carmichael's pressure terms against the FMQ pressure term;
measured 0.09 for an arc basalt at 1150 C).

The root in dFMQ is found by Newton steps (first with the melt's own derivative,
then secant), each a warm-started closed-system solve (closed_solve.py).
"""
import math

from ventsource.chemistry.buffers import FMQ_COEFFICIENTS
from ventsource.chemistry.species import MOLAR_MASS_G_MOL
from ventsource.chemistry.thermochemistry import LN10
from ventsource.magma.closed_residuals import _evaluate
from ventsource.magma.closed_solve import solve_closed
from ventsource.magma.degassing_context import (
    _C_CAPKIND, _C_DFMQ, _C_DFMQ0, _C_E0, _C_KCC, _C_LNFO2, _C_LNRMAX, _C_NFE, _C_NS, _C_P,
    _C_REDOX, _C_SCAS_A, _C_SCAS_B, _C_SCSS_A, _C_SCSS_B, _C_SCSS_P, _C_SK, _C_T, _W_JACT, _W_M,
    _W_MGT, _W_RT, _W_STEP, _W_TRIAL, _W_XT, M_S, MG_SIZE,
    MAX_SULFATE_FRACTION, STATUS_FAILED, STATUS_GAS, STATUS_NO_GAS, SULFUR_PHASE_ANHYDRITE, _C_NH,
    _kernel,
    _set_dfmq, scss_water_term,
)
from ventsource.magma.newton_step import _solve_newton
from ventsource.magma.iron_redox import KC_A, KC_B, KC_C, KC_E, KC_F, KC_G, KC_H, KC_T0

MAX_REDOX_STEPS = 40
REDOX_TOL = 1e-10        # |E - E0| / n_Fe at the root
MAX_DFMQ_STEP = 1.0
SLOPE_STEP = 1e-4        # dFMQ step of the implicit derivative (first order in it)
_M0, _M1, _M2, _M3, _M4, _M5, _M6, _M7, _M8, _M9 = (float(m) for m in MOLAR_MASS_G_MOL)


@_kernel
def fe3_fraction_kc91(temperature_k, pressure_bar, ln_fo2, comp_term):
    """Fe3+/Fe total, Kress and Carmichael (1991) eq. 7 (see iron_redox.py)."""
    t = temperature_k
    p = pressure_bar * 1.0e5
    ln_r = (KC_A * ln_fo2 + KC_B / t + KC_C + comp_term
            + KC_E * (1.0 - KC_T0 / t - math.log(t / KC_T0)) + KC_F * p / t
            + KC_G * (t - KC_T0) * p / t + KC_H * p * p / t)
    r = math.exp(ln_r)
    return 2.0 * r / (2.0 * r + 1.0)


@_kernel
def sulfate_fraction(dfmq):
    """S6+/ST, Jugo et al. (2010), capped as in degassing_context."""
    return min(1.0 / (1.0 + 10.0 ** (2.1 - 2.0 * dfmq)), MAX_SULFATE_FRACTION)


@_kernel
def gas_electrons_per_gram(x):
    """Redox budget of one gram of gas of mole fractions x (SPECIES order)."""
    mbar = (_M0 * x[0] + _M1 * x[1] + _M2 * x[2] + _M3 * x[3] + _M4 * x[4] + _M5 * x[5]
            + _M6 * x[6] + _M7 * x[7] + _M8 * x[8] + _M9 * x[9])
    e = -2.0 * x[1] + 4.0 * x[2] - 2.0 * x[4] - 8.0 * x[5] + 6.0 * x[6] + 4.0 * x[8]
    return e / mbar


@_kernel
def _phase_is_anhydrite(ctx, z):
    return (ctx[_C_SK] > 0.0 and ctx[_C_CAPKIND] == SULFUR_PHASE_ANHYDRITE
            and z[2] >= 2.0 * ctx[_C_LNRMAX] - 1e-9)


@_kernel
def magma_electrons(ctx, z, x, mg):
    """E of melt + gas (+ anhydrite) per gram of magma at the solved state z."""
    g = z[3]
    e = ctx[_C_NFE] * fe3_fraction_kc91(ctx[_C_T], ctx[_C_P], ctx[_C_LNFO2], ctx[_C_KCC])
    e += 8.0 * sulfate_fraction(ctx[_C_DFMQ]) * mg[5] * (1.0 - g)
    if _phase_is_anhydrite(ctx, z):
        e += 8.0 * (ctx[_C_NS] - g * mg[2] - (1.0 - g) * mg[5])
    return e + g * gas_electrons_per_gram(x)


@_kernel
def set_redox_reference(ctx, n_fe, comp_term, evolving):
    """Store the redox budget of the undegassed magma at the prior's dFMQ, 1 bar."""
    ctx[_C_REDOX] = 1.0 if evolving else 0.0
    ctx[_C_NFE] = n_fe
    ctx[_C_KCC] = comp_term
    d0 = ctx[_C_DFMQ]
    ctx[_C_DFMQ0] = d0
    if not evolving:
        ctx[_C_E0] = 0.0
        return
    a, b, _c = FMQ_COEFFICIENTS
    t = ctx[_C_T]
    ln_fo2 = (a / t + b + d0) * LN10
    x6 = sulfate_fraction(d0)
    n_s = ctx[_C_NS]
    dissolved = n_s
    anhydrite = 0.0
    if ctx[_C_SK] > 0.0:
        to_mol = 1e-6 / M_S
        cap = math.inf
        if math.isfinite(ctx[_C_SCSS_A]):
            water, _d = scss_water_term(ctx, 0.5 * ctx[_C_NH])  # all the H2O dissolved
            cap = (math.exp(ctx[_C_SCSS_A] + ctx[_C_SCSS_B] / t + ctx[_C_SCSS_P] + water) * to_mol
                   / (1.0 - x6))
        scas = math.inf
        if math.isfinite(ctx[_C_SCAS_A]) and x6 > 0.0:
            scas = math.exp(ctx[_C_SCAS_A] + ctx[_C_SCAS_B] / t) * to_mol / x6
        if scas < cap:
            cap = scas
            anhydrite = max(n_s - cap, 0.0)
        dissolved = min(n_s, cap)
    ctx[_C_E0] = (n_fe * fe3_fraction_kc91(t, 1.0, ln_fo2, comp_term) + 8.0 * x6 * dissolved
                  + 8.0 * anhydrite)


@_kernel
def _pair(a, b):
    s = a + b
    return a * b / s if s > 0.0 else 0.0


@_kernel
def _slope(ctx, z, x, mg):
    """dE/d dFMQ estimated at fixed phase amounts: melt iron and sulfate, and the gas's
    redox pairs at fixed element totals (H2/H2O and CO/CO2 go as fO2^-1/2, SO2/H2S as
    fO2^3/2 at fixed fH2O). The Newton derivative before the secant takes over."""
    f3 = fe3_fraction_kc91(ctx[_C_T], ctx[_C_P], ctx[_C_LNFO2], ctx[_C_KCC])
    x6 = sulfate_fraction(ctx[_C_DFMQ])
    g = z[3]
    melt = (ctx[_C_NFE] * f3 * (1.0 - f3) * KC_A
            + 8.0 * (1.0 - g) * mg[5] * x6 * (1.0 - x6) * 2.0)
    mbar = (_M0 * x[0] + _M1 * x[1] + _M2 * x[2] + _M3 * x[3] + _M4 * x[4] + _M5 * x[5]
            + _M6 * x[6] + _M7 * x[7] + _M8 * x[8] + _M9 * x[9])
    gas = (_pair(x[0], x[1]) + _pair(x[3], x[4]) + 9.0 * _pair(x[6], x[7])) / mbar
    return (melt + g * gas) * LN10


@_kernel
def _implicit_slope(ctx, h_law, h_par, c_law, c_par, z, mg, work, ln_k, e_here):
    """dE/d dFMQ along the equilibrium: the closed-system residuals at dFMQ + h with the
    same z, one linear solve with their Jacobian for dz (implicit function theorem),
    E at the moved state. Two residual evaluations, no iteration; NaN if it fails.
    Leaves ctx at dFMQ + h: the caller moves it on (a restore here cost ~0.1 us a step)."""
    d = ctx[_C_DFMQ]
    rt = work[_W_RT:_W_RT + 4]
    jt = work[_W_JACT:_W_JACT + 16]
    xt = work[_W_XT:_W_XT + 10]
    mgt = work[_W_MGT:_W_MGT + MG_SIZE]
    step = work[_W_STEP:_W_STEP + 4]
    trial = work[_W_TRIAL:_W_TRIAL + 4]
    m = work[_W_M:_W_M + 24]
    for j in range(7, MG_SIZE):
        mgt[j] = mg[j]
    _set_dfmq(ctx, d + SLOPE_STEP, ln_k)
    slope = math.nan
    merit = _evaluate(z, ctx, h_law, h_par, c_law, c_par, xt, mgt, rt, jt, False)
    if math.isfinite(merit) and _solve_newton(jt, rt, step, m):
        for k in range(4):
            trial[k] = z[k] + step[k]
        merit = _evaluate(trial, ctx, h_law, h_par, c_law, c_par, xt, mgt, rt, jt, False)
        if math.isfinite(merit):
            slope = (magma_electrons(ctx, trial, xt, mgt) - e_here) / SLOPE_STEP
    return slope


@_kernel
def solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, use_guess, work, ln_k):
    """Closed-system equilibrium at ctx's T and P; with evolving redox also the dFMQ
    (left in ctx) at which melt + gas hold the redox budget ctx[_C_E0]."""
    st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, use_guess, work)
    if ctx[_C_REDOX] != 0.0 and st == STATUS_NO_GAS:
        # Gas or not is decided at the melt's own dFMQ at this pressure (melt and sulfur
        # phase holding the whole budget, gas_free_dfmq), not at the start value: near
        # saturation the sulfur gas species tip the balance, and the start value depends
        # on the caller (the saturation search starts from its last solve)
        d_free = gas_free_dfmq(ctx, ln_k)
        if not math.isfinite(d_free):
            return STATUS_FAILED
        st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work)
    if ctx[_C_REDOX] == 0.0 or st != STATUS_GAS:
        return st
    tol = REDOX_TOL * ctx[_C_NFE]
    d = ctx[_C_DFMQ]
    res = magma_electrons(ctx, z, x, mg) - ctx[_C_E0]
    d_prev = d
    res_prev = res
    # E rises with dFMQ: the root stays bracketed by the iterates on either side. Where
    # a sulfur phase appears or vanishes E(dFMQ) has a kink, and Newton steps from its
    # two sides can cycle; a step leaving the bracket is replaced by its midpoint.
    lo = -math.inf
    hi = math.inf
    for it in range(MAX_REDOX_STEPS):
        if abs(res) <= tol:
            return STATUS_GAS
        if res < 0.0:
            lo = max(lo, d)
        else:
            hi = min(hi, d)
        slope = _implicit_slope(ctx, h_law, h_par, c_law, c_par, z, mg, work, ln_k,
                                res + ctx[_C_E0])
        implicit = slope > 0.0
        if not implicit:  # NaN or a non-physical sign: secant, or the pair estimate
            _set_dfmq(ctx, d, ln_k)
            slope = _slope(ctx, z, x, mg)
            if it > 0 and d != d_prev:
                secant = (res - res_prev) / (d - d_prev)
                if secant > 0.0 and math.isfinite(secant):
                    slope = secant
        step = -res / slope
        step = max(-MAX_DFMQ_STEP, min(MAX_DFMQ_STEP, step))
        if not (lo < d + step < hi) and math.isfinite(lo) and math.isfinite(hi):
            step = 0.5 * (lo + hi) - d
            implicit = False  # no predictor for a bisection step
        d_prev = d
        res_prev = res
        d = d + step
        if implicit:
            # first-order predictor of the new equilibrium: z + (dz/dd) step, so the
            # warm-started solve needs fewer Newton iterations
            scale = step / SLOPE_STEP
            g_new = z[3] + work[_W_STEP + 3] * scale
            if g_new > 0.0:
                for k in range(4):
                    z[k] += work[_W_STEP + k] * scale
        _set_dfmq(ctx, d, ln_k)
        st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, False, work)
        if st == STATUS_FAILED:
            st = solve_closed(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work)
        if st != STATUS_GAS:
            return st
        res = magma_electrons(ctx, z, x, mg) - ctx[_C_E0]
    return STATUS_GAS if abs(res) <= 1e3 * tol else STATUS_FAILED


@_kernel
def _melt_electrons(ctx, d, ln_k):
    """E of the gas-free magma at ctx's T, P and dFMQ d (its S in melt, sulfide or
    anhydrite as the caps at d say); leaves ctx at d."""
    _set_dfmq(ctx, d, ln_k)
    x6 = sulfate_fraction(d)
    n_s = ctx[_C_NS]
    dissolved = n_s
    anhydrite = 0.0
    if ctx[_C_SK] > 0.0 and math.isfinite(ctx[_C_LNRMAX]):
        cap = ctx[_C_SK] * math.exp(ctx[_C_LNRMAX])
        dissolved = min(n_s, cap)
        if ctx[_C_CAPKIND] == SULFUR_PHASE_ANHYDRITE:
            anhydrite = n_s - dissolved
    return (ctx[_C_NFE] * fe3_fraction_kc91(ctx[_C_T], ctx[_C_P], ctx[_C_LNFO2], ctx[_C_KCC])
            + 8.0 * x6 * dissolved + 8.0 * anhydrite)


@_kernel
def gas_free_dfmq(ctx, ln_k):
    """dFMQ of a magma holding no gas at ctx's pressure (above its saturation pressure):
    the one at which melt (and sulfur phase) hold the redox budget. Secant steps from
    the prior's dFMQ; NaN if they do not settle. Leaves ctx at that dFMQ."""
    if ctx[_C_REDOX] == 0.0:
        return ctx[_C_DFMQ0]
    tol = REDOX_TOL * ctx[_C_NFE]
    d0 = ctx[_C_DFMQ0]
    r0 = _melt_electrons(ctx, d0, ln_k) - ctx[_C_E0]
    d1 = d0 + 0.01
    r1 = _melt_electrons(ctx, d1, ln_k) - ctx[_C_E0]
    for _ in range(MAX_REDOX_STEPS):
        if abs(r1) <= tol:
            return d1
        if r1 == r0:
            break
        d2 = d1 - r1 * (d1 - d0) / (r1 - r0)
        d2 = max(d1 - MAX_DFMQ_STEP, min(d1 + MAX_DFMQ_STEP, d2))
        d0, r0 = d1, r1
        d1 = d2
        r1 = _melt_electrons(ctx, d1, ln_k) - ctx[_C_E0]
    return math.nan


@_kernel
def remove_gas_redox(ctx, z, x):
    """Open path: the removed gas takes its redox budget; Fe stays with the melt."""
    if ctx[_C_REDOX] == 0.0:
        return
    g = z[3]
    ctx[_C_E0] = (ctx[_C_E0] - g * gas_electrons_per_gram(x)) / (1.0 - g)
    ctx[_C_NFE] = ctx[_C_NFE] / (1.0 - g)


__all__ = ["fe3_fraction_kc91", "gas_electrons_per_gram", "magma_electrons", "remove_gas_redox",
           "set_redox_reference", "solve_with_redox", "_C_P", "_C_LNFO2"]
