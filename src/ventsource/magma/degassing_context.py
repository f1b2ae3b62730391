"""State context of the degassing kernels: shared constants, the per-state
context vector and work-array layouts, and the kernels that fill a context.

A context (CTX_SIZE floats) holds everything a closed-system solve at one
temperature, pressure and fO2 needs: the ln x offsets of the speciation
monomials, fugacity coefficients, bulk H, C and S (mol per gram of magma), the
S partition or sulfide-capacity terms. Every degassing kernel takes its
scratch space from one work array of WORK_SIZE floats, so none allocates.
"""
import math

from numba import njit

from ventsource.chemistry.buffers import FMQ_COEFFICIENTS
from ventsource.chemistry.eos import log_fugacity_coefficients_kernel
from ventsource.chemistry.speciation import log_fugacity_offsets
from ventsource.chemistry.thermochemistry import LN10, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k_kernel

# Every kernel except _degas_batch runs without numba's reference-counted memory
# (NRT; `_nrt` is numba's own flag for it): none allocates, and with the NRT each
# array argument or view costs a pair of atomic reference-count updates per call
# (about 150 per state, a third of the forward model's run time under perf).
# _degas_batch allocates and owns every array and keeps the NRT; a new kernel
# that must allocate (np.empty) takes plain njit. The callees from other modules
# (EOS, ln K, solubility laws) are compiled into these kernels, so they must not
# allocate either. No fastmath anywhere: results stay bitwise reproducible.
_kernel = njit(cache=True, error_model='numpy', _nrt=False)

STATUS_GAS = 0
STATUS_NO_GAS = 1
STATUS_FAILED = 2

M_H2O = 18.015
M_CO2 = 44.009
M_S = 32.06
P_SAT_CAP_BAR = 20000.0
_H2O_MOL_PER_WT_PERCENT = 2.0 / 100.0 / M_H2O   # mol H per g melt per wt% H2O
_CO2_MOL_PER_PPM = 1e-6 / M_CO2                 # mol C per g melt per ppm CO2

# Context vector layout (one per state), filled by _fill_context.
_C_OFF = 0        # 10 ln x offsets
_C_P = 10
_C_T = 11
_C_LNPHI = 12     # 10 ln phi
_C_NH = 22
_C_NC = 23
_C_NS = 24
_C_DS = 25
_C_DFMQ = 26
_C_MONO = 27      # 10 exp(offsets): x_i = c_i a^p b^q r^s (see speciation)
_C_PHIH = 37      # fugacity coefficient of H2O
_C_PHIC = 38      # fugacity coefficient of CO2
_C_LNFO2 = 39     # ln fO2 (bar)
_C_CSA = 40       # sulfide capacity: ln C_S = A + B/T (NaN: partition coefficient instead)
_C_CSB = 41
_C_SK = 42        # melt S (mol/g) = SK * fS2^0.5 in sulfide-capacity mode, 0 otherwise
# Saturation caps of the dissolved sulfur (sulfur_laws.py): ln SCSS (ppm) =
# A + B/T + C P and ln SCAS (ppm) = A + B/T; NaN A: no cap of that kind.
_C_SCSS_A = 43
_C_SCSS_B = 44
_C_SCSS_P = 45
_C_SCAS_A = 46
_C_SCAS_B = 47
_C_LNRMAX = 48    # ln of the largest fS2^0.5 the melt holds before a sulfur phase forms (inf: none)
_C_CAPKIND = 49   # which phase caps it: SULFUR_PHASE_SULFIDE or SULFUR_PHASE_ANHYDRITE (0: none)
# Evolving redox (redox_balance.py): flag (0 buffered, 1 evolving), melt Fe (mol per g
# of magma), the Kress-Carmichael composition term, the conserved redox budget (mol of
# electrons per g of magma relative to Fe2+, S2-, H2O, CO2) and the prior's dFMQ.
_C_REDOX = 50
_C_NFE = 51
_C_KCC = 52
_C_E0 = 53
_C_DFMQ0 = 54
# The H2O term of the SCSS law (sulfur_laws.scss_water_term): its coefficient W on the
# melt's H2O mole fraction phi (NaN: no H2O term) and the dry melt's mean molar mass
# (g/mol); the sulfide and anhydrite caps' ln fS2^0.5 of the dry law (the sulfide one
# moves with the melt's H2O; _C_LNRMAX holds the cap in force).
_C_SCSS_W = 55
_C_MDRY = 56
_C_LNRS = 57
_C_LNRA = 58
CTX_SIZE = 59
SULFUR_PHASE_NONE = 0
SULFUR_PHASE_SULFIDE = 1
SULFUR_PHASE_ANHYDRITE = 2
# Jugo et al. (2010) sulfate fraction is capped so the total stays finite.
MAX_SULFATE_FRACTION = 0.999
D_S_START = 100.0  # effective gas/melt S partition used only for the start in capacity mode

# mg vector: (nH_g, nC_g, nS_g, nH_m, nC_m, nS_m, sum_x) and the elasticities
# d ln(law)/d ln x of the H2O law in x_H2O, x_CO2 and of the CO2 law in x_H2O, x_CO2.
MG_SIZE = 11

# Work array layout for solve_closed (no allocation per state).
_W_R = 0                      # 4 residuals
_W_RT = 4                     # 4 trial residuals
_W_JAC = 8                    # 16 Jacobian
_W_JACT = 24                  # 16 trial Jacobian
_W_STEP = 40                  # 4
_W_TRIAL = 44                 # 4
_W_XT = 48                    # 10 trial mole fractions
_W_MGT = 58                   # MG_SIZE trial gas/melt amounts
_W_M = _W_MGT + MG_SIZE       # 24: elimination matrix (4 x 5) and right side
_W_Z = _W_M + 24              # 4 spare z (saturation pressure)
_W_X = _W_Z + 4               # 10 spare x (saturation pressure)
_W_MG = _W_X + 10             # MG_SIZE spare mg (saturation pressure)
_W_CTX = _W_MG + MG_SIZE      # CTX_SIZE copy of a context (saturation pressure)
_W_ITER = _W_CTX + CTX_SIZE   # Newton iterations of the last solve (diagnostics)
WORK_SIZE = _W_ITER + 1


@_kernel
def _fill_context(ctx, temperature_k, pressure_bar, dfmq, n_h, n_c, n_s, d_s, ideal, ln_k, ln_phi,
                  same_temperature=False):
    """same_temperature: ln_k already holds the values at temperature_k (a new
    pressure on a path at fixed T), so the temperature-only work is skipped."""
    a, b, c = FMQ_COEFFICIENTS
    ln_fo2 = (a / temperature_k + b + c * (pressure_bar - 1.0) / temperature_k + dfmq) * LN10
    if not same_temperature:
        ln_k_kernel(temperature_k, NASA_COEFFS, NASA_T_MID, REACTION_MATRIX, ln_k)
    if ideal:
        for i in range(10):
            ln_phi[i] = 0.0
    else:
        log_fugacity_coefficients_kernel(temperature_k, pressure_bar, ln_phi)
    log_fugacity_offsets(ln_k, ln_fo2, ctx[_C_OFF:_C_OFF + 10])
    lnp = math.log(pressure_bar)
    for i in range(10):
        ctx[_C_OFF + i] -= ln_phi[i] + lnp
        ctx[_C_LNPHI + i] = ln_phi[i]
        ctx[_C_MONO + i] = math.exp(ctx[_C_OFF + i])
    ctx[_C_PHIH] = math.exp(ln_phi[0])
    ctx[_C_PHIC] = math.exp(ln_phi[3])
    ctx[_C_P] = pressure_bar
    ctx[_C_T] = temperature_k
    ctx[_C_NH] = n_h
    ctx[_C_NC] = n_c
    ctx[_C_NS] = n_s
    ctx[_C_DS] = d_s
    ctx[_C_DFMQ] = dfmq
    ctx[_C_LNFO2] = ln_fo2
    _update_sulfide_factor(ctx)


@_kernel
def _update_sulfide_factor(ctx):
    """Sulfide-capacity sulfur: S2- (wt%) = C_S (fS2/fO2)^0.5 (O'Neill and
    Mavrogenes 2002, J. Petrol. 43:1049, definition of C_S) with ln C_S = A + B/T
    from the prior file; total S = S2- / (1 - S6+/ST) with the sulfate fraction
    S6+/ST = 1/(1 + 10^(2.1 - 2 dFMQ)) of Jugo et al. (2010), Geochim. Cosmochim.
    Acta 74:5926. NaN A means the partition coefficient is used instead."""
    a = ctx[_C_CSA]
    ctx[_C_LNRMAX] = math.inf
    ctx[_C_CAPKIND] = SULFUR_PHASE_NONE
    if not math.isfinite(a):
        ctx[_C_SK] = 0.0
        return
    t = ctx[_C_T]
    sulfate = 1.0 / (1.0 + 10.0 ** (2.1 - 2.0 * ctx[_C_DFMQ]))
    sulfate = min(sulfate, MAX_SULFATE_FRACTION)
    c_s = math.exp(a + ctx[_C_CSB] / t)
    sulfide_k = c_s * 0.01 / M_S * math.exp(-0.5 * ctx[_C_LNFO2])  # S2- mol/g per fS2^0.5
    ctx[_C_SK] = sulfide_k / (1.0 - sulfate)
    _update_sulfur_caps(ctx, sulfide_k, sulfate)


@_kernel
def _update_sulfur_caps(ctx, sulfide_k, sulfate):
    """ln of the fS2^0.5 at which the melt saturates in a sulfide liquid (its S2- reaches
    SCSS) or in anhydrite (its S6+ reaches SCAS), whichever comes first. A sulfur
    phase present buffers fS2 there: melt S stays at the cap, the excess stays in
    the phase and does not degas. Set here for the melt holding all the magma's H2O
    (no gas); the closed-system residuals move the SCSS cap with the melt's H2O."""
    t = ctx[_C_T]
    ctx[_C_LNRS] = math.inf
    ctx[_C_LNRA] = math.inf
    if math.isfinite(ctx[_C_SCSS_A]):
        ln_scss = ctx[_C_SCSS_A] + ctx[_C_SCSS_B] / t + ctx[_C_SCSS_P] * ctx[_C_P]
        ctx[_C_LNRS] = ln_scss + math.log(1e-6 / M_S) - math.log(sulfide_k)
    if math.isfinite(ctx[_C_SCAS_A]) and sulfate > 0.0:
        ln_scas = ctx[_C_SCAS_A] + ctx[_C_SCAS_B] / t
        ctx[_C_LNRA] = ln_scas + math.log(1e-6 / M_S) - math.log(sulfide_k * sulfate / (1.0 - sulfate))
    _caps_at_water(ctx, 0.5 * ctx[_C_NH])


@_kernel
def scss_water_term(ctx, n_w):
    """(ln SCSS(H2O) - ln SCSS(dry), its derivative in n_w) for a melt holding n_w mol
    H2O per gram (sulfur_laws.scss_water_term: Li and Ripley 2009's H2O term and the
    dilution of the other oxides and of ppm by the H2O). (0, 0) without an H2O term."""
    w = ctx[_C_SCSS_W]
    if not math.isfinite(w) or n_w <= 0.0:
        return 0.0, 0.0
    m_d = ctx[_C_MDRY]
    den = 1.0 + n_w * (m_d - M_H2O)
    phi = n_w * m_d / den
    mix = 1.0 - phi + phi * M_H2O / m_d
    term = -phi * w - math.log(mix)
    d_term_d_phi = -w - (M_H2O / m_d - 1.0) / mix
    return term, d_term_d_phi * m_d / (den * den)


@_kernel
def _caps_at_water(ctx, n_w):
    """Set the cap in force (_C_LNRMAX, _C_CAPKIND) for a melt holding n_w mol H2O per
    gram; returns d _C_LNRMAX / d n_w (0 where anhydrite or no phase caps the melt)."""
    term, slope = scss_water_term(ctx, n_w)
    ln_s = ctx[_C_LNRS] + term
    ctx[_C_LNRMAX] = math.inf
    ctx[_C_CAPKIND] = SULFUR_PHASE_NONE
    if ln_s < ctx[_C_LNRMAX]:
        ctx[_C_LNRMAX] = ln_s
        ctx[_C_CAPKIND] = SULFUR_PHASE_SULFIDE
    if ctx[_C_LNRA] < ctx[_C_LNRMAX]:
        ctx[_C_LNRMAX] = ctx[_C_LNRA]
        ctx[_C_CAPKIND] = SULFUR_PHASE_ANHYDRITE
        return 0.0
    return slope if ctx[_C_CAPKIND] == SULFUR_PHASE_SULFIDE else 0.0


@_kernel
def _set_dfmq(ctx, dfmq, ln_k):
    """Same state at another fO2 (dFMQ): only the fO2-dependent terms change."""
    a, b, c = FMQ_COEFFICIENTS
    t = ctx[_C_T]
    p = ctx[_C_P]
    ln_fo2 = (a / t + b + c * (p - 1.0) / t + dfmq) * LN10
    log_fugacity_offsets(ln_k, ln_fo2, ctx[_C_OFF:_C_OFF + 10])
    lnp = math.log(p)
    for i in range(10):
        ctx[_C_OFF + i] -= ctx[_C_LNPHI + i] + lnp
        ctx[_C_MONO + i] = math.exp(ctx[_C_OFF + i])
    ctx[_C_DFMQ] = dfmq
    ctx[_C_LNFO2] = ln_fo2
    _update_sulfide_factor(ctx)


@_kernel
def _set_pressure(ctx, pressure_bar, ln_k, ln_phi, ideal):
    """Same state at a new pressure; ln_k must hold the values at ctx's temperature."""
    _fill_context(ctx, ctx[_C_T], pressure_bar, ctx[_C_DFMQ], ctx[_C_NH], ctx[_C_NC], ctx[_C_NS],
                  ctx[_C_DS], ideal, ln_k, ln_phi, True)
