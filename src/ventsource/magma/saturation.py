"""Saturation pressure: the pressure at which a magma's closed-system gas
fraction reaches zero, by bisection in log P between 1 bar and P_SAT_CAP_BAR."""
import math

from ventsource.magma.redox_balance import solve_with_redox
from ventsource.magma.closed_solve import solve_closed
from ventsource.magma.degassing_context import (
    _C_DFMQ0, _C_REDOX, _W_CTX, _W_MG, _W_X, _W_Z, CTX_SIZE, MG_SIZE, P_SAT_CAP_BAR, STATUS_FAILED,
    STATUS_GAS, STATUS_NO_GAS, _kernel, _set_dfmq, _set_pressure,
)


@_kernel
def saturation_pressure(ctx, h_law, h_par, c_law, c_par, ideal, ln_k, ln_phi, work):
    """Pressure (bar) at which the gas fraction reaches zero; inf above P_SAT_CAP_BAR."""
    z = work[_W_Z:_W_Z + 4]
    x = work[_W_X:_W_X + 10]
    mg = work[_W_MG:_W_MG + MG_SIZE]
    c2 = work[_W_CTX:_W_CTX + CTX_SIZE]
    for i in range(CTX_SIZE):
        c2[i] = ctx[i]
    lo = 1.0
    hi = P_SAT_CAP_BAR
    _set_pressure(c2, hi, ln_k, ln_phi, ideal)
    st = solve_with_redox(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
    if st == STATUS_GAS:
        return math.inf
    _set_pressure(c2, lo, ln_k, ln_phi, ideal)
    st = solve_with_redox(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
    if st != STATUS_GAS:
        return math.nan
    for _ in range(50):
        mid = math.sqrt(lo * hi)
        _set_pressure(c2, mid, ln_k, ln_phi, ideal)
        st = solve_with_redox(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work, ln_k)
        if st == STATUS_FAILED and c2[_C_REDOX] != 0.0:
            # the redox iteration failed close to saturation (a few sulfide-saturated
            # draws, 17 of 3000 arc_basalt draws): decide gas or no gas at the prior's
            # dFMQ, which near g = 0 differs from the evolved one only by the reference
            _set_dfmq(c2, c2[_C_DFMQ0], ln_k)
            st = solve_closed(c2, h_law, h_par, c_law, c_par, z, x, mg, True, work)
        if st == STATUS_GAS:
            lo = mid
        elif st == STATUS_NO_GAS:
            hi = mid
        else:
            return math.nan
        if hi / lo < 1.0 + 1e-6:
            break
    return math.sqrt(lo * hi)
