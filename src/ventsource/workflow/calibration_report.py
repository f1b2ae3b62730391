"""Lines for `ventsource prior-predictive`: the share of prior mass outside the
pressure and temperature ranges of the prior's solubility laws."""
from ventsource.inference.calibration_flag import shares_outside
from ventsource.magma.calibration_ranges import ranges_for


def calibration_lines(spec, table):
    """One line per law with a calibration range; table holds the prior draws' parameters."""
    draws = {n: table[n].to_numpy(dtype=float) for n in ("pressure_bar", "temperature_c") if n in table}
    shares = shares_outside(spec, draws)
    lines = []
    for (key, law, rng), share in zip(ranges_for(spec.models), shares.values()):
        lines.append(f"prior mass outside the calibration of {key} = {law} ({rng.citation}: "
                     f"{rng.pressure_bar[0]:g}-{rng.pressure_bar[1]:g} bar, "
                     f"{rng.temperature_c[0]:g}-{rng.temperature_c[1]:g} C): {100 * share:.1f} %")
    if not lines:
        lines.append("no law of this prior carries a calibration range (magma/calibration_ranges.py)")
    return lines
