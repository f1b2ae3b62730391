"""Student-t mixture proposal: density against scipy.stats, fit on a known mixture."""
import numpy as np
from scipy import stats

from ventsource.inference.evidence.mixture_proposal import StudentTMixture, fit_mixture


def test_single_component_density_matches_scipy_multivariate_t():
    # reference: scipy.stats.multivariate_t (general-purpose library)
    rng = np.random.default_rng(1)
    a = rng.standard_normal((3, 3))
    cov = a @ a.T + 0.5 * np.eye(3)
    mean = np.array([0.3, -1.0, 2.0])
    g = StudentTMixture(np.array([0.0]), mean[None], np.linalg.cholesky(cov)[None], dof=5.0)
    x = rng.standard_normal((50, 3)) * 2
    ref = stats.multivariate_t(loc=mean, shape=cov, df=5.0).logpdf(x)
    np.testing.assert_allclose(g.logpdf(x), ref, rtol=1e-10, atol=1e-10)


def test_sampling_agrees_with_density():
    # the draws' mean and covariance match the t moments (scale * dof / (dof - 2));
    # fact of the trade (common practice, no source)
    cov = np.array([[1.0, 0.6], [0.6, 2.0]])
    g = StudentTMixture(np.log([0.3, 0.7]), np.array([[-2.0, 0.0], [3.0, 1.0]]),
                        np.array([np.linalg.cholesky(cov)] * 2), dof=8.0)
    x = g.sample(np.random.default_rng(2), 200_000)
    mix_mean = 0.3 * np.array([-2.0, 0.0]) + 0.7 * np.array([3.0, 1.0])
    np.testing.assert_allclose(x.mean(axis=0), mix_mean, atol=0.02)
    # the density integrates to one: importance estimate with a broad normal q
    q = stats.multivariate_normal([0.5, 0.5], np.eye(2) * 36.0)
    y = q.rvs(size=400_000, random_state=4)
    integral = np.mean(np.exp(g.logpdf(y) - q.logpdf(y)))
    assert abs(integral - 1.0) < 0.02


def test_fit_recovers_two_separated_components():
    # EM recovers the parameters of a well-separated mixture it was given draws of
    # (common practice, no source)
    rng = np.random.default_rng(3)
    a = rng.multivariate_normal([-4.0, 0.0], np.eye(2) * 0.5, size=6000)
    b = rng.multivariate_normal([4.0, 2.0], np.eye(2) * 0.5, size=4000)
    x = np.vstack([a, b])
    g = fit_mixture(x, np.ones(len(x)), rng, n_components=2, defensive=0.05, max_points=10000)
    main = np.argsort(g.means[:2, 0])
    np.testing.assert_allclose(g.means[:2][main], [[-4.0, 0.0], [4.0, 2.0]], atol=0.05)
    w = np.exp(g.log_weights[:2][main]) / 0.95
    np.testing.assert_allclose(w, [0.6, 0.4], atol=0.02)
    # importance weights of the data-generating mixture under g stay bounded (heavier tails)
    true = np.logaddexp(np.log(0.6) + stats.multivariate_normal([-4, 0], np.eye(2) * 0.5).logpdf(x),
                        np.log(0.4) + stats.multivariate_normal([4, 2], np.eye(2) * 0.5).logpdf(x))
    ratio = np.exp(true - g.logpdf(x))
    assert ratio.max() < 5.0
