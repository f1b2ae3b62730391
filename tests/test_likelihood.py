"""Likelihood of measured ratios: checks against scipy.stats densities and quadrature."""
import numpy as np
import pytest
from scipy import integrate, stats

from ventsource.inference.likelihood import Likelihood, Measurement, MeasurementError, log_likelihood, sigma_ln

NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")


def _exact_term(y, mu, rel, kind, dof):
    """Exact-value log-likelihood term of ln-observation y, computed by the package.

    Observation and prediction are both scaled by exp(-(y + mu)/2) (a common factor of the
    two ratios), so exp() stays finite far into the tails; the log-space term depends only
    on y - mu."""
    c = -(y + mu) / 2.0
    m = Measurement(NAMES[:1], [np.exp(y + c)], rel, [0])
    return log_likelihood(m, [[np.exp(mu + c)]], kind=kind, dof=dof)[0]


@pytest.mark.parametrize("kind,dof", [("normal", 4.0), ("student_t", 4.0), ("student_t", 2.5)])
@pytest.mark.parametrize("flag", [-1, 1])
@pytest.mark.parametrize("mu", [np.log(0.02), np.log(0.05), np.log(0.2)])
def test_censored_term_equals_integral_of_exact_likelihood(kind, dof, flag, mu):
    # reference: scipy.integrate.quad of the exact density over the censored region
    limit, rel = 0.05, 0.2
    m = Measurement(NAMES[:1], [limit], rel, [flag])
    got = log_likelihood(m, [[np.exp(mu)]], kind=kind, dof=dof)[0]
    # the integrand is the package's own exact term (beyond |y - mu| = 1400 it is neglected)
    f = lambda y: np.exp(_exact_term(y, mu, rel, kind, dof)) if abs(y - mu) < 1400 else 0.0
    a, b = (-np.inf, np.log(limit)) if flag == -1 else (np.log(limit), np.inf)
    ref, _ = integrate.quad(f, a, b, epsabs=1e-13, epsrel=1e-10)
    assert got == pytest.approx(np.log(ref), abs=1e-6)


def test_exact_terms_match_scipy_densities():
    # reference: scipy.stats.norm / scipy.stats.t log densities of ln(ratio)
    vals = np.array([1.3, 0.2, 45.0])
    rel = np.array([0.1, 0.2, 0.15])
    pred = np.array([[1.0, 0.25, 60.0], [2.0, 0.1, 30.0]])
    m = Measurement(NAMES, vals, rel)
    s = np.log1p(rel)
    ref_n = stats.norm.logpdf(np.log(vals), np.log(pred), s).sum(axis=1)
    ref_t = stats.t.logpdf(np.log(vals), 3.0, np.log(pred), s).sum(axis=1)
    np.testing.assert_allclose(log_likelihood(m, pred), ref_n, rtol=1e-12)
    np.testing.assert_allclose(log_likelihood(m, pred, kind="student_t", dof=3.0), ref_t, rtol=1e-12)


def test_sigma_ln_convention():
    # ln(1 + r): the +1 sigma bound x(1 + r) is exactly one sigma in log space (module doc)
    assert sigma_ln(0.15) == pytest.approx(np.log(1.15))
    assert sigma_ln(1e-4) == pytest.approx(1e-4, rel=1e-4)   # delta-method limit r


def test_nan_prediction_row_is_minus_inf_and_others_finite():
    m = Measurement(NAMES, [1.3, 0.2, 45.0], 0.15)
    pred = np.array([[1.0, 0.25, 60.0], [np.nan, np.nan, np.nan], [1.0, np.nan, 60.0], [-1.0, 0.2, 40.0]])
    ll = log_likelihood(m, pred)
    assert np.isfinite(ll[0])
    assert np.all(ll[1:] == -np.inf)


def test_missing_value_is_absent():
    pred = np.array([[1.0, 0.25, 60.0], [2.0, 0.1, 30.0]])
    full = Measurement(NAMES, [1.3, np.nan, 45.0], 0.15)
    reduced = Measurement(("SO2/CO2", "H2O/CO2"), [1.3, 45.0], 0.15)
    lik = Likelihood(full)
    assert lik.pointwise(pred).shape == (2, 2)
    np.testing.assert_allclose(lik(pred), log_likelihood(reduced, pred[:, [0, 2]]), rtol=1e-14)
    # a NaN prediction in the missing column does not matter
    pred2 = pred.copy()
    pred2[:, 1] = np.nan
    np.testing.assert_allclose(lik(pred2), lik(pred), rtol=1e-14)


def test_upper_limit_not_replaced_by_limit_value():
    m_cens = Measurement(NAMES[:1], [0.05], 0.2, [-1])
    m_exact = Measurement(NAMES[:1], [0.05], 0.2, [0])
    pred = np.array([[1e-4], [0.05], [0.5], [0.0]])
    lc = log_likelihood(m_cens, pred)
    le = log_likelihood(m_exact, pred)
    assert not np.allclose(lc, le)
    # prediction far below the limit: observation surely below it, log P -> 0
    assert lc[0] == pytest.approx(0.0, abs=1e-12)
    # prediction exactly at the limit: P = 1/2 for a symmetric noise
    assert lc[1] == pytest.approx(np.log(0.5), abs=1e-12)
    # species absent (ratio 0) is fully compatible with an upper limit
    assert lc[3] == 0.0
    assert le[3] == -np.inf


def test_prediction_column_order_from_forward_names():
    m = Measurement(("H2S/SO2", "SO2/CO2"), [0.2, 1.3], 0.15)
    pred = np.array([[1.0, 0.25, 60.0]])
    a = log_likelihood(m, pred, prediction_names=NAMES)
    b = log_likelihood(m, pred[:, [1, 0]])
    np.testing.assert_allclose(a, b)
    with pytest.raises(MeasurementError, match="not among the model outputs"):
        Likelihood(Measurement(("CO/CO2",), [0.01]), prediction_names=NAMES)


def test_from_strings_and_bad_input_messages():
    m = Measurement.from_strings({"SO2/CO2": "1.2", "H2S/SO2": "<0.05", "H2O/CO2": ">40", "H2/H2O": None},
                                 relative_sigma=0.1, label="t1")
    assert m.censoring.tolist() == [0, -1, 1, 0]
    assert np.isnan(m.values[3]) and m.observed_names == NAMES
    for bad, pat in [(dict(values=[-1.0, 1, 1]), "must be positive"),
                     (dict(values=[1.0, 1.0]), "2 values for 3"),
                     (dict(values=[1, 1, 1], censoring=[0, 2, 0]), "censoring flags"),
                     (dict(values=[1, 1, 1], relative_sigma=[0.1, 0, 0.1]), "relative_sigma")]:
        with pytest.raises(MeasurementError, match=pat) as ei:
            Measurement(NAMES, **bad)
        assert "\n" not in str(ei.value)
    with pytest.raises(MeasurementError, match="cannot read"):
        Measurement.from_strings({"SO2/CO2": "<abc"})
    with pytest.raises(MeasurementError, match="kind"):
        Likelihood(m, kind="cauchy")
