"""Sulfur dissolved in silicate melt.

Two options, chosen by name in the registry:
  "partition"        S in melt from a fluid/melt partition coefficient
                     D_S = (mass fraction S in gas) / (mass fraction S in melt).
  "sulfide_capacity" S2- in melt from a sulfide capacity C_S, with the convention
                     S2- (wt%) = C_S * (fS2 / fO2)^0.5  (fugacities in bar), then total S
                     from the sulfate/sulfide split of Jugo, Wilke & Botcharnikov (2010),
                     Geochim. Cosmochim. Acta 74:5926-5938: S6+/ST = 1/(1 + 10^(2.1 - 2 dFMQ)).
                     The definition C_S = [S] (fO2/fS2)^0.5 is that of O'Neill & Mavrogenes
                     (2002), J. Petrol. 43:1049-1087 (abstract). No composition law for C_S
                     is built in: their fitted equation and its coefficients could not be
                     read from any source at hand, so ln C_S = a + b/T must be supplied by
                     the caller (prepare_sulfide_capacity).
"""
import math

import numpy as np
from numba import njit

from ventsource.magma.melt import broadcast_flat

# Sulfate fraction is capped so that ST = S2-/(1 - S6+/ST) stays finite: at most
# 1000 x the sulfide content (a numerical guard, not a physical value).
MAX_SULFATE_FRACTION = 0.999


@njit(cache=True)
def sulfate_fraction_jugo2010(dfmq):
    """S6+/ST in melt; Jugo et al. (2010) GCA 74:5926, eq. for S6+/ST vs dFMQ."""
    return 1.0 / (1.0 + 10.0 ** (2.1 - 2.0 * dfmq))


@njit(cache=True)
def s_melt_ppm_partition(d_s, s_gas_mass_fraction):
    """Dissolved S (ppm by weight) = 1e6 * w_S,gas / D_S; NaN for D_S <= 0."""
    if not (d_s > 0.0):
        return math.nan
    return 1.0e6 * s_gas_mass_fraction / d_s


@njit(cache=True)
def s_melt_ppm_capacity(params, f_s2_bar, f_o2_bar, temperature_k, dfmq):
    """Total dissolved S (ppm): sulfide from C_S, plus sulfate from the Jugo (2010) split.

    params = [a, b_k] with ln C_S = a + b_k / T (C_S in the wt% convention above).
    """
    if f_s2_bar <= 0.0:
        return 0.0
    if not (f_o2_bar > 0.0):
        return math.nan
    ln_cs = params[0] + params[1] / temperature_k
    s2_wt = math.exp(ln_cs + 0.5 * (math.log(f_s2_bar) - math.log(f_o2_bar)))
    x6 = sulfate_fraction_jugo2010(dfmq)
    if x6 > MAX_SULFATE_FRACTION:
        x6 = MAX_SULFATE_FRACTION
    return 1.0e4 * s2_wt / (1.0 - x6)


def prepare_partition(melt_oxides_wt=None):
    """The partition option has no composition terms (D_S is a model parameter)."""
    return np.zeros(1, dtype=np.float64)


def prepare_sulfide_capacity(melt_oxides_wt=None, ln_cs_a=None, ln_cs_b_k=0.0):
    """Parameter vector [a, b_k] for ln C_S = a + b_k/T; the caller must give a (and b_k)."""
    if ln_cs_a is None:
        raise ValueError("sulfur option 'sulfide_capacity': no built-in sulfide-capacity law; "
                         "give ln_cs_a (and ln_cs_b_k) with ln C_S = a + b/T, C_S in wt% S per (fS2/fO2)^0.5")
    a = float(ln_cs_a)
    b = float(ln_cs_b_k)
    if not (math.isfinite(a) and math.isfinite(b)):
        raise ValueError(f"sulfur option 'sulfide_capacity': ln_cs_a={a}, ln_cs_b_k={b} must be finite")
    return np.array([a, b], dtype=np.float64)


@njit(cache=True)
def _partition_loop(d, w, out):
    for i in range(out.size):
        out[i] = s_melt_ppm_partition(d[i], w[i])


@njit(cache=True)
def _capacity_loop(params, fs2, fo2, t, dfmq, out):
    for i in range(out.size):
        out[i] = s_melt_ppm_capacity(params, fs2[i], fo2[i], t[i], dfmq[i])


def sulfate_fraction_jugo2010_array(dfmq):
    """Array form of sulfate_fraction_jugo2010."""
    d = np.asarray(dfmq, dtype=np.float64)
    return 1.0 / (1.0 + 10.0 ** (2.1 - 2.0 * d))


def s_melt_ppm_partition_array(d_s, s_gas_mass_fraction):
    """Array wrapper of s_melt_ppm_partition (inputs broadcast)."""
    shape, (d, w) = broadcast_flat(d_s, s_gas_mass_fraction)
    out = np.empty(d.size)
    _partition_loop(d, w, out)
    return out.reshape(shape)


def s_melt_ppm_capacity_array(params, f_s2_bar, f_o2_bar, temperature_k, dfmq):
    """Array wrapper of s_melt_ppm_capacity (inputs broadcast)."""
    shape, (fs2, fo2, t, d) = broadcast_flat(f_s2_bar, f_o2_bar, temperature_k, dfmq)
    out = np.empty(fs2.size)
    _capacity_loop(np.ascontiguousarray(params, dtype=np.float64), fs2, fo2, t, d, out)
    return out.reshape(shape)
