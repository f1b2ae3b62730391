"""Evolving redox: the electron (oxygen) balance over melt iron, melt sulfur and gas.

Checks recompute the balance with independent Python code (iron_redox for Kress and
Carmichael 1991, Jugo et al. 2010 for sulfate, the gas species' oxidation states),
so they test the compiled kernels against their definition.
"""
import numpy as np
import pytest

from ventsource.chemistry.buffers import log10_fo2_fmq
from ventsource.chemistry.species import ELEMENT_MATRIX, MOLAR_MASS_G_MOL, SPECIES
from ventsource.magma import degassing, iron_redox
from ventsource.magma import sulfur_laws as laws
from ventsource.magma.melt import validate_melt
from ventsource.magma.solubility_registry import prepare_co2, prepare_h2o
from ventsource.magma.sulfur_melt import sulfate_fraction_jugo2010

ARC_BASALT = {"SiO2": 50.5, "TiO2": 0.9, "Al2O3": 17.5, "FeOt": 9.5, "MgO": 7.0, "CaO": 10.5,
              "Na2O": 2.8, "K2O": 0.8, "MnO": 0.18, "P2O5": 0.2}
# electrons per molecule relative to H2O, CO2, H2S (oxidation states: H +1, C +4, S -2,
# O -2; common practice, no source)
ELECTRONS = {"H2O": 0, "H2": -2, "O2": 4, "CO2": 0, "CO": -2, "CH4": -8, "SO2": 6, "H2S": 0,
             "S2": 4, "COS": 0}
T_C, H2O_WT, CO2_PPM = 1150.0, 4.0, 3000.0
PRESSURES = np.geomspace(3000.0, 1.0, 9)


def _run(s_ppm, dfmq, style="closed", pressure_bar=PRESSURES, open_steps=20):
    h = prepare_h2o("moore1998", ARC_BASALT)
    c = prepare_co2("shishkina2014", ARC_BASALT)
    redox = (iron_redox.kc91_composition_term(ARC_BASALT), validate_melt(ARC_BASALT)["FeOt"])
    return degassing.degas(T_C, pressure_bar, dfmq, H2O_WT, CO2_PPM, s_ppm, np.nan, h, c,
                           style=style, sulfide_capacity=laws.sulfide_capacity_oneill2021(ARC_BASALT),
                           sulfur_caps=laws.prepare_sulfur_caps(ARC_BASALT), redox=redox,
                           open_steps=open_steps)


def _n_fe(s_ppm):
    return validate_melt(ARC_BASALT)["FeOt"] / 100.0 / 71.844 * (1 - H2O_WT / 100 - (CO2_PPM + s_ppm) * 1e-6)


def _reference_budget(s_ppm, dfmq):
    """The undegassed magma at 1 bar: Fe3+ by Kress and Carmichael, sulfate by Jugo,
    the S above SCSS in sulfide (no electrons)."""
    t_k = T_C + 273.15
    fe3 = iron_redox.fe3_fraction(ARC_BASALT, t_k, 1.0, log10_fo2_fmq(t_k, 1.0) + dfmq)
    x6 = sulfate_fraction_jugo2010(dfmq)
    sulfide_cap = laws.scss_ppm(ARC_BASALT, t_k, 1.0, H2O_WT) / (1 - x6)  # all H2O dissolved
    cap = min(sulfide_cap, laws.scas_ppm(t_k) / x6)
    assert s_ppm <= cap or cap == sulfide_cap  # the cases here hold no anhydrite
    dissolved = min(s_ppm, cap) * 1e-6 / 32.06
    return _n_fe(s_ppm) * fe3 + 8 * x6 * dissolved


def _budget(res, s_ppm, pressure_bar):
    t_k = T_C + 273.15
    d = res.dfmq_at_pressure
    fe3 = iron_redox.fe3_fraction(ARC_BASALT, t_k, pressure_bar, log10_fo2_fmq(t_k, pressure_bar) + d)
    g = res.gas_wt_fraction
    x = res.gas
    e_gas = (x @ np.array([ELECTRONS[s] for s in SPECIES], float)) / (x @ MOLAR_MASS_G_MOL)
    melt_sulfate = sulfate_fraction_jugo2010(d) * res.melt_s_ppm * 1e-6 / 32.06
    return _n_fe(s_ppm) * fe3 + 8 * (1 - g) * melt_sulfate + g * e_gas


@pytest.mark.parametrize("s_ppm,dfmq", [(1000.0, 0.0), (1000.0, 1.0), (1000.0, 2.0), (3000.0, 0.0)])
def test_closed_path_conserves_electrons_h_c_s(s_ppm, dfmq):
    # closed system from 3 kbar to 1 bar: the redox budget of melt + gas stays that of
    # the undegassed magma (to 1e-9), and H, C (and S without a sulfur phase) balance
    res = _run(s_ppm, dfmq)
    assert np.all(res.status == 0)
    e0 = _reference_budget(s_ppm, dfmq)
    np.testing.assert_allclose(_budget(res, s_ppm, PRESSURES), e0, rtol=1e-9)
    x, g = res.gas, res.gas_wt_fraction
    per_gram = (x @ ELEMENT_MATRIX) / (x @ MOLAR_MASS_G_MOL)[:, None]
    h_back = g * per_gram[:, 0] + (1 - g) * 2 * res.melt_h2o_wt / 100 / 18.015
    c_back = g * per_gram[:, 1] + (1 - g) * res.melt_co2_ppm * 1e-6 / 44.009
    s_back = g * per_gram[:, 3] + (1 - g) * res.melt_s_ppm * 1e-6 / 32.06
    np.testing.assert_allclose(h_back, 2 * H2O_WT / 100 / 18.015, rtol=1e-9)
    np.testing.assert_allclose(c_back, CO2_PPM * 1e-6 / 44.009, rtol=1e-9)
    free = res.sulfur_phase == 0
    np.testing.assert_allclose(s_back[free], s_ppm * 1e-6 / 32.06, rtol=1e-9)
    assert np.all(s_back[~free] < s_ppm * 1e-6 / 32.06)


def test_direction_of_the_closed_system_drift():
    # Burgisser and Scaillet (2007), Nature 445:194 (from memory): on closed-system ascent
    # a reduced arc magma becomes more reduced (sulfide S leaves as SO2, taking
    # oxygen from melt Fe3+) and an oxidised one more oxidised (sulfate leaves as
    # SO2, giving oxygen back), by tenths of a log unit to over one at low pressure
    low = _run(1000.0, 0.0).dfmq_at_pressure
    high = _run(1000.0, 2.0).dfmq_at_pressure
    assert -2.0 < low[-1] - 0.0 < -0.2
    assert 0.2 < high[-1] - 2.0 < 2.0
    # the drift grows as the gas grows toward low pressure (common practice, no source)
    assert low[-1] < low[len(low) // 2] and high[-1] > high[len(high) // 2]


def test_buffered_option_keeps_the_prior_offset():
    h = prepare_h2o("moore1998", ARC_BASALT)
    c = prepare_co2("shishkina2014", ARC_BASALT)
    res = degassing.degas(T_C, PRESSURES, 1.0, H2O_WT, CO2_PPM, 1000.0, np.nan, h, c,
                          sulfide_capacity=laws.sulfide_capacity_oneill2021(ARC_BASALT),
                          sulfur_caps=laws.prepare_sulfur_caps(ARC_BASALT))
    np.testing.assert_array_equal(res.dfmq_at_pressure, 1.0)


def test_open_path_passes_the_budget_on():
    # open system in two steps (open_path.py): the gas made at P1 = sqrt(Psat P) leaves
    # with its redox budget and H, C, S; the melt left (per gram) starts the step to P.
    # Recomputed here from the closed state at P1: E, H and C of the final state match.
    p = np.array([200.0])
    res = _run(1000.0, 1.0, "open", p, open_steps=2)
    assert res.status[0] == 0
    p1 = np.array([np.sqrt(res.saturation_pressure_bar[0] * p[0])])
    first = _run(1000.0, 1.0, "closed", p1)
    assert first.sulfur_phase[0] == 0
    g1, x1 = first.gas_wt_fraction[0], first.gas[0]
    e_gas1 = (x1 @ np.array([ELECTRONS[s] for s in SPECIES], float)) / (x1 @ MOLAR_MASS_G_MOL)
    e_left = (_reference_budget(1000.0, 1.0) - g1 * e_gas1) / (1 - g1)
    t_k = T_C + 273.15
    d = res.dfmq_at_pressure[0]
    fe3 = iron_redox.fe3_fraction(ARC_BASALT, t_k, p[0], log10_fo2_fmq(t_k, p[0]) + d)
    g, x = res.gas_wt_fraction[0], res.gas[0]
    e_gas = (x @ np.array([ELECTRONS[s] for s in SPECIES], float)) / (x @ MOLAR_MASS_G_MOL)
    sulfate = sulfate_fraction_jugo2010(d) * res.melt_s_ppm[0] * 1e-6 / 32.06
    e_end = _n_fe(1000.0) / (1 - g1) * fe3 + 8 * (1 - g) * sulfate + g * e_gas
    assert e_end == pytest.approx(e_left, rel=1e-9)
    per_gram = (x @ ELEMENT_MATRIX) / (x @ MOLAR_MASS_G_MOL)
    h_left = 2 * first.melt_h2o_wt[0] / 100 / 18.015
    c_left = first.melt_co2_ppm[0] * 1e-6 / 44.009
    assert g * per_gram[0] + (1 - g) * 2 * res.melt_h2o_wt[0] / 100 / 18.015 == pytest.approx(h_left, rel=1e-9)
    assert g * per_gram[1] + (1 - g) * res.melt_co2_ppm[0] * 1e-6 / 44.009 == pytest.approx(c_left, rel=1e-9)


def test_gas_free_magma_holds_the_budget_in_its_melt():
    # above the saturation pressure there is no gas: iron and melt sulfate alone hold the
    # undegassed magma's budget (Kress and Carmichael 1991 at that pressure; Jugo 2010)
    p = np.array([4900.0])
    h = prepare_h2o("moore1998", ARC_BASALT)
    c = prepare_co2("shishkina2014", ARC_BASALT)
    redox = (iron_redox.kc91_composition_term(ARC_BASALT), validate_melt(ARC_BASALT)["FeOt"])
    res = degassing.degas(T_C, p, 1.0, 2.0, 600.0, 800.0, np.nan, h, c,
                          sulfide_capacity=laws.sulfide_capacity_oneill2021(ARC_BASALT),
                          sulfur_caps=laws.prepare_sulfur_caps(ARC_BASALT), redox=redox)
    assert res.status[0] == 1 and res.sulfur_phase[0] == 0
    t_k = T_C + 273.15
    d = res.dfmq_at_pressure[0]
    n_fe = validate_melt(ARC_BASALT)["FeOt"] / 100.0 / 71.844 * (1 - 0.02 - 1400e-6)
    fe3 = iron_redox.fe3_fraction(ARC_BASALT, t_k, p[0], log10_fo2_fmq(t_k, p[0]) + d)
    e_at_p = n_fe * fe3 + 8 * sulfate_fraction_jugo2010(d) * 800e-6 / 32.06
    fe3_ref = iron_redox.fe3_fraction(ARC_BASALT, t_k, 1.0, log10_fo2_fmq(t_k, 1.0) + 1.0)
    e_ref = n_fe * fe3_ref + 8 * sulfate_fraction_jugo2010(1.0) * 800e-6 / 32.06
    assert e_at_p == pytest.approx(e_ref, rel=1e-9)
    assert 0.0 < d - 1.0 < 0.3  # the 1 bar reference sits below the deep melt's dFMQ


def _open_path_steps(s_ppm, dfmq, n_steps=20):
    """An open path from 3 kbar (below the saturation pressure: the magma's gas there is
    the first batch removed) to 1 bar, stepped here from the compiled kernels (the calls
    open_path.py makes), keeping every removed gas so the balances can be summed in Python."""
    from ventsource.magma.degassing_context import (
        _C_CSA, _C_CSB, _C_MDRY, _C_SCSS_A, _C_SCSS_W, CTX_SIZE, MG_SIZE, WORK_SIZE, _set_pressure)
    from ventsource.magma.open_path import _remove_gas
    from ventsource.magma.redox_balance import remove_gas_redox, solve_with_redox
    from ventsource.magma.saturation import saturation_pressure
    h_law, h_par = prepare_h2o("moore1998", ARC_BASALT)
    c_law, c_par = prepare_co2("shishkina2014", ARC_BASALT)
    ctx, ln_k, ln_phi = np.empty(CTX_SIZE), np.empty(6), np.empty(10)
    z, x, mg, work = np.empty(4), np.empty(10), np.empty(MG_SIZE), np.empty(WORK_SIZE)
    ctx[_C_CSA], ctx[_C_CSB] = laws.sulfide_capacity_oneill2021(ARC_BASALT)
    caps = laws.prepare_sulfur_caps(ARC_BASALT)
    ctx[_C_SCSS_A:_C_SCSS_A + 5] = caps[:5]
    ctx[_C_SCSS_W], ctx[_C_MDRY] = caps[5:]
    redox_par = np.array([1.0, iron_redox.kc91_composition_term(ARC_BASALT),
                          validate_melt(ARC_BASALT)["FeOt"]])
    degassing._fill_bulk_context(ctx, T_C + 273.15, 1.0, dfmq, H2O_WT, CO2_PPM, s_ppm, np.nan,
                                 False, ln_k, ln_phi, redox_par)
    psat = saturation_pressure(ctx, h_law, h_par, c_law, c_par, False, ln_k, ln_phi, work)
    steps = []
    for p in np.geomspace(3000.0, 1.0, n_steps):
        _set_pressure(ctx, p, ln_k, ln_phi, False)
        st = solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
        assert st == 0
        steps.append(dict(p=p, g=z[3], x=x.copy(), mg=mg.copy(), dfmq=ctx[26],
                          phase=bool(z[2] >= 2.0 * ctx[48] - 1e-9)))
        _remove_gas(ctx, mg, z)
        remove_gas_redox(ctx, z, x)
    return psat, steps


@pytest.mark.parametrize("s_ppm,dfmq", [(1000.0, 0.0), (1000.0, 1.5)])
def test_open_path_to_one_bar_conserves_electrons_h_c_s(s_ppm, dfmq):
    # open system from 3 kbar (saturation at 5-8 kbar here) to 1 bar in 20 steps: the
    # gases removed on the way plus the last melt + gas hold the undegassed magma's H, C,
    # S and redox budget (to 1e-9). Budgets recomputed here: Kress and Carmichael (1991)
    # via iron_redox, Jugo et al. (2010) sulfate, oxidation states of the gas species
    # (common practice, no source)
    psat, steps = _open_path_steps(s_ppm, dfmq)
    assert 3000.0 < psat < 20000.0
    assert not any(s["phase"] for s in steps)
    t_k = T_C + 273.15
    e_mol = np.array([ELECTRONS[s] for s in SPECIES], float)
    left = 1.0                      # grams of the original magma still in the system
    removed = np.zeros(4)           # H, C, S, electrons taken by the gases, per g of magma
    for k, s in enumerate(steps):
        x, g, mg = s["x"], s["g"], s["mg"]
        per_gram = (x @ ELEMENT_MATRIX) / (x @ MOLAR_MASS_G_MOL)
        gas = np.array([per_gram[0], per_gram[1], per_gram[3], (x @ e_mol) / (x @ MOLAR_MASS_G_MOL)])
        fe3 = iron_redox.fe3_fraction(ARC_BASALT, t_k, s["p"], log10_fo2_fmq(t_k, s["p"]) + s["dfmq"])
        melt = np.array([mg[3], mg[4], mg[5], 8 * sulfate_fraction_jugo2010(s["dfmq"]) * mg[5]])
        here = removed + left * (g * gas + (1 - g) * melt)
        here[3] += _n_fe(s_ppm) * fe3  # the iron never leaves the magma
        bulk = np.array([2 * H2O_WT / 100 / 18.015, CO2_PPM * 1e-6 / 44.009, s_ppm * 1e-6 / 32.06,
                         _reference_budget(s_ppm, dfmq)])
        np.testing.assert_allclose(here, bulk, rtol=1e-9, err_msg=f"step {k}, {s['p']:.3g} bar")
        removed += left * g * gas
        left *= 1 - g
    # the open path ends far more degassed than the closed one (common practice, no source)
    assert steps[-1]["mg"][4] < 1e-3 * CO2_PPM * 1e-6 / 44.009


def test_closed_path_with_anhydrite_conserves_electrons_and_sulfur():
    # an oxidised, sulfur-rich magma holds its excess S as anhydrite, which keeps its
    # sulfate (8 electrons per S): melt + gas + anhydrite keep the budget of the undegassed
    # magma, whose own excess S sits in anhydrite at 1 bar (Jugo et al. 2010 split; SCAS of
    # sulfur_laws); sulfur in anhydrite = bulk - gas - melt >= 0
    s_ppm, dfmq = 20000.0, 2.0
    res = _run(s_ppm, dfmq)
    assert np.all(res.status == 0) and res.sulfur_phase[0] == 2
    x, g = res.gas, res.gas_wt_fraction
    per_gram = (x @ ELEMENT_MATRIX) / (x @ MOLAR_MASS_G_MOL)[:, None]
    n_s = s_ppm * 1e-6 / 32.06
    anhydrite = n_s - g * per_gram[:, 3] - (1 - g) * res.melt_s_ppm * 1e-6 / 32.06
    # deep, anhydrite holds the excess; at low pressure the gas has taken it back (the
    # closed system is reversible): no phase, bulk S = gas + melt
    with_phase = res.sulfur_phase == 2
    assert np.all(anhydrite[with_phase] > 1e-3 * n_s)
    np.testing.assert_allclose(anhydrite[~with_phase], 0.0, atol=1e-9 * n_s)
    t_k = T_C + 273.15
    x6 = sulfate_fraction_jugo2010(dfmq)
    cap0 = min(laws.scss_ppm(ARC_BASALT, t_k, 1.0, H2O_WT) / (1 - x6), laws.scas_ppm(t_k) / x6)
    fe3_0 = iron_redox.fe3_fraction(ARC_BASALT, t_k, 1.0, log10_fo2_fmq(t_k, 1.0) + dfmq)
    e0 = _n_fe(s_ppm) * fe3_0 + 8 * x6 * cap0 * 1e-6 / 32.06 + 8 * (n_s - cap0 * 1e-6 / 32.06)
    np.testing.assert_allclose(_budget(res, s_ppm, PRESSURES) + 8 * anhydrite, e0, rtol=1e-9)
    h_back = g * per_gram[:, 0] + (1 - g) * 2 * res.melt_h2o_wt / 100 / 18.015
    np.testing.assert_allclose(h_back, 2 * H2O_WT / 100 / 18.015, rtol=1e-9)
