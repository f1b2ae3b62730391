"""The prior's 5-95 % band beside the posterior band in the series figure.

Prior quantiles of the demo prior against scipy.stats: s_ppm uniform(400, 2500)
(scipy.stats.uniform.ppf) and pressure_bar log-uniform(5, 2500)
(scipy.stats.loguniform.ppf), within the Monte Carlo error of 4000 draws.
"""
import numpy as np
import pandas as pd
import pytest
from scipy import stats

import ventsource
from ventsource.workflow.figures import prior_bands, series_figure


def test_prior_bands_match_scipy_quantiles():
    bands = prior_bands(ventsource.load_prior("demo_mount_kerrow_fast"), n=4000, seed=1)
    lo, hi = stats.uniform(400, 2100).ppf([0.05, 0.95])
    # sd of a 5 % sample quantile of a uniform: sqrt(p(1-p)/n) * range ~ 7.3 ppm; 4 sd
    assert bands["s_ppm"] == pytest.approx((lo, hi), abs=30)
    lo, hi = stats.loguniform(5, 2500).ppf([0.05, 0.95])
    assert np.log(bands["pressure_bar"]) == pytest.approx(np.log([lo, hi]), abs=0.15)


def test_series_figure_draws_prior_band_behind_posterior(tmp_path):
    times = ["2026-01-01T00:00:00Z", "2026-01-11T00:00:00Z"]
    d = {"id": ["a", "b"], "time": times, "p_magmatic": [0.8, 0.1], "p_magmatic_error": [0.01, 0.01],
         "flags": ["", ""], "scrubbed_so2_avg_q05": [0, 0.4], "scrubbed_so2_avg_median": [0, 0.6],
         "scrubbed_so2_avg_q95": [0.1, 0.8], "pressure_bar_avg_q05": [20, 30],
         "pressure_bar_avg_median": [50, 60], "pressure_bar_avg_q95": [90, 100],
         "pp SO2/CO2_q05": [0.5, 0.2], "pp SO2/CO2_median": [0.7, 0.3], "pp SO2/CO2_q95": [0.9, 0.4]}
    path = tmp_path / "summary.csv"
    pd.DataFrame(d).to_csv(path, index=False)
    fig = series_figure(str(path), prior_name="p",
                        prior_bands={"pressure_bar": (7.0, 1500.0), "scrubbed_so2": (0.05, 0.95)})
    found = {}
    for ax in fig.axes:
        for patch in ax.patches:
            if patch.get_label().startswith("prior 5-95 %"):
                y0 = patch.get_y()   # axhspan: a Rectangle in (axes x, data y)
                found[ax.get_ylabel()] = (patch.get_label(), (y0, y0 + patch.get_height()))
    assert len(found) == 2
    labels = {k.split("\n")[0]: v[0] for k, v in found.items()}
    assert labels["scrubbed SO2"] == "prior 5-95 % (if scrubbed)"
    assert labels["degassing"] == "prior 5-95 %"
    spans = {k.split("\n")[0]: v[1] for k, v in found.items()}
    assert spans["degassing"] == pytest.approx((7.0, 1500.0))
    assert spans["scrubbed SO2"] == pytest.approx((0.05, 0.95))
    no_band = series_figure(str(path), prior_name="p")
    assert not any(p.get_label().startswith("prior") for ax in no_band.axes for p in ax.patches)
