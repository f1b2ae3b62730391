"""Column names and units of raw sensor files: `SO2 [ppmv]`, `T [C]`, `P [hPa]`.

Gas concentrations become ppmv (mole fraction x 1e6), temperature C,
relative humidity %, pressure hPa.
"""
import re

from ventsource.chemistry.species import SPECIES
from ventsource.common.errors import InputError

GAS_UNITS = {"ppmv": 1.0, "ppm": 1.0, "ppbv": 1e-3, "ppb": 1e-3, "%": 1e4, "vol%": 1e4,
             "mol%": 1e4}
METEO_UNITS = {
    "T": {"C": (1.0, 0.0), "degC": (1.0, 0.0), "°C": (1.0, 0.0), "K": (1.0, -273.15)},
    "RH": {"%": (1.0, 0.0)},
    "P": {"hPa": (1.0, 0.0), "mbar": (1.0, 0.0), "kPa": (10.0, 0.0), "Pa": (0.01, 0.0),
          "bar": (1000.0, 0.0)},
}
METEO_ALIASES = {"T": "T", "temperature": "T", "air temperature": "T", "RH": "RH",
                 "relative humidity": "RH", "P": "P", "pressure": "P", "air pressure": "P"}
_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*(?:\[\s*([^\[\]]*?)\s*\])?\s*$")


def split_header(text):
    """'SO2 [ppmv]' -> ('SO2', 'ppmv'); 'SO2' -> ('SO2', None)."""
    m = _HEADER.match(text)
    if not m:
        return text.strip(), None
    return m.group(1), (m.group(2) or None)


def canonical_name(name):
    """Gas species or T/RH/P for a header name; None for a column we do not use."""
    if name in SPECIES:
        return name
    return METEO_ALIASES.get(name, METEO_ALIASES.get(name.lower()))


def conversion(path, column, name, unit, row=1):
    """(scale, offset) turning the column's unit into ppmv / C / % / hPa."""
    if unit is None:
        raise InputError(f"{path}: row {row}, column '{column}': no unit; write it in the header "
                         f"(e.g. '{name} [{'ppmv' if name in SPECIES else next(iter(METEO_UNITS[name]))}]') "
                         f"or pass --units {name}=UNIT")
    table = ({u: (f, 0.0) for u, f in GAS_UNITS.items()} if name in SPECIES else METEO_UNITS[name])
    if unit not in table:
        raise InputError(f"{path}: row {row}, column '{column}': unknown unit '{unit}' for {name} "
                         f"(known: {', '.join(table)})")
    return table[unit]
