"""The melt's redox along degassing, for `ventsource forward`: dFMQ, Fe3+/Fe total
and the sulfur phase at pressures from the saturation pressure down to 1 bar."""
import math

import numpy as np

from ventsource.magma import iron_redox
from ventsource.chemistry.buffers import log10_fo2_fmq

PATH_POINTS = 8
PHASE_NAMES = {0: "none", 1: "sulfide", 2: "anhydrite"}


def redox_path(model, theta, saturation_pressure_bar, n_points=PATH_POINTS):
    """List of {pressure_bar, dfmq, fe3_fraction, sulfur_phase} for one parameter
    vector, each pressure solved on its own (closed, or an open path ending there),
    from min(saturation pressure, 20 kbar) down to 1 bar."""
    names = list(model.parameter_names)
    top = saturation_pressure_bar if math.isfinite(saturation_pressure_bar) else 20000.0
    pressures = np.geomspace(max(top * (1.0 - 1e-6), 1.0), 1.0, n_points)
    thetas = np.repeat(np.asarray(theta, dtype=float)[None, :], n_points, axis=0)
    thetas[:, names.index("pressure_bar")] = pressures
    state = model.state(thetas, saturation=False)
    t_k = thetas[:, names.index("temperature_c")] + 273.15
    d = state["dfmq_at_pressure"]
    fe3 = iron_redox.fe3_fraction(model.spec.melt_oxides_wt, t_k, pressures,
                                  log10_fo2_fmq(t_k, pressures) + d)
    return [{"pressure_bar": float(p), "dfmq": float(dd), "fe3_fraction": float(f),
             "sulfur_phase": PHASE_NAMES.get(int(s), "none"), "gas": bool(st == 0)}
            for p, dd, f, s, st in zip(pressures, d, fe3, state["sulfur_phase"], state["status"])]
