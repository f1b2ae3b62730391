"""Melt-gas equilibrium of a magma at pressure P, closed or open system: the
batch entry `degas()` over arrays of states.

The kernels live in one module per job:

* degassing_context: shared constants, context and work-array layouts, filling a context;
* closed_residuals: residuals and analytic Jacobian of the closed-system equations;
* closed_start: the one-dimensional H2O-CO2 start of the iteration;
* newton_step: the 4 x 4 linear solve of a Newton step;
* closed_solve: closed-system equilibrium (damped Newton), see its doc for the method;
* saturation: the saturation pressure (gas fraction zero), capped at P_SAT_CAP_BAR;
* open_path: the open-system path and the start at the cap, see its doc.

This module keeps the per-batch kernel, which allocates the work arrays once
and runs each state through those kernels, and re-exports the constants
callers use (STATUS_*, molar masses, P_SAT_CAP_BAR).
"""
import math

import numpy as np
from numba import njit

from ventsource.magma.redox_balance import gas_free_dfmq, set_redox_reference, solve_with_redox
from ventsource.magma.degassing_context import _set_dfmq
from ventsource.magma.degassing_context import (  # noqa: F401  (re-exported for callers)
    _C_CAPKIND, _C_CSA, _C_CSB, _C_DFMQ, _C_LNRMAX, _C_MDRY, _C_NH, _C_SCSS_A, _C_SCSS_W, _C_SK,
    _caps_at_water, CTX_SIZE, M_CO2, M_H2O,
    M_S, MG_SIZE, P_SAT_CAP_BAR, STATUS_FAILED, STATUS_GAS, STATUS_NO_GAS, SULFUR_PHASE_NONE,
    WORK_SIZE, _fill_context, _kernel,
)
from ventsource.magma.open_path import VANISHING_MOL_PER_G, _open_path  # noqa: F401
from ventsource.magma.saturation import saturation_pressure

M_FEO = 71.844  # g/mol, IUPAC 2013 atomic weights (as melt.py)


@_kernel
def _fill_bulk_context(ctx, temperature_k, pressure_bar, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s,
                       ideal, ln_k, ln_phi, redox_par, same_temperature=False):
    """Context of one state from its bulk H2O (wt%), CO2 and S (ppm); redox_par =
    (evolving 0/1, Kress-Carmichael composition term, FeOt wt% of the dry melt);
    same_temperature: ln_k already holds the values at temperature_k."""
    n_h = 2.0 * h2o_wt / 100.0 / M_H2O
    n_c = co2_ppm_bulk * 1e-6 / M_CO2
    n_s = s_ppm * 1e-6 / M_S
    _fill_context(ctx, temperature_k, pressure_bar, dfmq, n_h, n_c, n_s, d_s, ideal, ln_k, ln_phi,
                  same_temperature)
    dry = 1.0 - h2o_wt / 100.0 - (co2_ppm_bulk + s_ppm) * 1e-6
    n_fe = redox_par[2] / 100.0 / M_FEO * dry
    set_redox_reference(ctx, n_fe, redox_par[1], redox_par[0] > 0.5)


@_kernel
def _degas_state(ctx, psat, pressure_bar, open_system, n_open_steps, h_law, h_par, c_law, c_par,
                 ideal, ln_k, ln_phi, z, x, mg, work):
    """Status of one state: closed-system gas at P, or the open path from psat
    (from the cap where psat is inf; failed where the saturation search failed)."""
    if open_system and math.isfinite(psat) and psat > pressure_bar:
        return _open_path(ctx, psat, pressure_bar, n_open_steps, h_law, h_par, c_law, c_par,
                          ideal, ln_k, ln_phi, z, x, mg, work, False)
    if open_system and math.isinf(psat):
        # gas-saturated at the cap: the path starts there from the closed-system gas
        if pressure_bar < P_SAT_CAP_BAR:
            return _open_path(ctx, P_SAT_CAP_BAR, pressure_bar, n_open_steps, h_law, h_par,
                              c_law, c_par, ideal, ln_k, ln_phi, z, x, mg, work, True)
        return solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
    if open_system and math.isnan(psat):
        return STATUS_FAILED  # the saturation search itself failed: no start for the path
    return solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)


@_kernel
def _store_state(j, st, z, mg, ctx, h2o_wt, co2_ppm_bulk, s_ppm, x_out, melt_out, phase_out):
    """Gas fraction of state j; writes its melt H2O wt%, CO2 ppm, S ppm (the bulk
    where no gas, at most the sulfur cap) and NaN gas mole fractions where there is
    no gas, and which sulfur phase (none, sulfide, anhydrite) holds excess S. Takes the
    whole output arrays: a row view made by the caller would cost reference counts."""
    melt_out[j, 0] = mg[3] * M_H2O * 100.0 / 2.0
    melt_out[j, 1] = mg[4] * M_CO2 * 1e6
    melt_out[j, 2] = mg[5] * M_S * 1e6
    phase_out[j] = SULFUR_PHASE_NONE
    capped = ctx[_C_SK] > 0.0 and math.isfinite(ctx[_C_LNRMAX])
    if st == STATUS_GAS and capped and z[2] >= 2.0 * ctx[_C_LNRMAX] - 1e-9:
        phase_out[j] = int(ctx[_C_CAPKIND])
    if st != STATUS_GAS:
        for i in range(10):
            x_out[j, i] = math.nan
        if st == STATUS_NO_GAS:
            melt_out[j, 0] = h2o_wt
            melt_out[j, 1] = co2_ppm_bulk
            melt_out[j, 2] = s_ppm
            if capped:
                _caps_at_water(ctx, 0.5 * ctx[_C_NH])  # no gas: the melt holds all the H2O
                cap_ppm = ctx[_C_SK] * math.exp(ctx[_C_LNRMAX]) * M_S * 1e6
                if s_ppm > cap_ppm:
                    melt_out[j, 2] = cap_ppm
                    phase_out[j] = int(ctx[_C_CAPKIND])
    return z[3] if st == STATUS_GAS else 0.0


@_kernel
def _same_magma(j, temperature_k, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s):
    """State j is the magma of state j - 1 (at another pressure): a pressure sweep."""
    i = j - 1
    return (temperature_k[j] == temperature_k[i] and dfmq[j] == dfmq[i] and h2o_wt[j] == h2o_wt[i]
            and co2_ppm_bulk[j] == co2_ppm_bulk[i] and s_ppm[j] == s_ppm[i]
            and (d_s[j] == d_s[i] or (math.isnan(d_s[j]) and math.isnan(d_s[i]))))


@_kernel
def _warm_sweep_step(ctx, dfmq_prev, h_law, h_par, c_law, c_par, ln_k, z, x, mg, work):
    """Closed-system, evolving-redox state started from the solution of the same magma at a
    neighbouring pressure (z still holds it): its gas and its final dFMQ. A pressure
    sweep (the window model's 48 solves per draw) otherwise starts every state from the
    prior's dFMQ and spends about half its time on redox steps back to where the last
    state ended (measured: 6.3 us per state against 3.4 buffered). Only a gas state is
    taken; anything else is solved again from the cold start by the caller, so gas or no
    gas is always decided as before. The root is the same (the Jacobian's law
    elasticities only steer the iteration); it differs from the cold start's by the
    solver tolerances."""
    _set_dfmq(ctx, dfmq_prev, ln_k)
    return solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, False, work, ln_k)


@njit(cache=True, error_model='numpy')
def _degas_batch(temperature_k, pressure_bar, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s, open_system,
                 n_open_steps, want_psat, ideal, h_law, h_par, c_law, c_par, ln_cs_a, ln_cs_b_k,
                 s_caps, redox_par, x_out, g_out, melt_out, psat_out, status_out, cap_out,
                 phase_out, dfmq_out):
    ctx = np.empty(CTX_SIZE)
    ln_k = np.empty(6)
    ln_phi = np.empty(10)
    z = np.empty(4)
    mg = np.empty(MG_SIZE)
    work = np.empty(WORK_SIZE)
    ctx[_C_CSA] = ln_cs_a
    ctx[_C_CSB] = ln_cs_b_k
    for i in range(5):  # SCSS (A, B, per bar) and SCAS (A, B) terms, see sulfur_laws
        ctx[_C_SCSS_A + i] = s_caps[i]
    ctx[_C_SCSS_W] = s_caps[5]  # the SCSS law's H2O term and the dry melt's molar mass
    ctx[_C_MDRY] = s_caps[6]
    for j in range(temperature_k.shape[0]):
        # a batch's states mostly share one temperature: ln K is then kept from state j - 1
        _fill_bulk_context(ctx, temperature_k[j], pressure_bar[j], dfmq[j], h2o_wt[j],
                           co2_ppm_bulk[j], s_ppm[j], d_s[j], ideal, ln_k, ln_phi, redox_par,
                           j > 0 and temperature_k[j] == temperature_k[j - 1])
        psat = math.nan
        if want_psat or open_system:
            # works on a copy: ctx still describes the state at P afterwards
            psat = saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi, work)
        psat_out[j] = psat
        cap_out[j] = open_system and math.isinf(psat)
        st = STATUS_FAILED
        warm = (j > 0 and not open_system and redox_par[0] > 0.5 and status_out[j - 1] == STATUS_GAS
                and _same_magma(j, temperature_k, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s))
        if warm:
            d_start = dfmq_out[j - 1]
            if (j > 1 and status_out[j - 2] == STATUS_GAS and pressure_bar[j - 1] != pressure_bar[j - 2]
                    and _same_magma(j - 1, temperature_k, dfmq, h2o_wt, co2_ppm_bulk, s_ppm, d_s)):
                # the sweep's dFMQ extrapolated in ln P from its last two states (a secant
                # predictor, as in numerical continuation): one redox step fewer, same root
                d_start += (dfmq_out[j - 1] - dfmq_out[j - 2]) * (
                    math.log(pressure_bar[j] / pressure_bar[j - 1])
                    / math.log(pressure_bar[j - 1] / pressure_bar[j - 2]))
            st = _warm_sweep_step(ctx, d_start, h_law, h_par, c_law, c_par, ln_k, z,
                                  x_out[j], mg, work)
            if st != STATUS_GAS:  # the cold start decides, as for any other state
                _fill_bulk_context(ctx, temperature_k[j], pressure_bar[j], dfmq[j], h2o_wt[j],
                                   co2_ppm_bulk[j], s_ppm[j], d_s[j], ideal, ln_k, ln_phi, redox_par,
                                   True)
        if st != STATUS_GAS:
            st = _degas_state(ctx, psat, pressure_bar[j], open_system, n_open_steps, h_law, h_par,
                              c_law, c_par, ideal, ln_k, ln_phi, z, x_out[j], mg, work)
        status_out[j] = st
        g_out[j] = _store_state(j, st, z, mg, ctx, h2o_wt[j], co2_ppm_bulk[j], s_ppm[j], x_out,
                                melt_out, phase_out)
        if st == STATUS_GAS:
            dfmq_out[j] = ctx[_C_DFMQ]
        elif st == STATUS_NO_GAS:
            dfmq_out[j] = gas_free_dfmq(ctx, ln_k)
        else:
            dfmq_out[j] = math.nan


class DegassingResult:
    """Arrays over states: gas mole fractions (n, 10) in SPECIES order (NaN where
    no gas), gas mass fraction, melt H2O (wt%), CO2 (ppm), S (ppm), saturation
    pressure (bar; NaN if not computed, inf if above P_SAT_CAP_BAR) and status codes.

    closed_above_cap (bool): open style only, True where the magma is still
    gas-saturated at P_SAT_CAP_BAR and its open path starts at the cap from the
    closed-system gas there (see the module doc); always False in the closed style.
    """

    def __init__(self, gas, gas_wt_fraction, melt, saturation_pressure_bar, status,
                 closed_above_cap, sulfur_phase=None, dfmq_at_pressure=None):
        self.gas = gas
        self.gas_wt_fraction = gas_wt_fraction
        self.melt_h2o_wt = melt[:, 0]
        self.melt_co2_ppm = melt[:, 1]
        self.melt_s_ppm = melt[:, 2]
        self.saturation_pressure_bar = saturation_pressure_bar
        self.status = status
        self.closed_above_cap = closed_above_cap
        # 0 none, 1 sulfide liquid, 2 anhydrite holds the S above the melt's cap
        self.sulfur_phase = (np.zeros(status.shape, dtype=np.int64) if sulfur_phase is None
                             else sulfur_phase)
        # the melt's dFMQ at P: evolving redox (without gas: melt and sulfur phase alone
        # hold the budget), the prior's dFMQ where buffered; NaN where the solve failed
        self.dfmq_at_pressure = dfmq_at_pressure


def degas(temperature_c, pressure_bar, dfmq, h2o_wt, co2_ppm, s_ppm, s_partition, h2o_law, co2_law,
          style="closed", eos="real", saturation=True, open_steps=20, sulfide_capacity=None,
          sulfur_caps=None, redox=None):
    """Melt-gas equilibrium for arrays of states.

    h2o_law, co2_law: (law_id, params) from solubility_registry. s_partition:
    fluid/melt S partition coefficient D_S (mass fraction in gas / in melt).
    sulfide_capacity: None, or (A, B) with ln C_S = A + B/T(K): melt S from the
    sulfide capacity and the Jugo et al. (2010) sulfate fraction instead of D_S
    (s_partition is then ignored). sulfur_caps: None, or the seven terms
    (SCSS A, B, C per bar; SCAS A, B; SCSS H2O coefficient, dry molar mass) of
    sulfur_laws.prepare_sulfur_caps (NaN: no cap of that kind, no H2O term); used with sulfide_capacity only. redox: None (buffered: fO2 at
    dfmq at every pressure) or (Kress-Carmichael composition term, FeOt wt%) of the melt
    (iron_redox.kc91_composition_term): evolving redox, dfmq is the magma's before
    degassing and fO2 follows the electron balance of redox_balance.py.
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
    phase = np.empty(n, dtype=np.int64)
    d_at_p = np.empty(n)
    redox_par = np.zeros(3) if redox is None else np.array([1.0, float(redox[0]), float(redox[1])])
    caps = np.full(7, math.nan) if sulfur_caps is None else np.ascontiguousarray(sulfur_caps, dtype=float)
    _degas_batch(t_c + 273.15, p, d, h2o, co2, s, ds, style == "open", int(open_steps),
                 bool(saturation), eos == "ideal", int(h2o_law[0]),
                 np.ascontiguousarray(h2o_law[1], dtype=float), int(co2_law[0]),
                 np.ascontiguousarray(co2_law[1], dtype=float),
                 float(sulfide_capacity[0]) if sulfide_capacity is not None else math.nan,
                 float(sulfide_capacity[1]) if sulfide_capacity is not None else 0.0,
                 caps, redox_par, gas, g, melt, psat, status, cap, phase, d_at_p)
    return DegassingResult(gas, g, melt, psat, status, cap, phase, d_at_p)
