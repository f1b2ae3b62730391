"""H2O solubility laws checked against published solubility experiments.

Data: tests/data/solubility_experiments/*.csv. Each file's header names the paper, where the
numbers were read (for every file here: the paper's abstract; no paper table could be read)
and what each column is. All experiments used are pure-H2O runs, so p_H2O = P and
f_H2O = phi * P with phi the pure-water fugacity coefficient from IAPWS-95 (Wagner & Pruss 2002,
through CoolProp, a general-purpose reference library).

Each test takes every experiment of one dataset that lies in the law's composition and
pressure range, asserts the law within a relative tolerance at every point, and prints the
mean bias and scatter of (model / measured - 1) (pytest -s shows them; the assertion message
carries them too). Rows outside the range are printed with their model value but not asserted.

Tolerance: 20 % for every dataset here. None of the abstracts used quotes a model error; the
20 % is the brief's default, and the top of the 15-20 % error of existing solubility models
for alkali-rich mafic melts quoted by Jimenez-Mejias et al. (2021, C. R. Geosci.
353(S2):289-314, abstract), whose own data could not be read. A law that fails a dataset is
an xfail(strict=True) with the measured numbers in its reason, and is listed in docs/models.md.

No CO2 law (shishkina2014, liu2005 CO2) is checked here: no experiment with a complete melt
composition and a measured CO2 content could be read (see docs/models.md, "Solubility laws checked
against experiments").
"""
import csv
import math
from pathlib import Path

import numpy as np
import pytest

from ventsource.magma import melt
from ventsource.magma import solubility_h2o as h2o
from ventsource.magma import solubility_registry as reg

DATA_DIR = Path(__file__).parent / "data" / "solubility_experiments"

TOLERANCE_DEFAULT = 0.20  # brief's default: none of the abstracts used quotes a model error

# Moore et al. (1998) is titled "An empirical model for the solubility of H2O in magmas to
# 3 kilobars" (title as cited in the abstract of Di Matteo et al. 2004, "Water solubility in
# trachytic melts"): no check above 3000 bar.
MOORE_MAX_PRESSURE_BAR = 3000.0
# Natural-magma window for the Moore et al. (1998) calibration, basalt to rhyolite (from
# memory): SiO2 45-80 wt%, Na2O + K2O at most 15 wt%.
MOORE_SIO2_WT = (45.0, 80.0)
MOORE_MAX_ALKALIS_WT = 15.0
# Liu et al. (2005) is a rhyolite-only law: SiO2 >= 70 wt% (rhyolite field, common practice,
# no source); its calibration window 700-1200 C and up to 5000 bar (from memory).
LIU_MIN_SIO2_WT = 70.0
LIU_TEMPERATURE_C = (700.0, 1200.0)
LIU_MAX_PRESSURE_BAR = 5000.0
# The package's pressure limit for any state (docs/prior-files.md, physical limits of pressure_bar).
PACKAGE_MAX_PRESSURE_BAR = 5000.0


def _read_experiments(file_name):
    """Rows of one dataset CSV ('#' lines are the header comment); numbers as float."""
    with open(DATA_DIR / file_name, newline="") as fh:
        lines = [line for line in fh if not line.startswith("#")]
    rows = []
    for raw in csv.DictReader(lines):
        row = {}
        for key, value in raw.items():
            try:
                row[key] = float(value) if value != "" else math.nan
            except ValueError:
                row[key] = value
        rows.append(row)
    return rows


def _end_member_oxides_wt(formula_oxides):
    """Oxide wt% of a stoichiometric phase given as {oxide: moles} (common practice, no source)."""
    grams = {ox: n * melt.OXIDE_MOLAR_MASS_G_MOL[ox] for ox, n in formula_oxides.items()}
    total = sum(grams.values())
    return {ox: 100.0 * g / total for ox, g in grams.items()}


# Normative end members: quartz SiO2, albite NaAlSi3O8 = (Na2O.Al2O3.6SiO2)/2, orthoclase
# KAlSi3O8 = (K2O.Al2O3.6SiO2)/2, nepheline NaAlSiO4 = (Na2O.Al2O3.2SiO2)/2.
END_MEMBERS = {
    "norm_qz_wt": _end_member_oxides_wt({"SiO2": 1}),
    "norm_ab_wt": _end_member_oxides_wt({"Na2O": 1, "Al2O3": 1, "SiO2": 6}),
    "norm_or_wt": _end_member_oxides_wt({"K2O": 1, "Al2O3": 1, "SiO2": 6}),
    "norm_ne_wt": _end_member_oxides_wt({"Na2O": 1, "Al2O3": 1, "SiO2": 2}),
}


def _normative_melt(row):
    """Anhydrous oxide wt% (all required oxides) of a melt given by its wt% norm."""
    oxides = {name: 0.0 for name in melt.REQUIRED_OXIDES}
    for column, end_member in END_MEMBERS.items():
        for ox, wt in end_member.items():
            oxides[ox] += row[column] / 100.0 * wt
    return oxides


def _phi_h2o_iapws95(temperature_k, pressure_bar):
    cp = pytest.importorskip("CoolProp.CoolProp")
    state = cp.AbstractState("HEOS", "Water")
    state.update(cp.PT_INPUTS, pressure_bar * 1e5, temperature_k)
    return state.fugacity_coefficient(0)


def _moore1998(row):
    """(in range?, model wt%) for one pure-H2O experiment with a normative melt."""
    oxides = _normative_melt(row)
    comp = melt.validate_melt(oxides)
    in_range = (row["pressure_bar"] <= MOORE_MAX_PRESSURE_BAR
                and MOORE_SIO2_WT[0] <= comp["SiO2"] <= MOORE_SIO2_WT[1]
                and comp["Na2O"] + comp["K2O"] <= MOORE_MAX_ALKALIS_WT)
    t_k = row["temperature_c"] + 273.15
    law, params = reg.prepare_h2o("moore1998", oxides)
    phi = _phi_h2o_iapws95(t_k, row["pressure_bar"])
    return in_range, float(h2o.pure_h2o_curve(law, params, row["pressure_bar"], t_k, phi))


def _liu2005(row):
    """(in range?, model wt%); SiO2 from the norm or from the file's sio2_wt column."""
    sio2 = row["sio2_wt"] if "sio2_wt" in row else _normative_melt(row)["SiO2"]
    in_range = (sio2 >= LIU_MIN_SIO2_WT and row["pressure_bar"] <= LIU_MAX_PRESSURE_BAR
                and LIU_TEMPERATURE_C[0] <= row["temperature_c"] <= LIU_TEMPERATURE_C[1])
    # Liu et al. (2005) has no composition term; the parameter vector is unused by the kernel.
    law, params = h2o.LAW_LIU2005, np.array([sio2])
    t_k = row["temperature_c"] + 273.15
    return in_range, float(h2o.pure_h2o_curve(law, params, row["pressure_bar"], t_k))


def _demo_power_law_constants():
    """(k, n) of the power law in the prior-file example of docs/prior-files.md (k = 0.095, n = 0.5)."""
    return 0.095, 0.5


def _power_law(row):
    """(in range?, model wt%): wt% = k f_H2O^n with the demo file's k and n."""
    k, n = _demo_power_law_constants()
    t_k = row["temperature_c"] + 273.15
    params = h2o.prepare_power(None, k, n)
    phi = _phi_h2o_iapws95(t_k, row["pressure_bar"])
    in_range = row["pressure_bar"] <= PACKAGE_MAX_PRESSURE_BAR
    return in_range, float(h2o.pure_h2o_curve(h2o.LAW_POWER, params, row["pressure_bar"], t_k, phi))


LAWS = {"moore1998": _moore1998, "liu2005": _liu2005, "power_law": _power_law}


def _compare(law_name, file_name):
    """Model vs measured over the in-range rows: (relative deviations, report text)."""
    lines, rel = [], []
    for row in _read_experiments(file_name):
        assert row["x_h2o_fluid"] == 1.0, f"{file_name}: only pure-H2O runs are handled here"
        in_range, model = LAWS[law_name](row)
        dev = model / row["h2o_wt"] - 1.0
        lines.append(f"  {row['label']:>14s} {row['temperature_c']:6.0f} C {row['pressure_bar']:6.0f} bar "
                     f"measured {row['h2o_wt']:5.2f} model {model:5.2f} wt% ({dev:+.1%})"
                     + ("" if in_range else "  [outside the law's range: not asserted]"))
        if in_range:
            rel.append(dev)
    rel = np.array(rel)
    if rel.size == 0:
        return rel, "\n".join([f"{law_name} vs {file_name}: no experiment in range"] + lines)
    scatter = f"{np.std(rel, ddof=1):.1%}" if rel.size > 1 else "n/a (one point)"
    head = (f"{law_name} vs {file_name}: n = {rel.size} in range, mean bias {np.mean(rel):+.1%}, "
            f"scatter (1 sd) {scatter}, worst {rel[np.argmax(np.abs(rel))]:+.1%}, "
            f"tolerance +-{TOLERANCE_DEFAULT:.0%}")
    return rel, "\n".join([head] + lines)


def _xfail(reason):
    return pytest.mark.xfail(strict=True, reason=reason)


CHECKS = [
    pytest.param("moore1998", "holtz1992_haplogranite_2kbar.csv", id="moore1998-holtz1992"),
    pytest.param("moore1998", "behrens1995_feldspar.csv", id="moore1998-behrens1995"),
    pytest.param("moore1998", "albite_nepheline_200mpa.csv", id="moore1998-albite_nepheline"),
    pytest.param("liu2005", "holtz1992_haplogranite_2kbar.csv", id="liu2005-holtz1992"),
    pytest.param("liu2005", "romano2021_pantellerite.csv", id="liu2005-romano2021"),
    pytest.param("power_law", "behrens2009_phonotephrite.csv", id="power_law-behrens2009",
                 marks=_xfail("demo power law k = 0.095, n = 0.5 under-predicts the phono-tephrite of "
                              "Behrens et al. 2009 (abstract): 6.42 vs ~8 wt% at 400 MPa (-19.7 %) and "
                              "7.45 vs 10.71 wt% at 500 MPa (-30.4 %); mean bias -25.1 %, scatter 7.5 %, "
                              "tolerance 20 %")),
]


@pytest.mark.parametrize("law_name, file_name", CHECKS)
def test_h2o_law_against_experiments(law_name, file_name):
    rel, report = _compare(law_name, file_name)
    print("\n" + report)
    assert rel.size >= 1, f"no experiment of {file_name} is in the range of {law_name}:\n{report}"
    assert np.all(np.abs(rel) <= TOLERANCE_DEFAULT), report


def test_normative_end_members_are_stoichiometric():
    # Albite NaAlSi3O8 is 68.7 wt% SiO2, 19.4 wt% Al2O3, 11.8 wt% Na2O (mineral formula with
    # IUPAC atomic weights; common practice, no source): the conversion used for the norms.
    ab = END_MEMBERS["norm_ab_wt"]
    assert ab["SiO2"] == pytest.approx(68.74, abs=0.01)
    assert ab["Al2O3"] == pytest.approx(19.44, abs=0.01)
    assert ab["Na2O"] == pytest.approx(11.82, abs=0.01)
    hg = _normative_melt({"norm_qz_wt": 28, "norm_ab_wt": 38, "norm_or_wt": 34, "norm_ne_wt": 0})
    assert sum(hg.values()) == pytest.approx(100.0, abs=1e-9)


def test_every_dataset_names_its_source():
    # Every data file must say which paper its numbers come from and what its columns are.
    files = sorted(DATA_DIR.glob("*.csv"))
    assert len(files) >= 5
    for path in files:
        header = [line for line in path.read_text().splitlines() if line.startswith("#")]
        text = " ".join(header)
        assert "Source of every number below" in text, path.name
        assert "Columns:" in text, path.name
