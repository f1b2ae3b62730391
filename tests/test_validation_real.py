"""Validation of the inference on the real forward model (arc_basalt prior, reduced).

Reduced model: pressure_bar, temperature_c, h2o_wt, co2_ppm and s_partition are fixed
with spec.with_fixed, leaving dfmq, scrubbed_so2 and s_ppm free (M0: dfmq, s_ppm), so
brute-force prior Monte Carlo is affordable.  Synthetic measurements: SO2/CO2, H2S/SO2,
H2O/CO2 with 15 % relative 1-sigma, log-normal noise, seeded.

Checks and their sources:
* bridge-sampling P(M0) vs brute-force prior Monte Carlo evidence Z = E_prior[L]
  (the definition of the evidence; Kass and Raftery 1995, J. Am. Stat. Assoc. 90:773),
  within 0.03 (issue acceptance), and vs dynesty nested sampling (Speagle 2020,
  MNRAS 493:3132; reference library) in the slow set;
* simulation-based calibration (Talts et al. 2018, arXiv:1804.06788): ranks of the
  truth among posterior draws are uniform (chi-square at 1 %), 90 % central credible
  intervals cover the truth in 85-95 % of replicates (issue acceptance);
* recovery of P(M0) for magmatic and scrubbed gas (issue acceptance): reached when the
  prior pins the magma's S content and redox (tests/data/arc_basalt_constrained.toml);
  under the generic shipped prior it is not (kept as a strict expected failure).
"""
from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from dynesty_reference import dynesty_log_evidences
from ventsource.forward.model import ForwardModel
from ventsource.inference.row.one_measurement import infer, prior_monte_carlo_evidence
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.hypotheses.model_choice import posterior_model_probability
from ventsource.inference.priors import load_prior_file
from ventsource.inference.engines.emcee_engine import sample_posterior

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
PRIOR = Path(__file__).resolve().parents[1] / "priors" / "arc_basalt.toml"
FIXED = {"pressure_bar": 1000.0, "temperature_c": 1150.0, "h2o_wt": 4.0, "co2_ppm": 3000.0,
         "s_partition": 100.0, "quench_temperature_c": 900.0, "h2_retained_log10": 0.0}
KINDS = {"magmatic": 0, "scrubbed": 1, "ambiguous": 2}


@pytest.fixture(scope="module")
def reduced():
    spec = load_prior_file(PRIOR)
    for name, value in FIXED.items():
        if name in spec.parameter_names:  # s_partition: only with sulfur = "partition"
            spec = spec.with_fixed(name, value)
    return spec, ForwardModel(spec, ratio_names=NAMES)


def _truth(spec, forward, kind, rng):
    """A prior draw with scrubbed_so2 set by kind, that releases gas."""
    j = spec.free_names.index("scrubbed_so2")
    while True:
        t = spec.sample(rng, 1)[0]
        if kind == "magmatic":
            t[j] = 0.0
        elif kind == "scrubbed":
            t[j] = rng.uniform(0.7, 1.0)
        elif kind == "ambiguous":
            t[j] = rng.uniform(0.2, 0.45)
        pred = forward.ratios(spec.full(t[None]))[0]
        if np.all(np.isfinite(pred)) and np.all(pred > 0):
            return t, pred


def _measurement(spec, forward, kind, k):
    rng = np.random.default_rng(77 + 1000 * k + KINDS[kind])
    t, pred = _truth(spec, forward, kind, rng)
    y = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.size))
    return Measurement(NAMES, y, 0.15, label=f"{kind}{k}"), t


_CACHE: dict = {}


def _infer(reduced, kind, k):
    spec, fw = reduced
    if (kind, k) not in _CACHE:
        m, t = _measurement(spec, fw, kind, k)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _CACHE[(kind, k)] = (m, t, infer(m, spec, forward=fw, seed=3))
    return _CACHE[(kind, k)]


def _brute_force_p(reduced, m, n, seed):
    spec, fw = reduced
    z1 = prior_monte_carlo_evidence(m, spec, fw, n=n, seed=seed)
    z0 = prior_monte_carlo_evidence(m, spec.with_fixed("scrubbed_so2", 0.0), fw, n=n, seed=seed + 1)
    return posterior_model_probability(z0[0], z0[1], z1[0], z1[1], spec.p_magmatic)


FAST_SET = [("magmatic", 0), ("magmatic", 1), ("scrubbed", 0), ("scrubbed", 1), ("ambiguous", 0)]


@pytest.mark.parametrize("kind,k", FAST_SET)
def test_bridge_p_magmatic_matches_brute_force_fast(reduced, kind, k):
    # issue acceptance: |P_bridge - P_brute| <= 0.03; 100,000 prior draws per model here
    # (brute-force MC error ~0.01), 1,000,000 in the slow test
    m, _, res = _infer(reduced, kind, k)
    p_bf, err_bf = _brute_force_p(reduced, m, 100_000, seed=500 + k + 10 * KINDS[kind])
    assert err_bf < 0.02
    assert abs(res.p_magmatic - p_bf) <= 0.03, (kind, k, res.p_magmatic, p_bf, err_bf)
    assert res.p_magmatic_error < 0.03


def test_recovery_direction_fast(reduced):
    # weaker than the issue's criterion (see the xfail test below): averaged over the
    # fast set, magmatic gas must get a higher P(M0) than gas with >= 70 % SO2 scrubbed
    mag = [_infer(reduced, "magmatic", k)[2].p_magmatic for k in (0, 1)]
    scr = [_infer(reduced, "scrubbed", k)[2].p_magmatic for k in (0, 1)]
    assert np.mean(mag) > np.mean(scr) + 0.2, (mag, scr)


@pytest.mark.xfail(strict=True, reason=(
    "measured: under the shipped arc_basalt prior (pi0 = 0.5, scrubbed_so2 ~ U(0, 1)) with "
    "15 % errors, mean P(M0) for magmatic gas is 0.63 (0.46, 0.80; scrubbed: 0.22, 0.00; "
    "0.2.0 models; 0.3.0, six each in the slow test: 0.56 and 0.03), not "
    "> 0.8 and < 0.05: M0 is nested in M1 and s_ppm/dfmq absorb the scrubbing signal, so the "
    "Occam factor caps P(M0)"))
def test_recovery_issue_acceptance_fast(reduced):
    # issue acceptance: magmatic gas P(M0) > 0.8 on average; scrubbed_so2 >= 0.7: < 0.05
    mag = [_infer(reduced, "magmatic", k)[2].p_magmatic for k in (0, 1)]
    scr = [_infer(reduced, "scrubbed", k)[2].p_magmatic for k in (0, 1)]
    assert np.mean(mag) > 0.8 and np.mean(scr) < 0.05, (mag, scr)


CONSTRAINED = Path(__file__).resolve().parent / "data" / "arc_basalt_constrained.toml"


@pytest.fixture(scope="module")
def constrained():
    """arc_basalt with S content and dfmq pinned (as melt inclusions would) and a
    non-local beta(2, 2) prior on scrubbed_so2; same fixed values as `reduced` (its file
    has no quench stage, so the quench and plume parameters are not among them)."""
    spec = load_prior_file(CONSTRAINED)
    for name, value in FIXED.items():
        if name in spec.distributions:
            spec = spec.with_fixed(name, value)
    return spec, ForwardModel(spec, ratio_names=NAMES)


def _constrained_p(constrained, kind, k):
    spec, fw = constrained
    m, _ = _measurement(spec, fw, kind, k)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return infer(m, spec, forward=fw, seed=3, target_ess=500).p_magmatic


def test_recovery_issue_acceptance_constrained_magma(constrained):
    # issue acceptance: mean P(M0) > 0.8 for magmatic gas, < 0.05 for scrubbed_so2 >= 0.7,
    # 15 % errors on three ratios, pi0 = 0.5, truths drawn from the prior itself.
    # Measured (8 + 4 measurements): magmatic mean 0.878, scrubbed 0.000; with a uniform
    # instead of the non-local scrubbing prior: 0.811 and 0.000.
    mag = [_constrained_p(constrained, "magmatic", k) for k in range(8)]
    scr = [_constrained_p(constrained, "scrubbed", k) for k in range(4)]
    assert np.mean(mag) > 0.8, np.round(mag, 3)
    assert np.mean(scr) < 0.05, np.round(scr, 3)


# ---- simulation-based calibration (Talts et al. 2018) ------------------------------------

def _sbc(reduced, n_rep, seed, n_rank=49, target_ess=200.0):
    spec, fw = reduced
    rng = np.random.default_rng(seed)
    d = len(spec.free_names)
    ranks = np.empty((n_rep, d), dtype=int)
    cover = np.empty((n_rep, d), dtype=bool)
    for i in range(n_rep):
        # truth from the prior of M1 (all free parameters, scrubbing included)
        while True:
            t = spec.sample(rng, 1)[0]
            pred = fw.ratios(spec.full(t[None]))[0]
            if np.all(np.isfinite(pred)) and np.all(pred > 0):
                break
        y = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.size))
        lik = Likelihood(Measurement(NAMES, y, 0.15), prediction_names=NAMES)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            r = sample_posterior(spec, fw, lik, seed=int(rng.integers(2**31)), target_ess=target_ess)
        flat = r.flat
        # thin to roughly independent draws before ranking (Talts et al. 2018, sec. 5)
        pick = flat[rng.choice(len(flat), n_rank, replace=False)]
        ranks[i] = (pick < t[None, :]).sum(axis=0)
        lo, hi = np.quantile(flat, [0.05, 0.95], axis=0)
        cover[i] = (t >= lo) & (t <= hi)
    return ranks, cover


def _chi2_uniform_p(ranks_col, n_rank, bins):
    counts = np.histogram(ranks_col, bins=bins, range=(0, n_rank + 1))[0]
    return stats.chisquare(counts).pvalue


def test_sbc_fast_subset(reduced):
    n = 20
    ranks, cover = _sbc(reduced, n, seed=2024)
    for j in range(ranks.shape[1]):
        # 5 bins keep the expected count at 4 per bin for 20 replicates
        assert _chi2_uniform_p(ranks[:, j], 49, 5) > 0.01, (j, np.histogram(ranks[:, j], 5, (0, 50))[0])
        # 20 replicates cannot resolve 85-95 %: binomial(20, 0.9) puts 99 % of its mass
        # at >= 14 covered (the 85-95 % band is checked with 200 replicates, slow test)
        assert 14 <= cover[:, j].sum() <= 20, (j, cover[:, j].sum())


@pytest.mark.slow
def test_sbc_full():
    spec = load_prior_file(PRIOR)
    for name, value in FIXED.items():
        if name in spec.parameter_names:  # s_partition: only with sulfur = "partition"
            spec = spec.with_fixed(name, value)
    ranks, cover = _sbc((spec, ForwardModel(spec, ratio_names=NAMES)), 200, seed=7, target_ess=300.0)
    for j in range(ranks.shape[1]):
        assert _chi2_uniform_p(ranks[:, j], 49, 10) > 0.01, (j, np.histogram(ranks[:, j], 10, (0, 50))[0])
        assert 0.85 <= cover[:, j].mean() <= 0.95, (j, cover[:, j].mean())


# ---- slow: 1,000,000 prior draws, more measurements, dynesty -------------------------------

SLOW_SET = [("magmatic", 0), ("magmatic", 1), ("magmatic", 2), ("scrubbed", 0), ("scrubbed", 1),
            ("scrubbed", 2), ("ambiguous", 0), ("ambiguous", 1)]


@pytest.mark.slow
@pytest.mark.parametrize("kind,k", SLOW_SET)
def test_bridge_p_magmatic_matches_brute_force_million(reduced, kind, k):
    # issue acceptance: within 0.03 of brute force with >= 1,000,000 prior draws per model
    m, _, res = _infer(reduced, kind, k)
    p_bf, _ = _brute_force_p(reduced, m, 1_000_000, seed=900 + k + 10 * KINDS[kind])
    assert abs(res.p_magmatic - p_bf) <= 0.03, (kind, k, res.p_magmatic, p_bf)


@pytest.mark.slow
@pytest.mark.parametrize("kind,k", [("magmatic", 0), ("scrubbed", 0), ("ambiguous", 0)])
def test_bridge_p_magmatic_matches_dynesty(reduced, kind, k):
    # reference library: dynesty static nested sampling (Speagle 2020, MNRAS 493:3132)
    spec, fw = reduced
    m, _, res = _infer(reduced, kind, k)
    log_z = dynesty_log_evidences(spec, fw, Likelihood(m, prediction_names=NAMES))
    p_ns, err_ns = posterior_model_probability(log_z["M0"][0], log_z["M0"][1], log_z["M1"][0],
                                               log_z["M1"][1], spec.p_magmatic)
    assert abs(res.p_magmatic - p_ns) <= 0.03, (kind, k, res.p_magmatic, p_ns, err_ns)


@pytest.mark.slow
def test_recovery_averages_slow(reduced):
    # issue acceptance numbers are printed; the assertion is the direction (see the fast
    # xfail test for why > 0.8 / < 0.05 is not reached under the shipped prior)
    mag = [_infer(reduced, "magmatic", k)[2].p_magmatic for k in range(6)]
    scr = [_infer(reduced, "scrubbed", k)[2].p_magmatic for k in range(6)]
    print(f"mean P(M0): magmatic {np.mean(mag):.3f} {np.round(mag, 3)}, scrubbed {np.mean(scr):.3f} {np.round(scr, 3)}")
    assert np.mean(mag) > np.mean(scr) + 0.2
