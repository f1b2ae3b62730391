"""Where a draw's gas ends inside the pressure grid: its saturation pressure.

Above a magma's saturation pressure there is no gas, and the likelihood of every row is
zero there. On the window model's fixed grid of solved pressures the last interval with
gas, between the last solved pressure with gas and the first without, was lost whole
(its quadrature points need both ends), and with it every row whose gas last
equilibrated near saturation: the deep, CO2-rich gas. Measured on a synthetic 8-row
arc_basalt window, one such row lost 3.3 nats of its scrubbed-model evidence against a
400-solve grid. Here the end of the gas is found by bisection in ln P inside that
interval (EDGE_STEPS solves, batched over the draws that have one), and the interval's
quadrature points are spread over [last solved pressure with gas, edge] instead; the
points above the edge are collapsed onto it (zero trapezoid weight). The weights keep
the full grid's prior normalisation: the prior mass above the edge stays, with zero
likelihood.
"""
from __future__ import annotations

import numpy as np

EDGE_STEPS = 5   # bisection halvings: the edge to within 1/32 of a solve interval in ln P


def edge_nodes(good):
    """Per draw, the index j of the last solved pressure with gas when every node above it
    has none (a saturation edge inside the grid), else -1. good: (n, n_solve) bool."""
    n, m = good.shape
    top = m - 1 - np.argmax(good[:, ::-1], axis=1)      # highest node with gas
    has_gas = good.any(axis=1)
    edge = has_gas & (top < m - 1)
    return np.where(edge, top, -1)


def bisect_edge(solve, ln_lo, ln_hi, gas_lo, steps=EDGE_STEPS):
    """(ln P, gas) of the highest pressure found with gas in [ln_lo, ln_hi] by bisection.

    solve(ln_p) -> (gas (m, species), good (m,)), one pressure per draw; ln_lo has gas
    gas_lo, kept where no midpoint has any (the interval then closes on node j)."""
    lo, hi, gas_lo = ln_lo.copy(), ln_hi.copy(), gas_lo.copy()
    for _ in range(steps):
        mid = 0.5 * (lo + hi)
        gas, good = solve(mid)
        lo = np.where(good, mid, lo)
        hi = np.where(good, hi, mid)
        gas_lo = np.where(good[:, None], gas, gas_lo)
    return lo, gas_lo


def edge_positions(ln_quad, refine, j, ln_edge):
    """(m, K) ln P of the quadrature points for draws whose gas ends at ln_edge inside
    solve interval j: that interval's points spread over [node j, edge], the ones above
    collapsed onto the edge."""
    m, K = j.size, ln_quad.shape[-1]
    ln_p = np.broadcast_to(ln_quad, (m, K)).copy()   # ln_quad (K,) or each draw's own (m, K)
    slot = np.arange(K)[None, :]
    start = (j * refine)[:, None]
    ln_start = ln_p[np.arange(m), j * refine][:, None]
    f = (slot - start) / refine
    inside = (f > 0) & (f <= 1)
    ln_p = np.where(inside, ln_start + f * (ln_edge[:, None] - ln_start), ln_p)
    return np.where(f > 1, ln_edge[:, None], ln_p)


def edge_gas(gas_quad, refine, j, gas_node, gas_edge):
    """Gas of the edge draws on their own points: linear in ln x between node j's gas
    and the edge's gas inside the interval; NaN above it (no gas)."""
    m, K, _ = gas_quad.shape
    slot = np.arange(K)[None, :]
    f = ((slot - (j * refine)[:, None]) / refine)[:, :, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        a, b = np.log(gas_node)[:, None, :], np.log(gas_edge)[:, None, :]
        mixed = np.exp(a * (1.0 - f) + b * f)
    out = np.where((f > 0) & (f <= 1), mixed, gas_quad)
    return np.where(f > 1, np.nan, out)


def trapezoid_log_weights(ln_p, log_prior_pdf, log_norm):
    """(m, K) log weights of points ln_p (ascending, maybe repeated) for the prior density
    in P: trapezoid in ln P, dP = P d ln P, normalised by the full grid's log_norm."""
    step = np.diff(ln_p, axis=1)
    w = 0.5 * (np.pad(step, ((0, 0), (1, 0))) + np.pad(step, ((0, 0), (0, 1))))
    with np.errstate(divide="ignore"):
        return np.log(w) + ln_p + log_prior_pdf(np.exp(ln_p)) - log_norm
