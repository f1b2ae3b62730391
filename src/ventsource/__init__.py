"""ventsource: Bayesian inversion of volcanic gas ratios."""

__version__ = "0.3.0"



def infer(measurement, prior, seed=0, **options):
    """Posterior of the degassing conditions and P(purely magmatic); see ventsource.inference.one_measurement.infer."""
    from ventsource.inference.one_measurement import infer as _infer
    if isinstance(prior, (str, bytes)) or hasattr(prior, "__fspath__"):
        from ventsource.inference.priors import load_prior_file
        prior = load_prior_file(prior)
    return _infer(measurement, prior, seed=seed, **options)
