"""Parsing of a molar parent-gas composition written with species names."""
import math

from ventsource.common.errors import InputError
from ventsource.chemistry.species import ELEMENT_MATRIX, INDEX, SPECIES


def parse_bulk(text):
    """'H2O=90,CO2=8,SO2=2' -> {species: amount}; amounts are molar and > 0."""
    if not isinstance(text, str) or not text.strip():
        raise InputError("--bulk: empty composition; write it as H2O=90,CO2=8,SO2=2")
    amounts = {}
    for item in text.split(","):
        item = item.strip()
        if "=" not in item:
            raise InputError(f"--bulk: '{item}' is not NAME=AMOUNT (example: H2O=90,CO2=8,SO2=2)")
        name, value = (part.strip() for part in item.split("=", 1))
        if name not in INDEX:
            raise InputError(f"--bulk: unknown species '{name}'; known: {', '.join(SPECIES)}")
        if name in amounts:
            raise InputError(f"--bulk: species '{name}' given twice")
        try:
            amount = float(value)
        except ValueError:
            raise InputError(f"--bulk: amount of {name} '{value}' is not a number") from None
        if not math.isfinite(amount) or amount <= 0:
            raise InputError(f"--bulk: amount of {name} must be a positive number, got '{value}'")
        amounts[name] = amount
    h, c, s = element_totals(amounts)
    missing = [e for e, v in (("H", h), ("C", c), ("S", s)) if v <= 0]
    if missing:
        raise InputError(f"--bulk: no {', '.join(missing)} in the composition; the gas model "
                         "conserves H, C and S, so each needs a carrier species")
    return amounts


def element_totals(amounts):
    """H, C, S moles of a {species: moles} composition (O is set by the buffer)."""
    h = c = s = 0.0
    for name, amount in amounts.items():
        row = ELEMENT_MATRIX[INDEX[name]]
        h += row[0] * amount
        c += row[1] * amount
        s += row[3] * amount
    return h, c, s
