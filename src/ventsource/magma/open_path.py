"""Open-system degassing path of one context.

Open system: from the saturation pressure down to P in geometric steps,
the gas made in each step is removed and the next step starts from the
melt; the gas made in the last step is the gas measured at P. An element the
melt has lost keeps VANISHING_MOL_PER_G so its balance stays defined.

A magma still gas-saturated at P_SAT_CAP_BAR (gas at every pressure of the
search range, e.g. D_S * S near or above the S mass fraction a gas can hold)
has no saturation pressure to start from. Its open path starts at the cap
instead: the gas in closed-system equilibrium with the magma at the cap is the
first batch removed, then the path steps down from the cap to P as usual (at
P >= P_SAT_CAP_BAR the gas is the closed-system gas at P). Deeper than the cap
the gas is thus taken as kept with its magma. Such states have status 0, a
saturation pressure of inf ("above the cap") and closed_above_cap True in
DegassingResult, so a caller can tell them apart or leave them out.
"""
from ventsource.magma.redox_balance import remove_gas_redox, solve_with_redox
from ventsource.magma.degassing_context import (
    _C_LNRMAX, _C_NC, _C_NH, _C_NS, _C_SK, STATUS_FAILED, STATUS_GAS, _kernel, _set_pressure,
)

# Bulk amounts below this (mol per gram of magma) are raised to it on the
# open-system path: an element stripped from the melt keeps a vanishing but
# non-zero amount, so its balance (and gas ratios) stay defined.
VANISHING_MOL_PER_G = 1e-200


@_kernel
def _remove_gas(ctx, mg, z):
    """The melt left after the gas is removed becomes the bulk of the next step.
    A sulfide or anhydrite phase stays with the magma: with fS2 at its cap the
    next bulk S is what the gas did not take, (n_S - g n_S,gas) / (1 - g)."""
    ctx[_C_NH] = max(mg[3], VANISHING_MOL_PER_G)
    ctx[_C_NC] = max(mg[4], VANISHING_MOL_PER_G)
    if ctx[_C_SK] > 0.0 and z[2] >= 2.0 * ctx[_C_LNRMAX] - 1e-9:
        g = z[3]
        ctx[_C_NS] = max((ctx[_C_NS] - g * mg[2]) / (1.0 - g), VANISHING_MOL_PER_G)
    else:
        ctx[_C_NS] = max(mg[5], VANISHING_MOL_PER_G)


@_kernel
def _open_path(ctx, psat, pressure_bar, n_steps, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi,
               z, x, mg, work, remove_at_start):
    """Step from just below psat to P, removing the gas each step.

    remove_at_start: the magma is gas-saturated at psat (the search cap); its
    closed-system gas there is removed first, the path then starts from that melt.
    """
    st = STATUS_FAILED
    if remove_at_start:
        _set_pressure(ctx, psat, ln_k, ln_phi, ideal)
        st = solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
        if st == STATUS_FAILED:
            return st
        if st == STATUS_GAS:
            _remove_gas(ctx, mg, z)
            remove_gas_redox(ctx, z, x)
    ratio = (pressure_bar / psat) ** (1.0 / n_steps)
    for k in range(n_steps):
        p = psat * ratio ** (k + 1) if k < n_steps - 1 else pressure_bar
        _set_pressure(ctx, p, ln_k, ln_phi, ideal)
        st = solve_with_redox(ctx, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
        if st == STATUS_FAILED:
            return st
        if st == STATUS_GAS and k < n_steps - 1:
            # remove the gas: the next step starts from this melt
            _remove_gas(ctx, mg, z)
            remove_gas_redox(ctx, z, x)
    return st
