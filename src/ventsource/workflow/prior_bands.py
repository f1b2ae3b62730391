"""What the prior alone says: its 5-95 % bands and its P(M0), drawn beside the posterior."""


def prior_bands(spec, n=4000, seed=0):
    """{free parameter: (5 %, 95 %) of its prior} from n seeded prior draws."""
    import numpy as np
    draws = np.asarray(spec.sample(np.random.default_rng(seed), n), dtype=float)
    return {name: tuple(float(v) for v in np.quantile(draws[:, j], [0.05, 0.95]))
            for j, name in enumerate(spec.free_names)}


def prior_p_magmatic(spec):
    """Prior P(M0) of the prior file: p_magmatic, less the release share with [hypotheses]."""
    from ventsource.inference.priors.hypotheses import prior_model_probabilities
    return prior_model_probabilities(spec)[0]
