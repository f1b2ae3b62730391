"""The melt at the degassing pressure, over the posterior: its dFMQ there (evolving
redox) and whether it holds a sulfur phase (sulfur = "capacity"). A row whose
posterior sits mostly at sulfide or anhydrite saturation is flagged: the melt's
dissolved S is then its cap and the bulk S content no longer sets the gas."""
import numpy as np

from ventsource.magma.degassing_context import SULFUR_PHASE_ANHYDRITE, SULFUR_PHASE_SULFIDE

MAX_CHECKED_DRAWS = 400   # forward solves spent on the check per row
SATURATED_SHARE = 0.5     # "mostly": more than half of the posterior draws with gas


def melt_at_pressure(forward, prior, theta_free, seed):
    """(flags, summary) from up to MAX_CHECKED_DRAWS of the equally weighted posterior
    draws theta_free (..., k free); ([], None) for a model with neither evolving redox
    nor sulfur caps (nothing to add, outputs as before)."""
    if getattr(forward, "sulfur_caps", None) is None and getattr(forward, "redox", None) is None:
        return [], None
    theta = np.asarray(theta_free, dtype=float).reshape(-1, np.shape(theta_free)[-1])
    if theta.shape[0] > MAX_CHECKED_DRAWS:
        pick = np.random.default_rng([int(seed), 5]).choice(theta.shape[0], MAX_CHECKED_DRAWS,
                                                             replace=False)
        theta = theta[np.sort(pick)]
    state = forward.state(prior.full(theta), saturation=False)
    gas = state["status"] == 0
    if not np.any(gas):
        return [], None
    phase = state["sulfur_phase"][gas]
    sulfide = float(np.mean(phase == SULFUR_PHASE_SULFIDE))
    anhydrite = float(np.mean(phase == SULFUR_PHASE_ANHYDRITE))
    flags = []
    if sulfide > SATURATED_SHARE:
        flags.append("sulfide_saturated")
    if anhydrite > SATURATED_SHARE:
        flags.append("anhydrite_saturated")
    q = np.quantile(state["dfmq_at_pressure"][gas], [0.05, 0.5, 0.95])
    summary = {"dfmq_at_pressure": dict(zip(("q05", "median", "q95"), np.round(q, 4).tolist())),
               "share_sulfide_saturated": round(sulfide, 4),
               "share_anhydrite_saturated": round(anhydrite, 4),
               "draws_checked": int(gas.sum()),
               "label": "melt at the degassing pressure, posterior if scrubbed (M1)"}
    return flags, summary
