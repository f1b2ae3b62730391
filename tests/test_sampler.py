"""emcee sampler: posterior against the analytic linear-Gaussian posterior, seeding,
bookkeeping of forward evaluations and failed states, and simulation-based calibration."""
import numpy as np
import pytest
from scipy import stats

from toy_models import (LinearLogForward, ScrubToyForward, ToyPrior, gaussian_posterior,
                        scrub_toy_prior)
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.engines.emcee_engine import SamplerError, sample_posterior

A = [0.1, -0.3, 1.0]
B = [[1.0, 0.5], [0.2, -1.0], [0.7, 0.7]]
MU0, SD0 = [0.0, 0.5], [1.0, 0.7]


def _linear_setup(y=(0.8, -0.9, 1.6), rel=0.2):
    pr = ToyPrior({"x": ("normal", MU0[0], SD0[0]), "w": ("normal", MU0[1], SD0[1])})
    fw = LinearLogForward(pr, A, B, ("A", "B", "C"))
    m = Measurement(("A", "B", "C"), np.exp(y), rel)
    return pr, fw, m


def test_linear_gaussian_posterior_matches_analytic():
    # reference: conjugate linear-Gaussian posterior (Bishop 2006, eqs. 2.116-2.117; from memory)
    pr, fw, m = _linear_setup()
    r = sample_posterior(pr, fw, Likelihood(m), seed=11, target_ess=2000)
    mean, cov = gaussian_posterior(np.log(m.values), np.log1p(m.relative_sigma), A, B, MU0, SD0)
    sd = np.sqrt(np.diag(cov))
    ess = r.stats["ess_estimate"]
    assert r.converged
    np.testing.assert_allclose(r.flat.mean(axis=0), mean, atol=5 * sd.max() / np.sqrt(ess))
    np.testing.assert_allclose(r.flat.std(axis=0), sd, rtol=0.06)
    corr = np.corrcoef(r.flat.T)[0, 1]
    assert corr == pytest.approx(cov[0, 1] / (sd[0] * sd[1]), abs=0.05)


def test_seeded_runs_are_reproducible():
    pr, fw, m = _linear_setup()
    a = sample_posterior(pr, fw, Likelihood(m), seed=5, target_ess=300, max_steps=600)
    b = sample_posterior(pr, fw, Likelihood(m), seed=5, target_ess=300, max_steps=600)
    c = sample_posterior(pr, fw, Likelihood(m), seed=6, target_ess=300, max_steps=600)
    np.testing.assert_array_equal(a.chain, b.chain)
    assert not np.array_equal(a.chain[:, -1], c.chain[:, -1])


class _CountingForward:
    """Wraps a forward model and records batch sizes and NaN rows independently."""

    def __init__(self, inner):
        self.inner = inner
        self.ratio_names = inner.ratio_names
        self.batches = []
        self.nan_rows = 0

    def ratios(self, theta_full):
        out = self.inner.ratios(theta_full)
        self.batches.append(len(out))
        self.nan_rows += int(np.isnan(out).any(axis=1).sum())
        return out


def test_forward_evaluations_and_failed_states_are_counted():
    pr = scrub_toy_prior()
    fw = _CountingForward(ScrubToyForward(pr, no_gas_above=0.8))
    # deep gas (depth near 0.75): part of the walkers' proposals fall in the no-gas region
    m = Measurement(ScrubToyForward.ratio_names, [np.exp(1 - 1.5), np.exp(-2 + 0.75), np.exp(4 - 2.25)], 0.15)
    r = sample_posterior(pr, fw, Likelihood(m), seed=3, n_walkers=32, target_ess=500)
    assert r.n_forward_evals == sum(fw.batches)
    assert r.n_failed_states == fw.nan_rows
    assert r.n_failed_states > 0
    assert r.n_init_failed > 0          # about 20 % of prior draws have no gas
    # vectorised: after the start (2000 prior draws for the likelihood-weighted start, then
    # the whole ensemble once) the forward model gets half the ensemble per emcee
    # half-step, minus proposals outside the prior
    steps = np.array(fw.batches)
    big = steps[steps > 16]
    assert set(big.tolist()) <= {32, 128, 2000}, set(big.tolist())
    assert steps[0] == 2000
    assert steps[steps <= 16].max() == 16 and np.median(steps) > 8
    assert np.all(r.chain[:, :, 0] <= 0.8)  # no posterior draw in the no-gas region


def test_no_valid_start_gives_one_line_error():
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr, no_gas_above=-1.0)   # never any gas
    m = Measurement(ScrubToyForward.ratio_names, [1.0, 0.2, 20.0], 0.15)
    with pytest.raises(SamplerError, match="finite likelihood") as ei:
        sample_posterior(pr, fw, Likelihood(m), seed=0, n_walkers=8)
    assert "\n" not in str(ei.value)


# ---------------------------------------------------------------- SBC (Talts et al. 2018)
def _sbc(n_rep, seed, n_rank=49, target_ess=400, infer_rel=None):
    """Simulation-based calibration (Talts et al. 2018, arXiv:1804.06788, Algorithm 1) on the
    nonlinear scrubbing toy: ranks of the true value among n_rank posterior draws, and
    whether the central 90 % interval covers it."""
    pr = ToyPrior({"depth": ("uniform", 0.0, 0.9), "scrubbed_so2": ("uniform", 0.0, 0.9)})
    fw = ScrubToyForward(pr, no_gas_above=0.95)
    rng = np.random.default_rng(seed)
    rel = 0.3
    ranks, cover = [], []
    for i in range(n_rep):
        th = pr.sample(rng, 1)
        mu = np.log(fw.ratios(pr.full(th))[0])
        y = mu + np.log1p(rel) * rng.standard_normal(mu.size)
        m = Measurement(fw.ratio_names, np.exp(y), rel if infer_rel is None else infer_rel)
        r = sample_posterior(pr, fw, Likelihood(m), seed=int(rng.integers(2**31)),
                             target_ess=target_ess, min_tau_factor=20)
        flat = r.flat
        pick = flat[rng.choice(len(flat), n_rank, replace=False)]
        ranks.append((pick < th).sum(axis=0))
        lo, hi = np.quantile(flat, [0.05, 0.95], axis=0)
        cover.append((th[0] > lo) & (th[0] < hi))
    return np.array(ranks), np.array(cover)


def _sbc_small_passes(ranks, cover):
    # 20 replicates x 2 parameters: coverage of the 90 % interval >= 30 of 40
    # (binomial(40, 0.9) P(X < 30) ~ 0.002) and rank histogram chi-square p > 0.001
    counts = np.histogram(ranks.ravel(), bins=5, range=(0, 50))[0]
    return cover.sum() >= 30 and stats.chisquare(counts).pvalue > 0.001


def test_sbc_small_subset():
    ranks, cover = _sbc(20, seed=2024)
    assert _sbc_small_passes(ranks, cover), (cover.sum(), np.histogram(ranks.ravel(), 5, (0, 50))[0])


def test_sbc_small_subset_detects_overconfident_posterior():
    # the same check must fail when the likelihood is too narrow (sigma 0.1 instead of 0.3)
    ranks, cover = _sbc(20, seed=2024, infer_rel=0.1)
    assert not _sbc_small_passes(ranks, cover)


@pytest.mark.slow
def test_sbc_full():
    n = 200
    ranks, cover = _sbc(n, seed=7)
    for j in range(ranks.shape[1]):
        counts = np.histogram(ranks[:, j], bins=10, range=(0, 50))[0]
        assert stats.chisquare(counts).pvalue > 0.001, counts
        k = cover[:, j].sum()
        lo, hi = stats.binom.ppf([0.0005, 0.9995], n, 0.9)
        assert lo <= k <= hi, k


@pytest.mark.parametrize("space", ["unbounded", "prior"])
def test_bounded_posterior_matches_weighted_prior_draws(space):
    # reference: posterior moments by likelihood weighting of 400 000 prior draws
    # (self-normalised importance sampling with the prior as proposal)
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    m = Measurement(fw.ratio_names, [1.1, 0.22, 17.0], 0.15, [0, -1, 0])
    lik = Likelihood(m, prediction_names=fw.ratio_names)
    rng = np.random.default_rng(8)
    th = pr.sample(rng, 400_000)
    ll = lik(fw.ratios(pr.full(th)))
    w = np.exp(ll - ll.max())
    w /= w.sum()
    mean = w @ th
    sd = np.sqrt(w @ (th - mean) ** 2)
    r = sample_posterior(pr, fw, lik, seed=4, target_ess=2000, space=space)
    assert r.stats["space"] == space
    np.testing.assert_allclose(r.flat.mean(axis=0), mean, atol=0.1 * sd.max())
    np.testing.assert_allclose(r.flat.std(axis=0), sd, rtol=0.08)
