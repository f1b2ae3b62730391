"""Melt composition handling: stoichiometric checks and bad-input errors."""
import numpy as np
import pytest

from ventsource.magma import melt

ZERO = {k: 0.0 for k in melt.REQUIRED_OXIDES}


def _mineral(**wt):
    d = dict(ZERO)
    d.update(wt)
    return d


def test_oxide_molar_masses_match_chemicals_library():
    # Reference library: chemicals (IUPAC atomic weights).
    from chemicals.elements import molecular_weight, nested_formula_parser
    for name, m in melt.OXIDE_MOLAR_MASS_G_MOL.items():
        formula = "FeO" if name == "FeOt" else name
        assert m == pytest.approx(molecular_weight(nested_formula_parser(formula)), rel=2e-4)


def test_forsterite_stoichiometry():
    # Mg2SiO4: 2 MgO + SiO2 (mineral stoichiometry, textbook): Mg/Si = 2,
    # 4 oxygens per 140.69 g/mol formula unit.
    m_fo = 2 * 40.304 + 60.083
    fo = _mineral(MgO=100 * 2 * 40.304 / m_fo, SiO2=100 * 60.083 / m_fo)
    c = melt.cation_fractions(fo)
    assert c["MgO"] / c["SiO2"] == pytest.approx(2.0, rel=1e-9)
    assert melt.molar_mass_per_oxygen_g_mol(fo) == pytest.approx(m_fo / 4, rel=1e-9)
    assert melt.molar_mass_per_cation_g_mol(fo) == pytest.approx(m_fo / 3, rel=1e-9)


def test_anorthite_stoichiometry():
    # CaAl2Si2O8 = CaO + Al2O3 + 2 SiO2 (textbook): 20.16 CaO, 36.65 Al2O3, 43.19 SiO2 wt%.
    an = _mineral(CaO=20.16, Al2O3=36.65, SiO2=43.19)
    x = melt.anhydrous_mole_fractions(an)
    assert x["SiO2"] / x["CaO"] == pytest.approx(2.0, rel=2e-3)
    assert x["Al2O3"] / x["CaO"] == pytest.approx(1.0, rel=2e-3)
    assert melt.mean_molar_mass_g_mol(an) == pytest.approx(278.2 / 4, rel=2e-3)
    c = melt.cation_fractions(an)
    assert c["Al2O3"] == pytest.approx(2 / 5, rel=2e-3)
    assert sum(c.values()) == pytest.approx(1.0)


def test_h2o_mole_fraction_round_trip():
    # Definition of mole fraction (no source needed beyond the definition).
    w = np.array([0.5, 3.0, 6.0])
    x = melt.h2o_mole_fraction_from_wt_percent(w, 64.0)
    assert np.allclose(melt.h2o_wt_percent_from_mole_fraction(x, 64.0), w)
    # 6 wt% H2O in a 64 g/mol anhydrous melt: (6/18.015)/(6/18.015 + 94/64)
    assert x[2] == pytest.approx((6 / 18.015) / (6 / 18.015 + 94 / 64.0))


def test_normalises_to_100():
    d = _mineral(SiO2=50.0, Al2O3=15.0, MgO=10.0, CaO=10.0, FeOt=8.0, Na2O=2.0, K2O=0.5, TiO2=1.0)
    assert sum(melt.validate_melt(d).values()) == pytest.approx(100.0)


GOOD = {"SiO2": 50.5, "TiO2": 1.5, "Al2O3": 15.5, "FeOt": 9.5, "MgO": 8.0, "CaO": 11.5, "Na2O": 2.6, "K2O": 0.2}


@pytest.mark.parametrize("change, word", [
    ({"MgO": None}, "MgO"),
    ({"Na2O": -0.5}, "Na2O"),
    ({"SiO2": 10.0}, "sum"),
    ({"H2O": 2.0}, "H2O"),
    ({"K2O": "abc"}, "K2O"),
    ({"CaO": float("nan")}, "CaO"),
])
def test_bad_melt_one_line_error(change, word):
    d = dict(GOOD)
    for k, v in change.items():
        if v is None:
            d.pop(k)
        else:
            d[k] = v
    with pytest.raises(ValueError) as err:
        melt.validate_melt(d)
    msg = str(err.value)
    assert word in msg and "\n" not in msg
