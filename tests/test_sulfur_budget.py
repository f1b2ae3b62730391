"""Sulfur budget, flux columns and the third hypothesis (released stored sulfur).

Check values: molar masses S 32.06, SO2 64.07, CO2 44.01 g/mol (IUPAC standard atomic
weights; common practice, no source); the trapezoid rule against numpy.trapezoid (a
general-purpose reference library). Synthetic series are made by the package's own
forward model (workflow.sulfur_demo and workflow.demo: fictional Mount Kerrow, labelled
synthetic) with 15 % ratio and 20 % flux errors; acceptance levels are the issue's.
"""
import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsource.cli.main import main
from ventsource.inference.priors import load_prior_file
from ventsource.workflow.hypothesis_rows import HYPOTHESIS_COLUMNS
from ventsource.workflow.measurements import read_measurements
from ventsource.workflow.series import run_series
from ventsource.workflow.sulfur_budget import (BUDGET_COLUMNS, S_PER_SO2, SO2_PER_CO2_MASS, cumulative,
                                               row_rates)
from ventsource.workflow.sulfur_demo import make_sulfur_series

ROOT = Path(__file__).resolve().parents[1]
FAST_PRIOR = ROOT / "priors" / "demo_mount_kerrow_fast.toml"
RELEASE_PRIOR = ROOT / "priors" / "demo_mount_kerrow_fast_release.toml"
HEADER = "id,time,SO2/CO2,H2S/SO2,H2O/CO2"


def _write(tmp_path, text, name="m.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


# ---- flux columns: bad input is one line naming file, row and column, exit status 2
@pytest.mark.parametrize("header,cells,row,column,needle", [
    (HEADER + ",SO2 flux", "0.7,0.3,40,-5", 2, "SO2 flux", ">= 0"),
    (HEADER + ",CO2 flux", "0.7,0.3,40,lots", 2, "CO2 flux", "not a flux"),
    (HEADER + ",SO2 flux,sigma CO2 flux", "0.7,0.3,40,100,0.2", 1, "sigma CO2 flux", "no 'CO2 flux' column"),
    ("id,time,SO2 flux", "100", 1, "SO2 flux", "needs at least one ratio column"),
    (HEADER + ",SO2 flux,sigma SO2 flux", "0.7,0.3,40,100,-0.2", 2, "sigma SO2 flux", "(0, 5]"),
    (HEADER + ",H2S flux", "0.7,0.3,40,100", 1, "H2S flux", "unknown flux column"),
])
def test_bad_flux_input_is_one_line_with_exit_2(tmp_path, capsys, header, cells, row, column, needle):
    p = _write(tmp_path, f"{header}\nA,2026-01-01T00:00:00Z,{cells}\n")
    code = main(["run", str(p), "--prior", str(FAST_PRIOR), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1
    assert str(p) in err and f"row {row}" in err and f"'{column}'" in err and needle in err
    assert not (tmp_path / "out" / "summary.csv").exists()


def test_flux_cells_read_with_limits_missing_and_sigmas(tmp_path):
    p = _write(tmp_path, HEADER + ",SO2 flux,sigma SO2 flux,CO2 flux\n"
               "A,2026-01-01T00:00:00Z,0.7,0.3,40,120,0.3,900\n"
               "B,2026-01-02T00:00:00Z,0.7,0.3,40,<25,,\n")
    s = read_measurements(p)
    f = s.fluxes
    assert f.values["SO2 flux"].tolist() == [120.0, 25.0]
    assert f.censoring["SO2 flux"].tolist() == [0, -1]
    assert f.sigma["SO2 flux"].tolist() == [0.3, 0.2]
    assert np.isnan(f.values["CO2 flux"][1]) and f.values["CO2 flux"][0] == 900.0
    assert read_measurements(_write(tmp_path, HEADER + "\nA,2026-01-01T00:00:00Z,0.7,0.3,40\n",
                                    "plain.csv")).fluxes is None


# ---- budget arithmetic
def test_mass_ratio_and_sulfur_share_of_so2():
    assert SO2_PER_CO2_MASS == pytest.approx(64.07 / 44.01, rel=1e-12)  # common practice, no source
    assert S_PER_SO2 == pytest.approx(0.5004, abs=1e-4)  # 32.06 / 64.07, common practice, no source


def test_running_total_is_the_trapezoid_rule_and_skips_long_gaps():
    days = np.array([0.0, 1.0, 3.0, 4.5, 40.0, 41.0])
    rate = np.array([10.0, 20.0, 5.0, 0.0, 8.0, 8.0])
    draws = np.repeat(rate[:, None], 3, axis=1)
    total, bridged, _ = cumulative(days * 86400.0, draws, max_gap_days=30.0)
    ref = np.trapezoid(rate[:4], days[:4])  # numpy's trapezoid rule
    assert total[3, 0] == pytest.approx(ref, rel=1e-12)
    assert total[4, 0] == pytest.approx(ref, rel=1e-12)  # 35.5-day gap: nothing added
    assert total[5, 0] == pytest.approx(ref + 8.0, rel=1e-12)
    assert bridged.tolist() == [False, True, True, True, False, True]


def test_running_total_restarts_after_a_mixed_sources_window():
    """Rows of a window flagged mixed_sources get no total; the total restarts at zero after
    them and the first row after is marked restarted (numpy's trapezoid rule as reference)."""
    days = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 6.0])
    rate = np.array([10.0, 20.0, 99.0, 99.0, 5.0, 7.0])
    draws = np.repeat(rate[:, None], 2, axis=1)
    excluded = [False, False, True, True, False, False]
    total, bridged, restarted = cumulative(days * 86400.0, draws, 30.0, excluded)
    assert total[1, 0] == pytest.approx(np.trapezoid(rate[:2], days[:2]), rel=1e-12)
    assert np.isnan(total[2:4]).all()
    assert total[4, 0] == 0.0  # restarted: nothing of the flagged window is carried
    assert total[5, 0] == pytest.approx(np.trapezoid(rate[4:], days[4:]), rel=1e-12)
    assert restarted.tolist() == [False, False, False, False, True, False]


def test_budget_direction_names_release():
    from ventsource.workflow.sulfur_budget import direction
    assert direction(-50.0, -10.0) == "released"
    assert direction(10.0, 50.0) == "retained"
    assert direction(-10.0, 50.0) == "not resolved"


def test_mass_balance_no_scrubbing_no_release_retains_nothing():
    """Magmatic gas, fluxes consistent with it (20 % errors): retained rate 0 within its band."""
    rng = np.random.default_rng(11)
    ratio = 0.75 * np.exp(0.05 * rng.standard_normal(800))          # posterior of SO2/CO2
    draws = {"model": np.zeros(800, int), "so2_co2_magmatic": ratio, "so2_factor": np.ones(800)}
    co2 = 1500.0
    fluxes = {"CO2 flux": (co2, 0, 0.2), "SO2 flux": (co2 * 0.75 * SO2_PER_CO2_MASS, 0, 0.2)}
    magmatic, retained, basis = row_rates(draws, fluxes, rng)
    assert basis == "CO2 flux"
    q05, q95 = np.quantile(retained, [0.05, 0.95])
    assert q05 <= 0.0 <= q95
    assert np.all(retained == 0.0)  # f = 1 in every draw: magmatic = emitted
    assert np.median(magmatic) == pytest.approx(co2 * 0.75 * SO2_PER_CO2_MASS, rel=0.05)
    # half the draws scrubbed by 40 %: retained = 0.4 x magmatic x 32.06 / 64.07 in those
    draws_s = dict(draws, so2_factor=np.where(np.arange(800) % 2 == 0, 0.6, 1.0))
    m2, r2, _ = row_rates(draws_s, fluxes, np.random.default_rng(2), index=np.arange(1000))
    f = draws_s["so2_factor"][np.arange(1000) % 800]
    assert np.allclose(r2, m2 * (1.0 - f) * S_PER_SO2, rtol=1e-12)
    # without a CO2 flux the magmatic SO2 comes from the SO2 flux and f = 1: exactly zero
    _, retained_so2, basis_so2 = row_rates(draws, {"SO2 flux": fluxes["SO2 flux"]}, rng)
    assert basis_so2 == "SO2 flux" and np.all(retained_so2 == 0.0)
    # an SO2 flux below detection alone cannot give the magmatic flux
    _, r_none, b_none = row_rates(draws, {"SO2 flux": (30.0, -1, 0.2)}, rng)
    assert b_none == "none" and np.all(np.isnan(r_none))


# ---- prior files
def test_prior_without_hypotheses_has_no_release_and_with_it_sums_to_one(tmp_path):
    plain = load_prior_file(FAST_PRIOR)
    assert plain.release is None
    spec = load_prior_file(RELEASE_PRIOR)
    pis = spec.release.probabilities(spec.p_magmatic)
    assert sum(pis) == pytest.approx(1.0, abs=1e-15)
    assert pis[2] == pytest.approx(0.2) and pis[0] == pytest.approx(0.4)
    assert spec.with_fixed("scrubbed_so2", 0.0).release is spec.release
    assert spec.to_dict()["hypotheses"]["released_so2"]["distribution"] == "loguniform"


def test_bad_hypotheses_table_names_the_key(tmp_path):
    text = FAST_PRIOR.read_text() + "\n[hypotheses]\np_released = 1.5\n"
    p = _write(tmp_path, text, "bad.toml")
    code = main(["run", str(p), "--prior", str(p), "--out", str(tmp_path / "o")])
    assert code == 2
    from ventsource.inference.priors.fields import PriorFileError
    with pytest.raises(PriorFileError, match="hypotheses.p_released"):
        load_prior_file(p)


# ---- series: no flux columns -> probabilities as before and no budget columns
def test_flux_columns_do_not_change_probabilities_and_add_the_budget(tmp_path):
    rows = ["A,2026-01-01T00:00:00Z,0.72,0.3,45", "B,2026-01-08T00:00:00Z,0.2,1.0,45"]
    plain = _write(tmp_path, HEADER + "\n" + "\n".join(rows) + "\n", "plain.csv")
    flux = _write(tmp_path, HEADER + ",SO2 flux,CO2 flux\n" + rows[0] + ",1500,1400\n"
                  + rows[1] + ",<50,1450\n", "flux.csv")
    opts = dict(n_particles=60, n_runs=2, max_moves=8)
    a = run_series(read_measurements(plain), str(FAST_PRIOR), str(tmp_path / "a"), seed=3, options=opts)
    b = run_series(read_measurements(flux), str(FAST_PRIOR), str(tmp_path / "b"), seed=3, options=opts)
    assert [r["p_magmatic"] for r in a] == [r["p_magmatic"] for r in b]
    cols_a = pd.read_csv(tmp_path / "a" / "summary.csv").columns
    cols_b = pd.read_csv(tmp_path / "b" / "summary.csv").columns
    assert not set(BUDGET_COLUMNS + HYPOTHESIS_COLUMNS) & set(cols_a)
    assert set(BUDGET_COLUMNS) <= set(cols_b) and not set(HYPOTHESIS_COLUMNS) & set(cols_b)
    hz = json.loads((tmp_path / "b" / "hazard.json").read_text())
    assert "sulfur_budget" in hz and hz["rows"][1]["budget_basis"] == "CO2 flux"
    assert "sulfur_budget" not in json.loads((tmp_path / "a" / "hazard.json").read_text())


def test_three_probabilities_sum_to_one_with_errors(tmp_path):
    prior = RELEASE_PRIOR
    data = make_sulfur_series(tmp_path / "d", n_rows=4)
    rows = run_series(read_measurements(data), str(prior), str(tmp_path / "o"), seed=1,
                      options=dict(n_particles=60, n_runs=2, max_moves=8))
    for r in rows:
        total = r["p_magmatic"] + r["p_scrubbed"] + r["p_released"]
        assert total == pytest.approx(1.0, abs=1e-9)
        assert all(np.isfinite(r[k]) and r[k] >= 0 for k in ("p_magmatic_error", "p_scrubbed_error",
                                                               "p_released_error"))
    table = pd.read_csv(tmp_path / "o" / "summary.csv")
    assert set(HYPOTHESIS_COLUMNS + BUDGET_COLUMNS) <= set(table.columns)


def test_hazard_json_with_fluxes_and_three_hypotheses_validates(tmp_path):
    """The published schema (docs/hazard.schema.json) covers the three probabilities and
    the budget, checked by the general-purpose jsonschema library; the budget carries its
    stated limits and is rounded to 3 significant digits."""
    import jsonschema
    data = make_sulfur_series(tmp_path / "d", n_rows=4)
    run_series(read_measurements(data), str(RELEASE_PRIOR), str(tmp_path / "o"), seed=1,
               options=dict(n_particles=60, n_runs=2, max_moves=8))
    doc = json.loads((tmp_path / "o" / "hazard.json").read_text())
    schema = json.loads((ROOT / "docs" / "hazard.schema.json").read_text())
    jsonschema.validate(doc, schema)
    assert "reads as magmatic" in doc["sulfur_budget"]["limits"]
    for row in doc["rows"]:
        x = row["magmatic_so2_flux_tpd_median"]
        assert x == float(f"{x:.3g}")
    bad = dict(doc, rows=[dict(doc["rows"][0], p_released=1.5)])
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)


# ---- slow: the synthetic Mount Kerrow sulfur series under the window model
@pytest.fixture(scope="module")
def kerrow_windows(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sulfur")
    # independent per-row pressures (the package's default window model until 0.4.0): the demo
    # prior's [window] table (pooled pressures) is replaced. Measured on this series, pooled
    # pressures give a cumulative band of 36,500-66,500 t at the end of scrubbing, which
    # misses the true 70,100 t (docs/prior-files.md explains the low bias of both)
    prior = tmp / "release_independent.toml"
    # (pooled became the default window model: independent is now asked for explicitly)
    prior.write_text(RELEASE_PRIOR.read_text(encoding="utf-8").split("\n[window]")[0]
                     + '\n[window]\npressure_rows = "independent"\n', encoding="utf-8")
    data = make_sulfur_series(tmp / "d", n_rows=36)
    series = read_measurements(data)
    # one window for the whole series: the quiet rows pin the shared magma source, without
    # which a window made only of released (or scrubbed) rows reads as a sulfur-richer
    # (or poorer) magma; per row, pressure, s and r stay free
    run_series(series, str(prior), str(tmp / "o"), seed=4, window=400 * 86400.0,
               options=dict(n_particles=200, n_runs=4), budget_max_gap_days=30.0)
    return pd.read_csv(tmp / "o" / "summary.csv"), pd.read_csv(tmp / "d" / "truth.csv")


@pytest.mark.slow
def test_window_model_recognises_release_and_scrubbing(kerrow_windows):
    table, truth = kerrow_windows
    released = truth["released_so2"] >= 1.0    # SO2 doubled or more
    scrubbed = truth["scrubbed_so2"] >= 0.5
    assert released.sum() >= 4 and scrubbed.sum() >= 8
    assert np.all(table.loc[released, "p_released"] >= 0.8), table.loc[released, "p_released"].tolist()
    assert np.all(table.loc[scrubbed, "p_scrubbed"] >= 0.8), table.loc[scrubbed, "p_scrubbed"].tolist()


@pytest.mark.slow
def test_cumulative_band_holds_the_truth_at_the_end_of_scrubbing(kerrow_windows):
    table, truth = kerrow_windows
    end = int(np.flatnonzero(truth["episode"] == "scrubbing")[-1])
    true_total = truth["cumulative_retained_s_t"][end]
    lo, hi = table["cumulative_retained_s_t_q05"][end], table["cumulative_retained_s_t_q95"][end]
    assert lo <= true_total <= hi, (lo, true_total, hi)
    assert true_total > 3.0 * (hi - lo) / 3.29  # the total is resolved, not just covered


@pytest.mark.slow
def test_quiet_rows_retain_nothing_within_their_band(kerrow_windows):
    table, truth = kerrow_windows
    quiet = truth["episode"] == "quiet"
    inside = (table.loc[quiet, "retained_s_tpd_q05"] <= 0) & (table.loc[quiet, "retained_s_tpd_q95"] >= 0)
    assert inside.mean() >= 0.75, inside.tolist()  # 90 % bands: most, not all, of 9 rows
