"""Flags for a posterior that sits mostly where the melt is saturated in a sulfur
phase (sulfur = "capacity"): there the dissolved sulfur is the cap (SCSS or SCAS)
and the bulk S content is no longer what sets the gas."""
import numpy as np

from ventsource.magma.degassing_context import SULFUR_PHASE_ANHYDRITE, SULFUR_PHASE_SULFIDE

MAX_CHECKED_DRAWS = 400   # forward solves spent on the check per row
SATURATED_SHARE = 0.5     # "mostly": more than half of the posterior draws with gas


def sulfur_phase_flags(forward, prior, theta_free, seed):
    """["sulfide_saturated"] / ["anhydrite_saturated"] when more than half of the
    equally weighted posterior draws theta_free (..., k free) hold that phase."""
    if getattr(forward, "sulfur_caps", None) is None:
        return []
    theta = np.asarray(theta_free, dtype=float).reshape(-1, np.shape(theta_free)[-1])
    if theta.shape[0] > MAX_CHECKED_DRAWS:
        pick = np.random.default_rng([int(seed), 5]).choice(theta.shape[0], MAX_CHECKED_DRAWS,
                                                             replace=False)
        theta = theta[np.sort(pick)]
    state = forward.state(prior.full(theta), saturation=False)
    gas = state["status"] == 0
    if not np.any(gas):
        return []
    phase = state["sulfur_phase"][gas]
    flags = []
    if np.mean(phase == SULFUR_PHASE_SULFIDE) > SATURATED_SHARE:
        flags.append("sulfide_saturated")
    if np.mean(phase == SULFUR_PHASE_ANHYDRITE) > SATURATED_SHARE:
        flags.append("anhydrite_saturated")
    return flags
