"""Sulfur by chemistry: sulfide capacity, SCSS and SCAS caps in the degassing kernels.

Sources are named beside each check; values recalled from memory are marked so.
"""
import math

import numpy as np
import pytest

from ventsource.chemistry.species import ELEMENT_MATRIX, MOLAR_MASS_G_MOL
from ventsource.magma import degassing
from ventsource.magma import sulfur_laws as laws
from ventsource.magma.solubility_registry import prepare_co2, prepare_h2o
from ventsource.magma.sulfur_melt import sulfate_fraction_jugo2010

# a mid-ocean-ridge basalt (from memory, a typical N-MORB glass, anhydrous wt%)
MORB = {"SiO2": 50.5, "TiO2": 1.5, "Al2O3": 15.0, "FeOt": 10.0, "MgO": 7.5, "CaO": 11.5,
        "Na2O": 2.6, "K2O": 0.15, "MnO": 0.18}
ARC_BASALT = {"SiO2": 50.5, "TiO2": 0.9, "Al2O3": 17.5, "FeOt": 9.5, "MgO": 7.0, "CaO": 10.5,
              "Na2O": 2.8, "K2O": 0.8, "MnO": 0.18, "P2O5": 0.2}


def test_scss_of_sulfide_saturated_morb_glasses():
    # Sulfide-saturated MORB glasses with ~10 wt% FeO hold ~1100-1500 ppm S at ~1200 C
    # and a few hundred bar (Mathez 1976, J. Geophys. Res. 81:4269; Wallace and
    # Carmichael 1992, GCA 56:1863; from memory); Li and Ripley (2009) state a fit
    # error of roughly 25 % (from memory)
    s = laws.scss_ppm(MORB, 1473.15, 300.0)
    assert 1300.0 * 0.75 <= s <= 1300.0 * 1.25


def test_scss_of_a_basalt_at_1300c_and_1gpa():
    # Jugo, Luth and Richards (2005), J. Petrol. 46:783: a basaltic melt saturated in
    # sulfide at 1300 C and 1 GPa held ~1400 ppm S (from memory); the law's fit error
    # ~25 % (from memory). A basalt of MORB-like major elements stands in for theirs.
    s = laws.scss_ppm(MORB, 1573.15, 10000.0)
    assert 1400.0 * 0.75 <= s <= 1400.0 * 1.25


def test_scss_falls_with_pressure_and_rises_with_temperature():
    # Mavrogenes and O'Neill (1999), GCA 63:1173 (from memory): SCSS falls with
    # pressure and rises with temperature at fixed melt composition
    lo_p, hi_p = laws.scss_ppm(MORB, 1473.15, [1.0, 10000.0])
    assert hi_p < lo_p
    assert laws.scss_ppm(MORB, 1373.15, 1.0) < laws.scss_ppm(MORB, 1573.15, 1.0)


def test_sulfide_capacity_order_of_oxide_effects():
    # O'Neill and Mavrogenes (2002), J. Petrol. 43:1049, abstract: A_Fe >> A_Ca > A_Mg;
    # swap 5 wt% of SiO2 for each oxide and compare the rise of ln C_S at 1400 C
    base = laws.sulfide_capacity_wt(MORB, 1673.15)
    rise = {}
    for ox in ("FeOt", "CaO", "MgO"):
        m = dict(MORB, SiO2=MORB["SiO2"] - 5.0)
        m[ox] += 5.0
        rise[ox] = math.log(laws.sulfide_capacity_wt(m, 1673.15) / base)
    assert rise["FeOt"] > 2.0 * rise["CaO"] > 0.0
    assert rise["CaO"] > rise["MgO"]


def test_sulfide_capacity_of_basalt_at_1400c():
    # O'Neill and Mavrogenes (2002), their natural-basalt compositions at 1400 C:
    # log10 C_S (wt%) between about -4.6 and -3.8 (from memory)
    log_cs = math.log10(laws.sulfide_capacity_wt(MORB, 1673.15))
    assert -4.6 <= log_cs <= -3.8


def _degas(s_ppm, dfmq, style, pressure_bar, temperature_c=1150.0, melt=ARC_BASALT):
    h = prepare_h2o("moore1998", melt)
    c = prepare_co2("shishkina2014", melt)
    return degassing.degas(temperature_c, pressure_bar, dfmq, 4.0, 3000.0, s_ppm, math.nan, h, c,
                           style=style, sulfide_capacity=laws.sulfide_capacity_oneill2021(melt),
                           sulfur_caps=laws.prepare_sulfur_caps(melt))


def _gas_s_per_gram(res):
    x = res.gas
    return (x @ ELEMENT_MATRIX)[:, 3] / (x @ MOLAR_MASS_G_MOL)


@pytest.mark.parametrize("dfmq", [0.0, 1.0])
def test_sulfide_cap_holds_sulfide_at_scss_whatever_fo2(dfmq):
    # O'Neill and Mavrogenes (2002), abstract: the SCSS is independent of fO2 and fS2.
    # With a sulfide liquid present the melt's S2- sits at SCSS and its S6+/ST follows
    # Jugo et al. (2010); the rest of the sulfur stays in the sulfide (S balance closed).
    p = np.array([3000.0, 2000.0])
    res = _degas(6000.0, dfmq, "closed", p)
    assert np.all(res.sulfur_phase == 1)
    x6 = sulfate_fraction_jugo2010(dfmq)
    sulfide = res.melt_s_ppm * (1.0 - x6)
    # the cap moves with the melt's own H2O (Li and Ripley 2009's H2O term)
    np.testing.assert_allclose(sulfide, laws.scss_ppm(ARC_BASALT, 1423.15, p, res.melt_h2o_wt),
                               rtol=1e-6)
    g = res.gas_wt_fraction
    in_gas_and_melt = g * _gas_s_per_gram(res) * 32.06e6 + (1 - g) * res.melt_s_ppm
    assert np.all(in_gas_and_melt < 6000.0)


def test_anhydrite_caps_an_oxidised_sulfur_rich_melt():
    # Jugo et al. (2010): at FMQ+2 nearly all dissolved S is sulfate, so anhydrite, not
    # sulfide, limits it; the melt's S6+ then sits at the SCAS of the law in use
    res = _degas(20000.0, 2.0, "closed", np.array([2000.0]), temperature_c=1000.0)
    assert res.sulfur_phase[0] == 2
    x6 = sulfate_fraction_jugo2010(2.0)
    assert res.melt_s_ppm[0] * x6 == pytest.approx(float(laws.scas_ppm(1273.15)), rel=1e-6)


def test_below_the_caps_sulfur_is_shared_by_gas_and_melt_only():
    # conservation (common practice, no source): without a sulfur phase, bulk S = gas + melt
    p = np.array([2000.0, 500.0, 100.0])
    res = _degas(1000.0, 1.0, "closed", p)
    assert np.all(res.sulfur_phase == 0) and np.all(res.status == 0)
    g = res.gas_wt_fraction
    back = g * _gas_s_per_gram(res) * 32.06e6 + (1 - g) * res.melt_s_ppm
    np.testing.assert_allclose(back, 1000.0, rtol=1e-9)


def test_open_path_keeps_the_sulfide_with_the_magma():
    # An open path from a sulfide-saturated magma: the gas of each step carries less S
    # than the magma had, and melt S stays within its caps (common practice, no source)
    p = np.array([2500.0, 1000.0, 300.0, 50.0])
    res = _degas(5000.0, 0.5, "open", p)
    assert np.all(res.status == 0)
    x6 = sulfate_fraction_jugo2010(0.5)
    scss = laws.scss_ppm(ARC_BASALT, 1423.15, p, res.melt_h2o_wt)
    assert np.all(res.melt_s_ppm * (1.0 - x6) <= scss * (1 + 1e-9))
    assert np.all(_gas_s_per_gram(res) * 32.06e6 * res.gas_wt_fraction < 5000.0)


def test_scss_h2o_term_lowers_the_cap():
    # Li and Ripley (2009), Econ. Geol. 104:405: ln X_S carries -3.049 X_H2O (from memory)
    # besides the dilution of the other oxides; for MORB at 1200 C, 300 bar, 4 wt% H2O
    # lowers SCSS by 13-21 % relative to the dry melt (value of the law as written here,
    # a regression check of the H2O term's sign and size; within the law's ~25 % error)
    dry = laws.scss_ppm(MORB, 1473.15, 300.0)
    wet = laws.scss_ppm(MORB, 1473.15, 300.0, [3.0, 4.0, 5.0])
    assert np.all(np.diff(wet) < 0)
    assert np.all((0.79 <= wet / dry) & (wet / dry <= 0.87))


def test_scas_of_a_hydrous_arc_basalt_at_its_liquidus():
    # Chowdhury and Dasgupta (2019), Chem. Geol. 522:162, abstract (stored copy of the
    # abstract on the authors' department page; the paper's tables and equation could not
    # be read here): a primary arc basalt with ~4 wt% H2O, piston-cylinder experiments at
    # 0.5-3 GPa and 1050-1325 C, reaches anhydrite saturation at ~2 wt% S near its
    # liquidus. The provisional law (sulfur_laws.SCAS_ANCHORS) states no error: accepted
    # within a factor of 2 over 1250-1325 C
    s = laws.scas_ppm(np.array([1250.0, 1300.0, 1325.0]) + 273.15)
    assert np.all((10000.0 <= s) & (s <= 40000.0))


def test_scas_rises_with_temperature():
    # Chowdhury and Dasgupta (2019), abstract: "SCAS increases with increasing temperature"
    s = laws.scas_ppm(np.array([1050.0, 1150.0, 1250.0]) + 273.15)
    assert np.all(np.diff(s) > 0)


@pytest.mark.xfail(strict=True, reason="the provisional SCAS has no composition term; "
                   "Chowdhury and Dasgupta (2019) is not readable here (docs/models.md)")
def test_scas_rises_with_cao_and_falls_with_sio2():
    # Chowdhury and Dasgupta (2019), abstract: SCAS increases with the melt's CaO and
    # decreases with its SiO2. Needs a composition-dependent SCAS law.
    caps = laws.prepare_sulfur_caps(MORB)
    more_ca = laws.prepare_sulfur_caps(dict(MORB, CaO=MORB["CaO"] + 3.0, SiO2=MORB["SiO2"] - 3.0))
    assert more_ca[3] > caps[3]
