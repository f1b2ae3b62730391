"""Simulation-based calibration of the window model (Talts et al. 2018, arXiv:1804.06788).

Windows of 8 rows drawn from the window model's own prior (hierarchical pooled pressures,
each row M0 with probability pi0 or M1 with its own scrubbed fraction), simulated with the
package's forward model and the likelihood's noise model, inverted by `infer_window`
(tests/window_sbc_tools.py says exactly how). Three criteria:

* the rank of each shared truth among 49 thinned posterior draws is uniform (chi-square,
  scipy.stats.chisquare, p > 0.01 per parameter; 10 bins of 5 ranks);
* the posterior 90 % bands hold 85-95 % of the truths (all shared parameters pooled);
* P(M0) is reliable: among rows given P(M0) ~ p a share p came from M0, per bin of
  P(M0) within the binomial 2-sigma band (bins of at least 10 rows; Dawid 1982,
  J. Am. Stat. Assoc. 77:605). Rows of one window share a posterior, so their P(M0) are
  not independent; the band is the independent-rows one (common practice, no source).
  With five bins, a calibrated forecast misses one 2-sigma band in about one run in five
  (1 - 0.954^5; the criterion as the issue states it).

Reduced setting, and why: this machine has 2 shared cores and one 8-row window of the
shipped arc_basalt prior (capacity sulfur, evolving redox, gas-buffered quench, seven free
magma parameters) costs minutes, so tests/data/window_sbc.toml keeps three free magma
parameters (dfmq, co2_ppm, s_partition; temperature, H2O and S fixed), buffered redox,
sulfur by partition coefficient, no quench, pooled pressures (the default, so the copula's
centre and spread are calibrated too) and three ratios; 200 particles x 2 runs and no
change-of-source check (it does not enter the posterior). The calibration is of the SMC
engine and its move schedule as of this test's writing; re-measure after changing them.

Measured (windows 0-99 of seed 2026, run in the background on the 2-core machine under
load; the slow test below runs the same windows): 11.4 CPU-s per window (median), 1127
CPU-s in all; rank chi-square p dfmq 0.883, co2_ppm 0.898, s_partition 0.637,
pressure_pool_centre 0.834, pressure_pool_spread 0.798; 90 % coverage 0.894 overall
(0.87-0.92 per parameter); P(M0) reliability, bin: n, mean P(M0), share from M0, 2 sigma:
[0, .2) 305 0.016 0.026 0.015; [.2, .4) 34 0.300 0.265 0.157; [.4, .6) 50 0.505 0.560
0.141; [.6, .8) 129 0.714 0.744 0.080; [.8, 1] 282 0.882 0.908 0.038. 13 of the 100
windows were flagged rhat_high (R-hat up to 1.088 with 2 runs of 200 particles).

Re-measured on 0.4.1 (the jump move rule of window main runs, the faster forward sweeps;
this slow test, one helper job beside it): 6.0 CPU-s per window (median), 580 in all;
rank chi-square p dfmq 0.898, co2_ppm 0.798, s_partition 0.437, pressure_pool_centre 0.956,
pressure_pool_spread 0.964; 90 % coverage 0.898 overall (0.88-0.93 per parameter); P(M0)
reliability within 2 sigma in every bin ([0, .2) 0.016 vs 0.026 +- 0.014; [.2, .4) 0.303
vs 0.243 +- 0.151; [.4, .6) 0.509 vs 0.600 +- 0.141; [.6, .8) 0.712 vs 0.754 +- 0.082;
[.8, 1] 0.880 vs 0.899 +- 0.038).

Re-measured on 0.4.2 (window main runs move by the ridge rule, 30 moves a stage, 60 more
at beta = 1 for runs that hit the cap; this slow test, another slow test on the other
core): 5.1 CPU-s per window (median), 525 in all; rank chi-square p dfmq 0.817, co2_ppm
0.946, s_partition 0.616, pressure_pool_centre 0.720, pressure_pool_spread 0.616; 90 %
coverage 0.912 overall (0.88-0.93 per parameter); P(M0) reliability within 2 sigma in
every bin ([0, .2) 0.015 vs 0.023 +- 0.014; [.2, .4) 0.304 vs 0.308 +- 0.147; [.4, .6)
0.515 vs 0.600 +- 0.141; [.6, .8) 0.713 vs 0.719 +- 0.082; [.8, 1] 0.880 vs 0.909 +-
0.038).

Since 0.5.0 (persistent hypotheses: the generator draws a persistence rho per window,
uniform on [0, 1], and the rows' hypotheses as its Markov chain; the model integrates rho
out, window_sbc_tools.py): rows of one window now often share one true state, so the
reliability band counts a window as one cluster (Liang and Zeger 1986; the binomial band
is printed beside it), which widens the bands, and the calibration runs 200 windows
(0-199 of seed 2026) to keep its power. Measured (the same windows as this test, two
background jobs beside other work): 6.7 CPU-s per window (median), 1368 in all; rank
chi-square p dfmq 0.911, co2_ppm 0.789, s_partition 0.256, pressure_pool_centre 0.770,
pressure_pool_spread 0.911; 90 % coverage 0.910 (0.90-0.93 per parameter); P(M0)
reliability within the cluster band in every bin ([0, .2) 0.019 vs 0.021 +- 0.011;
[.2, .4) 0.303 vs 0.336 +- 0.101; [.4, .6) 0.512 vs 0.598 +- 0.101; [.6, .8) 0.711 vs
0.725 +- 0.078; [.8, 1] 0.915 vs 0.913 +- 0.031). Each half alone passes too (windows
0-99: rank p 0.30-0.996, coverage 0.902; 100-199: 0.059-0.978, 0.918). With rho sampled
as a shared parameter (a first version), windows 0-99 missed the [.4, .6) bin (0.654
against 0.513 +- 0.124) and 100-199 gave dfmq rank p 0.011.

Results are model- and prior-dependent: they say the window sampler inverts this model
honestly; they do not say the model describes any volcano.
"""
import numpy as np
import pytest
from scipy import stats

import window_sbc_tools as sbc

N_WINDOWS = 200   # 100 until 0.4.2; why 200 since 0.5.0: the module's docstring


@pytest.fixture(scope="module")
def model():
    return sbc.setup()


# ---- the machinery (default suite) ----------------------------------------------------------

def test_pooled_row_pressures_follow_the_prior_files_pressure_prior(model):
    """Each row's pressure, over draws of the copula's centre and spread, is the prior
    file's log-uniform(20, 1500) (the copula keeps every row's own prior; pooled_pressure.py):
    Kolmogorov-Smirnov against scipy.stats.loguniform."""
    spec, _, target = model
    rng = np.random.default_rng(11)
    dist = spec.distributions["pressure_bar"]
    first = np.array([sbc.row_pressures(target, dist, target.shared_prior.sample(rng, 1)[0], rng, 8)[0]
                      for _ in range(2000)])
    assert stats.kstest(first, stats.loguniform(20.0, 1500.0).cdf).pvalue > 0.01
    # within a window, a small spread pulls the rows together: the copula is used
    psi = target.shared_prior.sample(rng, 1)[0]
    psi[-2:] = (0.0, 0.02)
    tight = sbc.row_pressures(target, dist, psi, rng, 8)
    assert np.ptp(np.log(tight)) < 0.25 * np.log(1500.0 / 20.0)


def test_reliability_band_and_rank_test_match_scipy():
    """The per-bin band is 2 binomial standard deviations of the share (scipy.stats.binom);
    the rank p-value is the chi-square survival function of the histogram (scipy.stats.chi2)."""
    rng = np.random.default_rng(3)
    p = rng.random(400)
    came = rng.random(400) < p
    for lo, hi, n, p_bar, share, band in sbc.reliability_table(p, came):
        sel = (p >= lo) & ((p < hi) if hi < 1 else (p <= hi))
        assert n == sel.sum() and share == pytest.approx(came[sel].mean())
        assert band == pytest.approx(2.0 * stats.binom(n, p_bar).std() / n)
    # a forecast calibrated by construction (in each bin exactly the share p_b from M0)
    # passes; the same rows read as coin flips (every share 0.5) fail
    p_cal = np.repeat([0.1, 0.3, 0.5, 0.7, 0.9], 100)
    came_cal = np.concatenate([np.arange(100) < round(100 * pb) for pb in (0.1, 0.3, 0.5, 0.7, 0.9)])
    assert sbc.reliability_ok(sbc.reliability_table(p_cal, came_cal))
    assert not sbc.reliability_ok(sbc.reliability_table(p_cal, np.tile(np.arange(100) < 50, 5)))
    ranks = rng.integers(0, 50, size=(300, 2))
    counts = np.histogram(ranks[:, 0], bins=10, range=(0, 50))[0]
    chi2 = float(((counts - 30.0) ** 2 / 30.0).sum())
    assert sbc.rank_p_values(ranks)[0] == pytest.approx(stats.chi2(9).sf(chi2))


def test_cluster_band_counts_a_window_of_identical_rows_once():
    """The cluster-robust band (Liang and Zeger 1986, from memory): a window whose rows are copies of one
    row carries one row's information, so copying every row 8 times into its own window
    leaves the band where the rows stand alone; copies counted as independent rows would
    shrink it by sqrt(8). With one row per window it is the residuals' own 2 sigma."""
    rng = np.random.default_rng(8)
    p = rng.random(300)
    came = rng.random(300) < p
    alone = sbc.reliability_table(p, came, groups=np.arange(300))
    copies = sbc.reliability_table(np.repeat(p, 8), np.repeat(came, 8), groups=np.repeat(np.arange(300), 8))
    naive = sbc.reliability_table(np.repeat(p, 8), np.repeat(came, 8), groups=np.arange(2400))
    for a, c, nv in zip(alone, copies, naive):
        assert c[5] == pytest.approx(a[5]) and nv[5] == pytest.approx(a[5] / np.sqrt(8.0))
        sel = (p >= a[0]) & ((p < a[1]) if a[1] < 1 else (p <= a[1]))
        assert a[5] == pytest.approx(2.0 * np.sqrt(np.sum((came[sel] - p[sel]) ** 2)) / sel.sum())


def test_a_few_windows_and_an_overconfident_posterior_is_detected(model):
    """Four windows (100 particles x 2 runs, about 30 CPU-s in all): the window's own
    posterior covers its truths and ranks them without a U shape; the same draws shrunk
    to a quarter of their spread about the mean (an overconfident posterior) fail both
    (the check of tests/test_sampler.py, for windows)."""
    honest, shrunk = [], []
    for k in range(4):
        rec = sbc.one_window(model, 77, k, options=dict(n_particles=100), keep_draws=True)
        honest.append(rec)
        rng = np.random.default_rng([77, k, 1])
        shrunk.append(_shrink(model, rec, rng))
    assert _small_passes(honest), [r["ranks"] for r in honest]
    assert not _small_passes(shrunk)
    assert all(0.0 <= p <= 1.0 for r in honest for p in r["p_magmatic"])
    assert all(len(r["p_magmatic"]) == sbc.N_ROWS for r in honest)


def _shrink(model, rec, rng, factor=0.25):
    draws = np.asarray(rec["_draws"])
    draws = draws.mean(axis=0) + factor * (draws - draws.mean(axis=0))
    ranks, cover = sbc.rank_and_cover(draws, np.asarray(rec["truth"]), rng)
    return dict(rec, ranks=ranks.tolist(), cover90=cover.astype(int).tolist())


def _small_passes(records):
    # 4 windows x 6 shared parameters = 24 truths: at least 13 inside the 90 % bands
    # (binomial(24, 0.9) P(X < 13) < 1e-5, scipy.stats.binom) and the pooled ranks'
    # chi-square p > 0.001 in 5 bins of 10 ranks
    cover = np.concatenate([r["cover90"] for r in records])
    ranks = np.concatenate([r["ranks"] for r in records])
    counts = np.histogram(ranks, bins=5, range=(0, 50))[0]
    return cover.sum() >= 13 and stats.chisquare(counts).pvalue > 0.001


# ---- the calibration (slow) -------------------------------------------------------------------

@pytest.mark.slow
def test_window_sbc_200_windows(model, capsys):
    records = [sbc.one_window(model, 2026, k) for k in range(N_WINDOWS)]
    p, cover, table, names = sbc.criteria(records)
    with capsys.disabled():
        print("\n" + sbc.report(records))
    assert np.all(p > 0.01), dict(zip(names, p))
    assert 0.85 <= cover <= 0.95, cover
    assert sbc.reliability_ok(table), table
