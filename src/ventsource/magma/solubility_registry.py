"""Names of solubility laws -> integer ids and parameter-vector builders.

A compiled solver receives (law_id, params) and calls
solubility_h2o.h2o_wt_percent / solubility_co2.co2_ppm with them.
"""
from ventsource.magma import solubility_co2 as _co2
from ventsource.magma import solubility_h2o as _h2o
from ventsource.magma import sulfur_melt as _s

H2O_LAWS = {
    "moore1998": (_h2o.LAW_MOORE1998, _h2o.prepare_moore1998),
    "liu2005": (_h2o.LAW_LIU2005, _h2o.prepare_liu2005),
}
CO2_LAWS = {
    "shishkina2014": (_co2.LAW_SHISHKINA2014, _co2.prepare_shishkina2014),
    "liu2005": (_co2.LAW_LIU2005, _co2.prepare_liu2005),
}
SULFUR_OPTIONS = {
    "partition": _s.prepare_partition,
    "sulfide_capacity": _s.prepare_sulfide_capacity,
}

# Coefficient status, for reports: False where the recalled coefficients failed
# or were not checked against the source paper's own tables.
LAW_NOTES = {
    ("h2o", "moore1998"): ("coefficients from memory, squared-mole-fraction form ln X^2 (c=1.171, d=-14.21); "
                           "passes magnitude checks (MORB ~3.3 wt% at 1200 C/100 MPa, rhyolite ~6.0 wt% at "
                           "850 C/200 MPa); within 8 % of pure-H2O experiments on haplogranite and albite "
                           "(tests/test_solubility_experiments.py); calibrated to 3 kbar"),
    ("h2o", "liu2005"): ("coefficients from memory; rhyolite only; within 9 % of pure-H2O experiments on "
                          "haplogranite and pantellerite (tests/test_solubility_experiments.py)"),
    ("co2", "shishkina2014"): "coefficients from memory; basaltic melts; not yet checked against experiments",
    ("co2", "liu2005"): "coefficients from memory; rhyolite only; not yet checked against experiments",
}


def _lookup(table, kind, name):
    if not isinstance(name, str) or name not in table:
        raise ValueError(f"{kind} law {name!r} is unknown (choose one of: {', '.join(table)})")
    return table[name]


def h2o_law_id(name):
    """Integer id of an H2O solubility law."""
    return _lookup(H2O_LAWS, "H2O solubility", name)[0]


def co2_law_id(name):
    """Integer id of a CO2 solubility law."""
    return _lookup(CO2_LAWS, "CO2 solubility", name)[0]


def prepare_h2o(name, melt_oxides_wt):
    """(law_id, params) for an H2O law and a melt composition."""
    law_id, prep = _lookup(H2O_LAWS, "H2O solubility", name)
    return law_id, prep(melt_oxides_wt)


def prepare_co2(name, melt_oxides_wt):
    """(law_id, params) for a CO2 law and a melt composition."""
    law_id, prep = _lookup(CO2_LAWS, "CO2 solubility", name)
    return law_id, prep(melt_oxides_wt)


def prepare_sulfur(name, melt_oxides_wt, **options):
    """Parameter vector for a sulfur option ('partition' or 'sulfide_capacity')."""
    prep = _lookup(SULFUR_OPTIONS, "sulfur", name)
    if name == "partition":
        if options:
            raise ValueError(f"sulfur option 'partition' takes no options, got {', '.join(options)}")
        return prep(melt_oxides_wt)
    return prep(melt_oxides_wt, **options)
