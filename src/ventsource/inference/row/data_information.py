"""How much one measurement said: the information summary (inference/information.py)
of the scrubbing model's posterior against its prior draws, kept on the result, and the
near_prior flag when the data barely moved P(M0) or the scrubbed fraction."""
from __future__ import annotations

import numpy as np

from ventsource.inference.information import information_summary


def attach_information(result, scrub_name="scrubbed_so2"):
    """result.information filled in and "near_prior" added to its flags when it applies;
    the result is returned. Uses the M1 posterior and the prior group of its idata."""
    idata = result.idata
    if idata is None or not hasattr(idata, "prior"):
        return result
    names = [n for n in idata.posterior.data_vars if n in idata.prior.data_vars]
    if len(names) < 1:
        return result
    prior = np.column_stack([idata.prior[n].values.reshape(-1) for n in names])
    post = np.column_stack([idata.posterior[n].values.reshape(-1) for n in names])
    p = result.p_magmatic if result.p_magmatic is not None and np.isfinite(result.p_magmatic) else None
    result.information = information_summary(names, prior, post, p, prior_p_magmatic(result),
                                             scrub_name)
    if result.information["near_prior"] and "near_prior" not in result.flags:
        result.flags.append("near_prior")
    return result


def prior_p_magmatic(result):
    """Prior P(M0): pi0, or with a release prior ([hypotheses]) the three-way prior's M0 share."""
    prior3 = (getattr(result, "hypotheses", None) or {}).get("prior")
    return float(prior3[0]) if prior3 else result.pi0
