"""Melt-gas equilibrium (closed and open system) against element conservation,
limiting cases and facts of the trade."""
import glob
import os

import numpy as np
import pytest

from ventsource.magma import degassing
from ventsource.magma import solubility_co2, solubility_h2o
from ventsource.chemistry.buffers import log10_fo2_from_dfmq
from ventsource.forward.model import ForwardModel
from ventsource.inference.priors import load_prior_file
from ventsource.magma.solubility_registry import prepare_co2
from ventsource.chemistry.speciation import speciate, STATUS_OK
from ventsource.chemistry.species import ELEMENT_MATRIX, INDEX, MOLAR_MASS_G_MOL

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PRIOR_FILES = sorted(glob.glob(os.path.join(ROOT, "priors", "*.toml")))
ARC_BASALT = os.path.join(ROOT, "priors", "arc_basalt.toml")

# molar masses used by degassing.py for bulk and melt contents
M_H2O, M_CO2, M_S = 18.015, 44.009, 32.06


def _prior_states(path, n, seed):
    spec = load_prior_file(path)
    model = ForwardModel(spec)
    theta = spec.full(spec.sample(np.random.default_rng(seed), n))
    index = {name: i for i, name in enumerate(spec.parameter_names)}
    cols = {name: theta[:, i] for name, i in index.items()}
    return model, cols


def _degas_cols(model, cols, style, saturation=False):
    d_s = cols.get("s_partition", np.full(cols["s_ppm"].shape, np.nan))
    return degassing.degas(cols["temperature_c"], cols["pressure_bar"], cols["dfmq"],
                           cols["h2o_wt"], cols["co2_ppm"], cols["s_ppm"], d_s,
                           model.h2o_law, model.co2_law, style=style, eos=model.eos,
                           saturation=saturation, sulfide_capacity=model.sulfide_capacity,
                           sulfur_caps=model.sulfur_caps)


def _bulk_hcs(h2o_wt, co2_ppm, s_ppm):
    """H, C, S moles per gram of magma (conventions of degassing.py)."""
    return np.c_[2.0 * np.asarray(h2o_wt) / 100.0 / M_H2O,
                 np.asarray(co2_ppm) * 1e-6 / M_CO2, np.asarray(s_ppm) * 1e-6 / M_S]


def _closure(res, h2o_wt, co2_ppm, s_ppm):
    """Relative misfit of g*n_gas + (1-g)*n_melt against the bulk, for rows with gas."""
    ok = res.status == degassing.STATUS_GAS
    x = res.gas[ok]
    n_gas = (x @ ELEMENT_MATRIX)[:, [0, 1, 3]] / (x @ MOLAR_MASS_G_MOL)[:, None]
    n_melt = _bulk_hcs(res.melt_h2o_wt[ok], res.melt_co2_ppm[ok], res.melt_s_ppm[ok])
    g = res.gas_wt_fraction[ok][:, None]
    rebuilt = g * n_gas + (1.0 - g) * n_melt
    bulk = _bulk_hcs(h2o_wt[ok], co2_ppm[ok], s_ppm[ok])
    rel = rebuilt / bulk - 1.0
    # where a sulfide or anhydrite phase holds S, gas + melt carry less than the bulk
    phase = res.sulfur_phase[ok] > 0
    assert np.all(rel[phase, 2] < 0.0)
    rel[phase, 2] = 0.0
    return np.abs(rel)


def _basalt_laws(k=0.095, n=0.5):
    melt = load_prior_file(ARC_BASALT).melt_oxides_wt
    return (solubility_h2o.LAW_POWER, solubility_h2o.prepare_power(melt, k, n)), \
        prepare_co2("shishkina2014", melt)


def test_every_shipped_prior_is_checked():
    assert len(PRIOR_FILES) >= 5


@pytest.mark.parametrize("path", PRIOR_FILES, ids=os.path.basename)
def test_closed_system_conserves_h_c_s(path):
    # Element conservation between melt and gas (definition of a closed system;
    # bookkeeping conventions of degassing.py), 250 prior states per file.
    model, cols = _prior_states(path, 250, seed=11)
    res = _degas_cols(model, cols, "closed")
    assert set(np.unique(res.status)) <= {0, 1, 2}
    ok = res.status == degassing.STATUS_GAS
    assert ok.sum() >= 150
    rel = _closure(res, cols["h2o_wt"], cols["co2_ppm"], cols["s_ppm"])
    assert rel.max() < 1e-8, f"worst closure {rel.max():.3e}"
    # gas is a physical mixture and g is a mass fraction in (0, 1)
    np.testing.assert_allclose(res.gas[ok].sum(axis=1), 1.0, rtol=1e-12)
    assert np.all(res.gas[ok] >= 0.0)
    assert np.all((res.gas_wt_fraction[ok] > 0.0) & (res.gas_wt_fraction[ok] < 1.0))
    # no gas: gas row NaN, the melt keeps the whole bulk
    none = res.status != degassing.STATUS_GAS
    assert np.all(np.isnan(res.gas[none]))
    nogas = res.status == degassing.STATUS_NO_GAS
    np.testing.assert_array_equal(res.melt_h2o_wt[nogas], cols["h2o_wt"][nogas])
    np.testing.assert_array_equal(res.melt_co2_ppm[nogas], cols["co2_ppm"][nogas])
    # solver failures must stay rare (see the undersaturated-failure test below)
    assert np.mean(res.status == degassing.STATUS_FAILED) < 0.02


@pytest.mark.parametrize("path", PRIOR_FILES, ids=os.path.basename)
def test_open_system_status_and_ratios(path):
    # Open system: the balance holds per step only, so check codes and outputs.
    model, cols = _prior_states(path, 40, seed=12)
    res = _degas_cols(model, cols, "open")
    assert set(np.unique(res.status)) <= {0, 1, 2}
    ok = res.status == degassing.STATUS_GAS
    assert ok.sum() >= 10
    assert np.all(np.isfinite(res.gas[ok]))
    np.testing.assert_allclose(res.gas[ok].sum(axis=1), 1.0, rtol=1e-12)
    assert np.all(np.isnan(res.gas[~ok]))
    so2_co2 = res.gas[ok, INDEX["SO2"]] / res.gas[ok, INDEX["CO2"]]
    h2o_co2 = res.gas[ok, INDEX["H2O"]] / res.gas[ok, INDEX["CO2"]]
    assert np.all(np.isfinite(h2o_co2)) and np.all(np.isfinite(so2_co2))


@pytest.mark.parametrize("path", [os.path.join(ROOT, "priors", "rhyolite_silicic.toml")],
                         ids=os.path.basename)
def test_open_system_gas_has_a_saturation_pressure(path):
    # An open-system gas is made on a path from the saturation pressure down to
    # P, so every state with gas needs a finite saturation pressure >= P.
    model, cols = _prior_states(path, 40, seed=12)
    res = _degas_cols(model, cols, "open")
    ok = res.status == degassing.STATUS_GAS
    assert np.all(cols["pressure_bar"][ok] <= res.saturation_pressure_bar[ok] * (1 + 1e-6))


def test_undersaturated_rhyolite_reports_no_gas():
    # Liu et al. (2005) H2O law: ~5.8 wt% dissolves at 190 MPa, 850 C (rhyolite;
    # value noted in solubility_registry.LAW_NOTES), so 3.1 wt% H2O at 1900 bar is
    # undersaturated: no gas, status 1.
    spec = load_prior_file(os.path.join(ROOT, "priors", "rhyolite_silicic.toml"))
    model = ForwardModel(spec)
    res = degassing.degas(820.0, 1900.0, 0.32, 3.143, 54.2, 277.4, 1783.0,
                          model.h2o_law, model.co2_law)
    assert res.status[0] == degassing.STATUS_NO_GAS
    assert np.isfinite(res.saturation_pressure_bar[0])


def test_greater_pressure_gives_co2_richer_gas():
    # Common practice, no source: CO2 is far less soluble than H2O and S, so the
    # first (deep) gas is CO2-rich; CO2/SO2 and CO2/H2O fall as pressure drops.
    h2o_law, co2_law = _basalt_laws()
    p = np.array([50.0, 200.0, 500.0, 1000.0, 2000.0])
    res = degassing.degas(1150.0, p, 1.0, 4.0, 3000.0, 2000.0, 100.0, h2o_law, co2_law)
    assert np.all(res.status == 0)
    co2_so2 = res.gas[:, INDEX["CO2"]] / res.gas[:, INDEX["SO2"]]
    co2_h2o = res.gas[:, INDEX["CO2"]] / res.gas[:, INDEX["H2O"]]
    assert np.all(np.diff(co2_so2) > 0)
    assert np.all(np.diff(co2_h2o) > 0)


@pytest.mark.parametrize("eos", ["real", "ideal"])
def test_insoluble_limit_equals_speciated_bulk(eos):
    # Limit of no melt solubility (common practice, no source): every H, C and S
    # atom is in the gas, so the gas is the speciated bulk at the same T, P, fO2.
    h2o_law = (solubility_h2o.LAW_INSOLUBLE, np.zeros(1))
    co2_law = (solubility_co2.LAW_INSOLUBLE, np.zeros(1))
    t_c = np.array([900.0, 1100.0, 1200.0, 1000.0])
    p = np.array([1.0, 50.0, 500.0, 2000.0])
    dfmq = np.array([-1.0, 0.0, 1.5, 2.5])
    h2o, co2, s = np.array([2.0, 4.0, 1.0, 5.0]), np.array([800.0, 3000.0, 100.0, 6000.0]), \
        np.array([1500.0, 300.0, 2500.0, 800.0])
    res = degassing.degas(t_c, p, dfmq, h2o, co2, s, 1e12, h2o_law, co2_law, eos=eos,
                          saturation=False)
    assert np.all(res.status == 0)
    bulk = _bulk_hcs(h2o, co2, s)
    t_k = t_c + 273.15
    ref = speciate(t_k, p, log10_fo2_from_dfmq(dfmq, t_k, p), bulk[:, 0], bulk[:, 1], bulk[:, 2],
                   eos=eos)
    assert np.all(ref.status == STATUS_OK)
    np.testing.assert_allclose(res.gas, ref.mole_fractions, rtol=1e-8, atol=1e-14)
    # melt keeps nothing (D_S = 1e12 leaves < 1e-6 ppm S)
    np.testing.assert_array_equal(res.melt_h2o_wt, 0.0)
    assert np.all(res.melt_s_ppm < 1e-6)


def test_saturation_pressure_of_power_law_basalt():
    # Power law definition: 3.0 wt% = 0.095 * sqrt(fH2O) -> fH2O ~ 997 bar
    # (k = 0.095 from memory: ~3 wt% H2O in basalt at 100 MPa). Little CO2 and S,
    # fugacity coefficient near 1 at 1150 C: saturation near 100 MPa.
    h2o_law, co2_law = _basalt_laws()
    res = degassing.degas(1150.0, 1.0, 1.0, 3.0, 10.0, 10.0, 100.0, h2o_law, co2_law)
    psat = res.saturation_pressure_bar[0]
    assert 900.0 < psat < 1100.0, psat


def test_above_and_below_saturation():
    h2o_law, co2_law = _basalt_laws()
    args = (1150.0, 1.0, 3.5, 1500.0, 1500.0, 100.0)
    psat = degassing.degas(args[0], 1.0, *args[1:], h2o_law, co2_law).saturation_pressure_bar[0]
    assert np.isfinite(psat)
    p = psat * np.array([1.001, 1.1, 2.0, 0.999])
    res = degassing.degas(args[0], p, *args[1:], h2o_law, co2_law, saturation=False)
    np.testing.assert_array_equal(res.status, [1, 1, 1, 0])
    assert np.all(np.isnan(res.gas[:3]))
    np.testing.assert_array_equal(res.gas_wt_fraction[:3], 0.0)
    assert 0.0 < res.gas_wt_fraction[3] < 1e-4
    # open system above saturation: no gas too, never a crash
    res = degassing.degas(args[0], p[:3], *args[1:], h2o_law, co2_law, style="open")
    np.testing.assert_array_equal(res.status, [1, 1, 1])


def test_more_co2_raises_saturation_pressure():
    # Common practice, no source: CO2 lowers fH2O at a given P, so a magma with
    # more CO2 reaches volatile saturation deeper.
    h2o_law, co2_law = _basalt_laws()
    co2 = np.array([10.0, 100.0, 1000.0, 3000.0])
    res = degassing.degas(1150.0, 1.0, 1.0, 3.0, co2, 1000.0, 100.0, h2o_law, co2_law)
    psat = res.saturation_pressure_bar
    assert np.all(np.isfinite(psat))
    assert np.all(np.diff(psat) > 0), psat


def _open_closed(p_factors):
    h2o_law, co2_law = _basalt_laws()
    args = (1.0, 4.0, 1000.0, 2000.0, 100.0)
    psat = degassing.degas(1150.0, 1.0, *args, h2o_law, co2_law).saturation_pressure_bar[0]
    p = psat * np.asarray(p_factors)
    closed = degassing.degas(1150.0, p, *args, h2o_law, co2_law, style="closed")
    opened = degassing.degas(1150.0, p, *args, h2o_law, co2_law, style="open")
    return closed, opened


def test_open_and_closed_agree_at_saturation():
    # At the saturation pressure no gas has been removed yet: both styles coincide.
    closed, opened = _open_closed([0.999])
    assert closed.status[0] == 0 and opened.status[0] == 0
    np.testing.assert_allclose(opened.gas, closed.gas, rtol=1e-3, atol=1e-8)


def test_open_system_gas_is_poorer_in_co2_at_low_pressure():
    # Common practice, no source: CO2 is lost early in open-system degassing.
    closed, opened = _open_closed([0.5, 0.3])
    assert np.all(closed.status == 0) and np.all(opened.status == 0)
    co2_h2o_closed = closed.gas[:, INDEX["CO2"]] / closed.gas[:, INDEX["H2O"]]
    co2_h2o_open = opened.gas[:, INDEX["CO2"]] / opened.gas[:, INDEX["H2O"]]
    assert np.all(co2_h2o_open < co2_h2o_closed)


def test_open_system_reaches_low_pressure():
    # Open system down to 1 % of the saturation pressure: the melt loses nearly all
    # its CO2 on the way (each step removes the CO2-rich gas), yet every state must
    # still give a gas with all balances closed at each step.
    closed, opened = _open_closed([0.05, 0.01])
    assert np.all(closed.status == 0)
    assert np.all(opened.status == 0)
    assert np.all(np.isfinite(opened.gas)) and np.all(opened.gas[:, INDEX["CO2"]] > 0.0)
    np.testing.assert_allclose(opened.gas.sum(axis=1), 1.0, rtol=1e-12)
    # Common practice, no source: the open-system melt and gas are stripped of CO2
    # far beyond the closed-system ones at the same pressure.
    assert np.all(opened.melt_co2_ppm < 1e-6 * closed.melt_co2_ppm)
    co2_h2o_closed = closed.gas[:, INDEX["CO2"]] / closed.gas[:, INDEX["H2O"]]
    co2_h2o_open = opened.gas[:, INDEX["CO2"]] / opened.gas[:, INDEX["H2O"]]
    assert np.all(co2_h2o_open < 1e-6 * co2_h2o_closed)


def test_open_system_steps_match_closed_steps_by_hand():
    # Definition of open-system (fractional) degassing: each step is a closed-system
    # equilibrium of the melt left by the previous step. Rebuild the path step by step
    # with the closed solver and compare the final gas.
    h2o_law, co2_law = _basalt_laws()
    args = (1.0, 4.0, 1000.0, 2000.0, 100.0)
    psat = degassing.degas(1150.0, 1.0, *args, h2o_law, co2_law).saturation_pressure_bar[0]
    p_final, n_steps = 0.1 * psat, 20
    opened = degassing.degas(1150.0, p_final, *args, h2o_law, co2_law, style="open",
                             open_steps=n_steps)
    h2o, co2, s = args[1:4]
    ratio = (p_final / psat) ** (1.0 / n_steps)
    for k in range(n_steps):
        p = psat * ratio ** (k + 1) if k < n_steps - 1 else p_final
        step = degassing.degas(1150.0, p, args[0], h2o, co2, s, args[4], h2o_law, co2_law,
                               saturation=False)
        assert step.status[0] == 0, k
        h2o, co2, s = step.melt_h2o_wt[0], step.melt_co2_ppm[0], step.melt_s_ppm[0]
    assert opened.status[0] == 0
    np.testing.assert_allclose(opened.gas[0], step.gas[0], rtol=1e-6, atol=1e-30)


@pytest.mark.parametrize("path", PRIOR_FILES, ids=os.path.basename)
def test_no_solver_failure_above_saturation(path):
    # Definition of the saturation pressure: above it the magma holds all its
    # volatiles, so a state there is "no gas" (status 1) in either style, never a
    # solver failure. A magma with no saturation pressure below the 20 kbar cap
    # starts its open path at the cap (flagged), so the open style has no status 2
    # either.
    model, cols = _prior_states(path, 300, seed=13)
    for style in ("closed", "open"):
        res = _degas_cols(model, cols, style, saturation=True)
        psat = res.saturation_pressure_bar
        above = np.isfinite(psat) & (cols["pressure_bar"] > psat * (1 + 1e-6))
        assert np.all(res.status[above] == degassing.STATUS_NO_GAS), style
        assert not np.any(res.status == degassing.STATUS_FAILED), style
        if style == "closed":
            assert not res.closed_above_cap.any()
        else:
            np.testing.assert_array_equal(res.closed_above_cap, np.isinf(psat))
