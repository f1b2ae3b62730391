"""Straight-line fits and water vapour for raw in-plume data (ventsource.workflow.plume)."""
import numpy as np
import pytest

from ventsource.workflow.plume.humidity import h2o_ppmv, saturation_vapour_pressure_hpa
from ventsource.workflow.plume.york import ols_fit, york_fit

# Pearson (1901) data with York's (1966) weights, as tabulated in York et al. (2004),
# Am. J. Phys. 72, 367, Table I (values from memory).
PEARSON_X = np.array([0.0, 0.9, 1.8, 2.6, 3.3, 4.4, 5.2, 6.1, 6.5, 7.4])
PEARSON_Y = np.array([5.9, 5.4, 4.4, 4.6, 3.5, 3.7, 2.8, 2.8, 2.4, 1.5])
WEIGHT_X = np.array([1000, 1000, 500, 800, 200, 80, 60, 20, 1.8, 1.0])
WEIGHT_Y = np.array([1, 1.8, 4, 8, 20, 20, 70, 70, 100, 500.0])


def test_york_2004_pearson_york_line():
    fit = york_fit(PEARSON_X, PEARSON_Y, 1 / np.sqrt(WEIGHT_X), 1 / np.sqrt(WEIGHT_Y))
    # York et al. (2004) best line for this set: slope -0.4805, intercept 5.4799 (from memory)
    assert fit.slope[0] == pytest.approx(-0.4805, abs=1e-4)
    assert fit.intercept[0] == pytest.approx(5.4799, abs=1e-4)
    assert fit.converged[0]


def test_york_matches_scipy_odr_on_pearson_york():
    from scipy import odr
    sx, sy = 1 / np.sqrt(WEIGHT_X), 1 / np.sqrt(WEIGHT_Y)
    fit = york_fit(PEARSON_X, PEARSON_Y, sx, sy)
    out = odr.ODR(odr.RealData(PEARSON_X, PEARSON_Y, sx=sx, sy=sy),
                  odr.Model(lambda beta, x: beta[0] + beta[1] * x), beta0=[5.0, -0.5]).run()
    # scipy.odr (ODRPACK) minimises the same weighted orthogonal distance: same line
    assert fit.slope[0] == pytest.approx(out.beta[1], rel=1e-5)
    assert fit.intercept[0] == pytest.approx(out.beta[0], rel=1e-5)
    # ODRPACK scales its standard errors by the residual variance: York's times sqrt(MSWD)
    scaled = fit.slope_sigma[0] * np.sqrt(fit.mswd[0])
    assert scaled == pytest.approx(out.sd_beta[1], rel=0.02)


def _synthetic_windows(n_windows, n_points, ratio, sigma_x, sigma_y, seed):
    """Plume-like windows: x = background + puff + noise, y = background + ratio * puff + noise."""
    rng = np.random.default_rng(seed)
    t = np.linspace(-3, 3, n_points)
    height = rng.uniform(10, 40, (n_windows, 1))
    puff = height * np.exp(-0.5 * (t / rng.uniform(0.5, 1.5, (n_windows, 1))) ** 2)
    x = 420 + puff + sigma_x * rng.standard_normal(puff.shape)
    y = 0.2 + ratio * puff + sigma_y * rng.standard_normal(puff.shape)
    return x, y


def test_york_one_sigma_covers_the_true_ratio_in_68_percent_of_1000_windows():
    ratio, sx, sy = 0.3, 1.0, 0.3
    x, y = _synthetic_windows(1000, 120, ratio, sx, sy, seed=11)
    fit = york_fit(x, y, sx, sy)
    covered = np.abs(fit.slope - ratio) <= fit.slope_sigma
    # a 1-sigma interval of a Gaussian estimate holds the truth 68.3 % of the time
    assert 0.63 <= covered.mean() <= 0.73, covered.mean()


def test_ols_is_biased_by_noise_in_x_and_york_is_not():
    ratio, sx, sy = 0.3, 6.0, 0.3     # x noise comparable to the plume signal
    x, y = _synthetic_windows(1000, 120, ratio, sx, sy, seed=12)
    york = york_fit(x, y, sx, sy).slope
    ols = ols_fit(x, y).slope
    se_york, se_ols = york.std() / np.sqrt(york.size), ols.std() / np.sqrt(ols.size)
    # regression dilution: OLS slope shrinks by var(signal) / (var(signal) + sx^2)
    assert ratio - ols.mean() > 10 * se_ols
    assert abs(york.mean() - ratio) < 3 * se_york


def test_ols_standard_errors_match_scipy_linregress():
    from scipy.stats import linregress
    x, y = _synthetic_windows(1, 50, 0.3, 1.0, 0.3, seed=3)
    fit, ref = ols_fit(x, y), linregress(x[0], y[0])
    assert fit.slope[0] == pytest.approx(ref.slope, rel=1e-12)
    assert fit.slope_sigma[0] == pytest.approx(ref.stderr, rel=1e-10)
    assert fit.intercept_sigma[0] == pytest.approx(ref.intercept_stderr, rel=1e-10)


def test_windows_of_different_lengths_fit_like_separate_calls():
    x, y = _synthetic_windows(2, 80, 0.3, 1.0, 0.3, seed=4)
    x[1, 50:] = np.nan
    both = york_fit(x, y, 1.0, 0.3)
    alone = york_fit(x[1, :50], y[1, :50], 1.0, 0.3)
    assert both.slope[1] == pytest.approx(alone.slope[0], rel=1e-10)
    assert both.n_points[1] == 50


@pytest.mark.parametrize("t_c,table_kpa", [
    # saturation pressure of liquid water, IAPWS-95 steam tables (values from memory)
    (0.01, 0.61165), (20.0, 2.3393), (30.0, 4.2470), (40.0, 7.3849),
])
def test_buck_1981_against_steam_table(t_c, table_kpa):
    # Buck (1981) states his e_w1 fit within about 0.05-0.1 % over -20..50 C (from memory)
    assert saturation_vapour_pressure_hpa(t_c) / 10 == pytest.approx(table_kpa, rel=2e-3)


@pytest.mark.parametrize("t_c", [0.01, 10.0, 25.0, 45.0])
def test_buck_1981_against_coolprop_iapws95(t_c):
    CP = pytest.importorskip("CoolProp.CoolProp")
    ref_hpa = CP.PropsSI("P", "T", t_c + 273.15, "Q", 0, "Water") / 100
    assert saturation_vapour_pressure_hpa(t_c) == pytest.approx(ref_hpa, rel=2e-3)


@pytest.mark.parametrize("t_c,rh,p_hpa", [(5.0, 80.0, 700.0), (20.0, 50.0, 1013.25), (35.0, 30.0, 900.0)])
def test_h2o_mole_fraction_against_coolprop_humid_air(t_c, rh, p_hpa):
    HA = pytest.importorskip("CoolProp.HumidAirProp")
    ref = HA.HAPropsSI("psi_w", "T", t_c + 273.15, "P", p_hpa * 100, "R", rh / 100) * 1e6
    # CoolProp humid air (Hyland and Wexler enhancement factor) vs Buck (1981)
    assert h2o_ppmv(t_c, rh, p_hpa) == pytest.approx(ref, rel=3e-3)


def test_equal_sigma_shortcut_equals_the_general_york_iteration():
    x, y = _synthetic_windows(3, 90, 0.3, 1.5, 0.2, seed=21)
    x[2, 60:] = np.nan
    short = york_fit(x, y, np.array([[1.5], [1.5], [1.5]]), 0.2)
    general = york_fit(x, y, np.full(x.shape, 1.5), np.full(x.shape, 0.2))
    for name in ("slope", "intercept", "slope_sigma", "intercept_sigma", "mswd", "r_squared"):
        assert np.allclose(getattr(short, name), getattr(general, name), rtol=1e-9), name
