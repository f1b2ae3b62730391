"""M0/M1 model choice and infer(): P(M0) against brute-force prior Monte Carlo, error
propagation, predictive-check flags, InferenceData contents."""
import warnings

import numpy as np
import pytest

from toy_models import ScrubToyForward, scrub_toy_prior
from ventsource.inference.row.one_measurement import CAUTION, InferenceError, infer, prior_monte_carlo_evidence
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.hypotheses.model_choice import posterior_model_probability, probability_below

warnings.filterwarnings("ignore", category=FutureWarning)

FAST = dict(target_ess=1000)


def _brute_force(m, pr, fw, n=300_000, seed=0, eps=0.05):
    """P(M0|data) and P(s < eps | data, M1) from prior draws only (likelihood weighting)."""
    lz1, e1 = prior_monte_carlo_evidence(m, pr, fw, n=n, seed=seed)
    lz0, e0 = prior_monte_carlo_evidence(m, pr.with_fixed("scrubbed_so2", 0.0), fw, n=n, seed=seed + 1)
    pi0 = pr.p_magmatic
    p0 = pi0 * np.exp(lz0) / (pi0 * np.exp(lz0) + (1 - pi0) * np.exp(lz1))
    rng = np.random.default_rng(seed + 2)
    th = pr.sample(rng, n)
    ll = Likelihood(m)(fw.ratios(pr.full(th)))
    w = np.exp(ll - ll.max())
    p_below = float(np.sum(w * (th[:, 1] < eps)) / w.sum())
    return p0, p_below


def test_posterior_model_probability_formula_and_error():
    # reference: Bayes' theorem written directly with Z values; error by Monte Carlo over
    # normally distributed log-evidence errors (independent of the delta method used)
    lz0, lz1, e0, e1, pi0 = -3.2, -2.7, 0.02, 0.03, 0.3
    p, err = posterior_model_probability(lz0, e0, lz1, e1, pi0)
    z0, z1 = np.exp(lz0), np.exp(lz1)
    assert p == pytest.approx(pi0 * z0 / (pi0 * z0 + (1 - pi0) * z1), rel=1e-12)
    rng = np.random.default_rng(0)
    a = lz0 + e0 * rng.standard_normal(200_000)
    b = lz1 + e1 * rng.standard_normal(200_000)
    pm = pi0 * np.exp(a) / (pi0 * np.exp(a) + (1 - pi0) * np.exp(b))
    assert err == pytest.approx(pm.std(), rel=0.03)
    assert posterior_model_probability(-np.inf, 0.0, -1.0, 0.01, 0.5)[0] == 0.0
    assert posterior_model_probability(-1.0, 0.01, -800.0, 0.01, 0.5)[0] == pytest.approx(1.0)
    with pytest.raises(ValueError, match="prior probability"):
        posterior_model_probability(0, 0, 0, 0, 1.0)


def test_probability_below():
    x = np.linspace(0, 1, 1001)
    p, e = probability_below(x, 0.25)
    assert p == pytest.approx(250 / 1001)
    assert e == pytest.approx(np.sqrt(p * (1 - p) / 1001))


def _toy_values(depth, s):
    return (np.exp(1 - 2 * depth) * (1 - s), np.exp(-2 + depth) / (1 - s), np.exp(4 - 3 * depth))


@pytest.mark.parametrize("values,censoring", [(_toy_values(0.4, 0.0), (0, 0, 0)),
                                              (_toy_values(0.4, 0.15), (0, 0, 0)),
                                              (_toy_values(0.4, 0.25), (0, 0, 0)),
                                              ((1.0, 0.25, 20.0), (0, 0, 0)),
                                              ((0.7, 0.2, 20.0), (0, -1, 0))])
def test_p_magmatic_matches_brute_force(values, censoring):
    # reference: brute-force prior Monte Carlo evidences of M0 and M1 (the same toy model)
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    m = Measurement(fw.ratio_names, values, 0.15, censoring)
    r = infer(m, pr, fw, seed=4, **FAST)
    p0_ref, pb_ref = _brute_force(m, pr, fw)
    assert abs(r.p_magmatic - p0_ref) < 0.03, (r.p_magmatic, p0_ref)
    assert abs(r.p_scrubbed_below_epsilon - pb_ref) < 0.03, (r.p_scrubbed_below_epsilon, pb_ref)
    assert r.p_magmatic_error < 0.03
    assert "unexplained" not in r.flags


def test_scrubbed_gas_is_explained_by_m1_only():
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    # SO2/CO2 lowered and H2S/SO2 raised by a factor 2.5 at depth 0.3 (s = 0.6)
    m = Measurement(fw.ratio_names, [np.exp(0.4) * 0.4, np.exp(-1.7) / 0.4, np.exp(3.1)], 0.15)
    r = infer(m, pr, fw, seed=1, **FAST)
    assert r.p_magmatic < 1e-3
    assert "m0_not_reproducing" in r.flags
    assert "m1_not_reproducing" not in r.flags and "unexplained" not in r.flags
    assert r.p_scrubbed_below_epsilon < 0.01


def test_measurement_neither_model_reproduces_is_flagged_unexplained():
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    # low SO2/CO2 (scrubbing-like) but also very low H2S/SO2, which scrubbing cannot give
    m = Measurement(fw.ratio_names, [0.3, 0.01, 20.0], 0.15)
    r = infer(m, pr, fw, seed=2, **FAST)
    assert "unexplained" in r.flags
    assert "m0_not_reproducing" in r.flags and "m1_not_reproducing" in r.flags


def test_inference_data_contents_summary_and_plot():
    import matplotlib
    matplotlib.use("Agg")
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    m = Measurement(fw.ratio_names, [0.9, np.nan, 20.0], 0.15)
    r = infer(m, pr, fw, seed=3, target_ess=500)
    idata = r.idata
    for g in ("posterior", "prior", "posterior_predictive", "log_likelihood", "observed_data",
              "sample_stats"):
        assert g in idata.groups(), g
    assert idata.posterior["scrubbed_so2"].attrs["units"] == "fraction of SO2 removed"
    assert set(idata.observed_data.data_vars) == {"SO2_CO2", "H2O_CO2"}   # missing ratio absent
    assert idata.observed_data["SO2_CO2"].attrs["long_name"] == "SO2/CO2"
    assert idata.sample_stats.attrs["n_forward_evals"] > 0
    ll_sum = sum(idata.log_likelihood[v].values for v in idata.log_likelihood.data_vars)
    np.testing.assert_allclose(ll_sum, idata.sample_stats["total_log_likelihood"].values)
    df = r.summary("M1")
    assert list(df.columns) == ["units", "median", "5%", "95%", "mean", "sd", "r_hat", "ess_bulk", "ess_tail"]
    assert list(df.index) == ["depth", "scrubbed_so2"]
    assert (df["5%"] < df["median"]).all() and (df["median"] < df["95%"]).all()
    fig = r.corner_plot()
    assert any(CAUTION in t.get_text() for t in fig.texts)
    assert r.idata_m0 is not None and "scrubbed_so2" not in r.idata_m0.posterior


def test_bad_options_give_one_line_errors():
    pr = scrub_toy_prior()
    fw = ScrubToyForward(pr)
    m = Measurement(fw.ratio_names, [0.9, 0.2, 20.0], 0.15)
    with pytest.raises(InferenceError, match="unknown option") as ei:
        infer(m, pr, fw, n_walker=10)
    assert "\n" not in str(ei.value)
    with pytest.raises(InferenceError, match="no free parameter 'scrubbed_so2'"):
        infer(m, pr.with_fixed("scrubbed_so2", 0.0), fw)
    with pytest.raises(InferenceError, match="not among the model outputs"):
        infer(Measurement(("CO/CO2",), [0.01]), pr, fw)
