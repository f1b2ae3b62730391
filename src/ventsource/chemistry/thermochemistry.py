"""Standard Gibbs energies and equilibrium constants of the gas species.

Gibbs energies come from the NASA Glenn 7-coefficient polynomials
(McBride, Zehe and Gordon 2002; see nasa7_data). Reference state: ideal gas
at 1 bar.
"""
import numpy as np
from numba import njit

from ventsource.chemistry.nasa7_data import NASA7
from ventsource.chemistry.species import SPECIES, INDEX

LN10 = np.log(10.0)

# Independent formation reactions used by the speciation solver, written as
# stoichiometric coefficients over SPECIES (products positive).
REACTIONS = {
    "H2 + 1/2 O2 = H2O": {"H2": -1.0, "O2": -0.5, "H2O": 1.0},
    "CO + 1/2 O2 = CO2": {"CO": -1.0, "O2": -0.5, "CO2": 1.0},
    "CH4 + 2 O2 = CO2 + 2 H2O": {"CH4": -1.0, "O2": -2.0, "CO2": 1.0, "H2O": 2.0},
    "1/2 S2 + O2 = SO2": {"S2": -0.5, "O2": -1.0, "SO2": 1.0},
    "H2S + 1/2 O2 = H2O + 1/2 S2": {"H2S": -1.0, "O2": -0.5, "H2O": 1.0, "S2": 0.5},
    "CO + 1/2 S2 = COS": {"CO": -1.0, "S2": -0.5, "COS": 1.0},
}


# Packed copies for compiled kernels: (species, range low/high, 7) and T_mid.
NASA_COEFFS = np.array([[NASA7[s][3], NASA7[s][4]] for s in SPECIES])
NASA_T_MID = np.array([NASA7[s][1] for s in SPECIES])


def _reaction_matrix():
    nu = np.zeros((len(SPECIES), len(REACTIONS)))
    for r, reaction in enumerate(REACTIONS.values()):
        for name, coeff in reaction.items():
            nu[INDEX[name], r] = coeff
    return nu


REACTION_MATRIX = _reaction_matrix()


@njit(cache=True)
def ln_k_kernel(temperature_k, coeffs, t_mid, nu, out):
    """Natural-log K of every reaction at one temperature (same formulas as gibbs_over_rt)."""
    t = temperature_k
    lnt = np.log(t)
    for r in range(nu.shape[1]):
        out[r] = 0.0
    for i in range(coeffs.shape[0]):
        a = coeffs[i, 0] if t <= t_mid[i] else coeffs[i, 1]
        h_rt = a[0] + t * (a[1] / 2 + t * (a[2] / 3 + t * (a[3] / 4 + t * a[4] / 5))) + a[5] / t
        s_r = a[0] * lnt + t * (a[1] + t * (a[2] / 2 + t * (a[3] / 3 + t * a[4] / 4))) + a[6]
        g = h_rt - s_r
        for r in range(nu.shape[1]):
            out[r] -= nu[i, r] * g


def _coefficient_table(temperature_k):
    """(n, n_species, 7) NASA coefficients chosen by temperature range."""
    t = np.atleast_1d(np.asarray(temperature_k, dtype=float))
    table = np.empty((t.size, len(SPECIES), 7))
    for j, name in enumerate(SPECIES):
        _, t_mid, _, low, high = NASA7[name]
        table[:, j, :] = np.where((t <= t_mid)[:, None], np.asarray(low), np.asarray(high))
    return t, table


def gibbs_over_rt(temperature_k):
    """G°/(R T) of every species, shape (n, n_species), NASA-7 convention.

    G/RT = H/RT - S/R with
    H/RT = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T,
    S/R  = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7.
    """
    t, a = _coefficient_table(temperature_k)
    t = t[:, None]
    h_rt = (a[..., 0] + a[..., 1] * t / 2 + a[..., 2] * t**2 / 3 + a[..., 3] * t**3 / 4
            + a[..., 4] * t**4 / 5 + a[..., 5] / t)
    s_r = (a[..., 0] * np.log(t) + a[..., 1] * t + a[..., 2] * t**2 / 2 + a[..., 3] * t**3 / 3
           + a[..., 4] * t**4 / 4 + a[..., 6])
    return h_rt - s_r


def log10_k(reaction, temperature_k):
    """log10 of the equilibrium constant of one of REACTIONS at temperature_k."""
    column = list(REACTIONS).index(reaction)
    return log10_k_all(temperature_k)[:, column]


def log10_k_all(temperature_k):
    """(n, 6) log10 K of REACTIONS in their listed order."""
    return -(gibbs_over_rt(temperature_k) @ REACTION_MATRIX) / LN10
