"""The forward model, documented for the public interface."""
from ventsource.forward.model import ForwardModel as _ForwardModel


class ForwardModel(_ForwardModel):
    """The forward model: parameters in, gas ratios out (magma degassing, gas
    speciation, SO2 scrubbing), for the melt and model choices of a prior.

    ``ForwardModel(prior, ratio_names)``; ``ratios(theta)`` takes full parameter
    vectors (one row per state, columns in ``prior.parameter_names``) and returns
    molar ratios (NaN where the magma holds no gas); ``state(theta)`` also returns
    the gas, the melt and the saturation pressure. The same class as
    ventsource.forward.model.ForwardModel, with this documentation.

    >>> import numpy as np, ventsource as vs
    >>> prior = vs.load_prior("demo_mount_kerrow_fast")
    >>> model = vs.ForwardModel(prior, ratio_names=("SO2/CO2", "H2S/SO2"))
    >>> theta = prior.full(prior.sample(np.random.default_rng(0), 4))
    >>> ratios = model.ratios(theta)
    >>> ratios.shape
    (4, 2)
    >>> bool(np.all(ratios[np.isfinite(ratios)] > 0))
    True
    """


__all__ = ["ForwardModel"]
