"""Calibration ranges of the shipped solubility laws, as data.

Each law was fitted to experiments on some melts, at some pressures and
temperatures; outside them it extrapolates. The ranges below are those of
docs/models.md ("Solubility laws"), recalled from the source papers (from
memory, like the coefficients: check before relying on an edge). Melt
composition is summarised by anhydrous SiO2 wt% (the basalt-to-rhyolite axis
the papers describe their melts by; common practice, no source).

Laws whose constants come from the prior file (`power_law`, the sulfide
capacity ln C_S = A + B/T) and the gas/melt partition coefficient carry no
range here: their calibration is the user's.
"""
from dataclasses import dataclass


@dataclass(frozen=True)
class CalibrationRange:
    citation: str
    melt: str                 # the melts in words
    sio2_wt: tuple            # (min, max) anhydrous SiO2 wt% of the calibration melts
    pressure_bar: tuple       # (min, max)
    temperature_c: tuple      # (min, max)


# key: (models key, law name)
CALIBRATION_RANGES = {
    # Moore, Vennemann and Carmichael 1998, Am. Mineral. 83:36-42: natural melts from
    # basalt to rhyolite (from memory); "to 3 kilobars" is the paper's title (read on a
    # stored copy of its first page); about 700-1200 C (from memory, their compiled
    # experiments; no table of the paper could be read here)
    ("h2o_solubility", "moore1998"): CalibrationRange(
        "Moore et al. 1998", "natural melts, basalt to rhyolite", (45.0, 78.0), (1.0, 3000.0),
        (700.0, 1200.0)),
    # Liu, Zhang and Behrens 2005, J. Volcanol. Geotherm. Res. 143:219-235: metaluminous
    # rhyolite, 0-500 MPa, 700-1200 C (from memory; the abstract's stated range of use as
    # recalled, not read here)
    ("h2o_solubility", "liu2005"): CalibrationRange(
        "Liu et al. 2005", "metaluminous rhyolite", (70.0, 80.0), (1.0, 5000.0), (700.0, 1200.0)),
    ("co2_solubility", "liu2005"): CalibrationRange(
        "Liu et al. 2005", "metaluminous rhyolite", (70.0, 80.0), (1.0, 5000.0), (700.0, 1200.0)),
    # Shishkina et al. 2014, Chem. Geol. 388:112-129: basalt to basaltic andesite and
    # alkaline mafic melts, experiments at 50-500 MPa and 1200-1250 C (from memory; the
    # paper's text and tables could not be read here). The law has no temperature term:
    # below 1200 C it is applied at temperatures where it was not tested, so a magma at
    # 1050-1200 C is flagged on purpose. Not widened: the one stored statement on the
    # temperature effect (Stolper et al. 1987, Am. Mineral. 72:1071, abstract: total CO2
    # solubility in albite melt nearly independent of T at 1450-1625 C and 15-30 kbar)
    # is for another melt and far from these conditions.
    ("co2_solubility", "shishkina2014"): CalibrationRange(
        "Shishkina et al. 2014", "mafic to intermediate melts (basalt to basaltic andesite, "
        "alkaline mafic)", (40.0, 58.0), (500.0, 5000.0), (1200.0, 1250.0)),
}

# How far outside the calibrated SiO2 range a prior's melt may lie before the prior
# file is refused (wt% SiO2): the papers' melts are described loosely, so a melt
# just past an edge is accepted and "far outside" means more than this
# (common practice, no source).
SIO2_TOLERANCE_WT = 3.0


def ranges_for(models):
    """[(models key, law name, CalibrationRange)] of the laws a model table uses."""
    out = []
    for key in ("h2o_solubility", "co2_solubility"):
        law = models.get(key)
        if (key, law) in CALIBRATION_RANGES:
            out.append((key, law, CALIBRATION_RANGES[(key, law)]))
    return out
