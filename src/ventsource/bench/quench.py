"""Cost of the quench stage: one forward evaluation with it against one without,
on the same prior draws, in the same process (CPU seconds, best of three)."""
import copy

import numpy as np


def bench_quench(spec, theta, best_of, batches=(32, 2000)):
    """Print and return {batch: (us with, us without, ratio)} for the prior's quench model
    (gas_buffered in the shipped priors) against quench = "none"."""
    from ventsource.forward.model import ForwardModel
    with_q = ForwardModel(spec)
    plain_spec = copy.copy(spec)
    plain_spec.models = dict(spec.models, quench="none")
    without = ForwardModel(plain_spec)
    with_q.ratios(theta[:8])
    out = {}
    for batch in batches:
        chunks = [theta[i:i + batch] for i in range(0, min(theta.shape[0], 100 * batch), batch)]
        n = sum(c.shape[0] for c in chunks)
        t_with = best_of(lambda: [with_q.ratios(c) for c in chunks]) / n
        t_without = best_of(lambda: [without.ratios(c) for c in chunks]) / n
        ratio = t_with / t_without
        out[batch] = (t_with * 1e6, t_without * 1e6, ratio)
        failed = int(np.sum(with_q.status(theta[:batch]) == 2))
        print(f"[forward] quench '{with_q.quench}', batch {batch}: {t_with * 1e6:.2f} us/evaluation "
              f"against {t_without * 1e6:.2f} without -> {ratio:.2f}x (target <= 2x); "
              f"{failed} of {min(batch, theta.shape[0])} failed")
    return out
