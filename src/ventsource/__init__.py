"""ventsource: Bayesian inversion of volcanic gas ratios."""

__version__ = "0.1.0"



def infer(measurement, prior, seed=0, **options):
    """Posterior of the degassing conditions and P(purely magmatic); see ventsource.inference.infer."""
    from .inference import infer as _infer
    if isinstance(prior, (str, bytes)) or hasattr(prior, "__fspath__"):
        from .priors import load_prior_file
        prior = load_prior_file(prior)
    return _infer(measurement, prior, seed=seed, **options)
