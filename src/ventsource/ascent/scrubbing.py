"""Gas modification on the way up: SO2 (and H2S) removed by a hydrothermal
system or groundwater ("scrubbing").

SO2 is far more soluble in water than CO2 or H2S (Henry's constants near
25 C of about 1.2-1.4, 0.034 and 0.1 mol/(kg bar); Sander 2015, Atmos. Chem.
Phys. 15:4399), so scrubbing lowers SO2/CO2 and raises H2S/SO2. What the
dissolved SO2 becomes is a model choice:

* "loss":           SO2 simply leaves the gas;
* "h2s_sulfate":    4 SO2 + 4 H2O = H2S + 3 H2SO4 (disproportionation),
                    a fraction h2s_return of the H2S made goes back to the gas;
* "sulfur_sulfate": 3 SO2 + 2 H2O = S + 2 H2SO4 (native sulfur, no H2S).

Water consumed by these reactions is taken from the gas. Amounts are moles
per mole of the original gas; ratios do not depend on the final normalisation.
"""
import numpy as np

from ventsource.chemistry.species import INDEX

PRODUCTS = ("loss", "h2s_sulfate", "sulfur_sulfate")
_SO2, _H2S, _H2O = INDEX["SO2"], INDEX["H2S"], INDEX["H2O"]


def scrub(gas_mole_fractions, scrubbed_so2, product="loss", scrubbed_h2s=0.0, h2s_return=1.0):
    """Modified gas (n, n_species), renormalised; NaN rows stay NaN."""
    if product not in PRODUCTS:
        raise ValueError(f"unknown scrubbing product '{product}' (allowed: {', '.join(PRODUCTS)})")
    x = np.array(gas_mole_fractions, dtype=float, copy=True)
    f_so2 = np.asarray(scrubbed_so2, dtype=float)
    removed_so2 = f_so2 * x[:, _SO2]
    x[:, _SO2] -= removed_so2
    f_h2s = np.asarray(scrubbed_h2s, dtype=float)
    if f_h2s.ndim or f_h2s != 0.0:
        x[:, _H2S] *= 1.0 - f_h2s
    if product == "h2s_sulfate":
        x[:, _H2S] += np.asarray(h2s_return, dtype=float) * removed_so2 / 4.0
        x[:, _H2O] = np.maximum(x[:, _H2O] - removed_so2, 0.0)
    elif product == "sulfur_sulfate":
        x[:, _H2O] = np.maximum(x[:, _H2O] - removed_so2 * 2.0 / 3.0, 0.0)
    return x / x.sum(axis=1, keepdims=True)
