"""Model-averaged pressure of a row (workflow/averaged_pressure.py).

Reference: numpy.quantile with method="inverted_cdf" (the general-purpose library's
empirical quantile) on the pooled draws, where the mixture weights equal the draw
shares; the limits p = 1 and p = 0 give each model's own quantiles.
"""
import numpy as np
import pytest

from ventsource.workflow.averaged_pressure import mixture_quantiles


def test_equal_shares_are_the_pooled_sample_quantiles():
    rng = np.random.default_rng(4)
    x0, x1 = rng.lognormal(3.0, 0.4, 300), rng.lognormal(5.0, 0.6, 700)
    got = mixture_quantiles(x0, x1, 0.3)  # 300 of 1000 draws are M0's
    ref = np.quantile(np.concatenate([x0, x1]), [0.05, 0.5, 0.95], method="inverted_cdf")
    assert np.allclose(got, ref, rtol=0, atol=0)


@pytest.mark.parametrize("p, which", [(1.0, 0), (0.0, 1)])
def test_certain_model_gives_its_own_quantiles(p, which):
    rng = np.random.default_rng(5)
    x = [rng.normal(100.0, 10.0, 400), rng.normal(500.0, 50.0, 400)]
    got = mixture_quantiles(x[0], x[1], p)
    ref = np.quantile(x[which], [0.05, 0.5, 0.95], method="inverted_cdf")
    assert np.allclose(got, ref, rtol=0, atol=0)


def test_weights_move_the_median_between_the_models():
    x0, x1 = np.full(100, 10.0), np.full(100, 1000.0)
    assert mixture_quantiles(x0, x1, 0.8)[1] == 10.0
    assert mixture_quantiles(x0, x1, 0.2)[1] == 1000.0
