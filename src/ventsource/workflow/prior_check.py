"""A prior that cannot make gas is refused by name before a run folder is made."""
import numpy as np

from ventsource.common.errors import InputError
from ventsource.forward.model import STATUS_OK, ForwardModel

CHECK_DRAWS = 256
CHECK_SEED = 7  # its own stream: the check never touches a run's random numbers


def refuse_prior_without_gas(spec, prior_path, n=CHECK_DRAWS):
    """Raise InputError naming the prior file when none of n prior draws releases gas."""
    rng = np.random.default_rng(CHECK_SEED)
    theta = spec.full(spec.sample(rng, n))
    status = ForwardModel(spec).status(theta)
    if not np.any(status == STATUS_OK):
        raise InputError(f"{prior_path}: none of {n} draws of this prior releases gas at its degassing "
                         "pressure (every draw is above its saturation pressure or fails); widen the "
                         "pressure range or check the volatile contents")
