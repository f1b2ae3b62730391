"""`ventsource ratios`: raw in-plume sensor file -> measurement file (workflow.plume)."""
import csv
import json
import pathlib

import numpy as np
import pytest

from ventsource.cli.main import main
from ventsource.workflow.measurements import read_measurements
from ventsource.workflow.plume.pipeline import run_ratios
from ventsource.workflow.plume.settings import RatioSettings
from ventsource.workflow.plume.synthetic import LAG_S, TRUE_RATIOS, synthetic_record, write_synthetic_csv

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def raw_day(tmp_path_factory):
    return write_synthetic_csv(str(tmp_path_factory.mktemp("raw") / "raw.csv"), 6 * 3600, seed=1)


def _coverage(path, out, window_s):
    res = run_ratios(path, out, RatioSettings(ratios=None, window_s=window_s), hash_input=False)
    share = {}
    for k, ratio in enumerate(res["windows"][0].results):
        v = np.array([w.results[k].value for w in res["windows"]])
        s = np.array([w.results[k].relative_sigma for w in res["windows"]])
        ok = np.isfinite(s)
        assert ok.sum() > 0.7 * len(res["windows"])
        share[ratio.ratio] = np.mean(np.abs(v[ok] - TRUE_RATIOS[ratio.ratio]) <= s[ok] * v[ok])
    return share


def test_whole_path_one_sigma_coverage_300_windows(tmp_path):
    # synthetic passages with known ratios, background, noise and sensor lags; noise
    # estimated from each window's background, lags found by cross-correlation
    raw = write_synthetic_csv(str(tmp_path / "raw.csv"), 300 * 600, seed=5)
    for ratio, share in _coverage(raw, str(tmp_path / "m.csv"), 600).items():
        assert 0.58 <= share <= 0.80, (ratio, share)   # 68 % +- ~4 binomial sd of ~250 windows


@pytest.mark.slow
def test_whole_path_one_sigma_coverage_1000_windows(tmp_path):
    raw = write_synthetic_csv(str(tmp_path / "raw.csv"), 1000 * 600, seed=6)
    for ratio, share in _coverage(raw, str(tmp_path / "m.csv"), 600).items():
        assert 0.63 <= share <= 0.73, (ratio, share)


def test_output_is_a_measurement_file_with_the_true_ratios(raw_day, tmp_path):
    out = tmp_path / "m.csv"
    code = main(["ratios", raw_day, "--out", str(out)])
    assert code == 0
    series = read_measurements(str(out))
    assert series.ratio_names == ("SO2/CO2", "H2S/SO2", "H2O/CO2", "H2/SO2")
    assert len(series) == 12
    for m in series.measurements:
        for name, value, sigma in zip(m.ratio_names, m.values, m.relative_sigma):
            assert abs(value / TRUE_RATIOS[name] - 1) < 5 * sigma + 1e-3
    rows = _rows(out)
    assert rows[0]["time"].endswith("Z") and rows[0]["quality points SO2/CO2"]
    # lags found by cross-correlation are the ones the synthetic sensors were given
    assert rows[0]["quality lags s"] == f"CO2=+{LAG_S['CO2']};H2O=+{LAG_S['RH']};H2S=+{LAG_S['H2S']}"
    record = json.loads((tmp_path / "m.run.json").read_text())
    assert record["settings"]["method"] == "york" and record["settings"]["min_r2"] == 0.6
    assert record["windows_written"] == 12 and "caution" in record


def _results(raw, out, **settings):
    res = run_ratios(str(raw), str(out), RatioSettings(ratios=None, **settings), hash_input=False,
                     chunk_rows=settings.pop("chunk_rows", 200_000))
    return open(out).read(), res


@pytest.mark.parametrize("mode", [dict(window_s=1800.0), dict(plume_threshold=0.5)])
def test_windows_straddling_chunks_give_identical_output(raw_day, tmp_path, mode):
    whole = run_ratios(raw_day, str(tmp_path / "a.csv"), RatioSettings(ratios=None, **mode),
                       chunk_rows=10 ** 6, hash_input=False)
    small = run_ratios(raw_day, str(tmp_path / "b.csv"), RatioSettings(ratios=None, **mode),
                       chunk_rows=1000, hash_input=False)
    assert len(whole["windows"]) >= 12
    assert (tmp_path / "a.csv").read_text() == (tmp_path / "b.csv").read_text()


def _write(path, frame, comment=True):
    with open(path, "w", newline="") as fh:
        if comment:
            fh.write("# SYNTHETIC test record (fictional Mount Kerrow)\n")
        frame.to_csv(fh, index=False)
    return str(path)


def test_h2s_cross_sensitivity_to_so2_is_removed(tmp_path):
    frame = synthetic_record(3600, seed=3)
    frame["H2S [ppmv]"] += 0.15 * frame["SO2 [ppmv]"]    # sensor reads 15 % of SO2 as H2S
    raw = _write(tmp_path / "raw.csv", frame)
    assert main(["ratios", raw, "--out", str(tmp_path / "raw_.csv")]) == 0
    biased = read_measurements(str(tmp_path / "raw_.csv")).measurements[0]
    assert main(["ratios", raw, "--out", str(tmp_path / "fixed.csv"),
                 "--h2s-so2-cross-sensitivity", "0.15"]) == 0
    fixed = read_measurements(str(tmp_path / "fixed.csv")).measurements[0]
    k = list(fixed.ratio_names).index("H2S/SO2")
    assert biased.values[k] == pytest.approx(0.35, rel=0.02)
    assert fixed.values[k] == pytest.approx(TRUE_RATIOS["H2S/SO2"], rel=0.02)


def test_gas_below_detection_limit_gives_a_censored_value(tmp_path):
    frame = synthetic_record(1800, seed=4)
    rng = np.random.default_rng(0)
    frame["H2S [ppmv]"] = np.round(0.02 * rng.standard_normal(len(frame)), 4)   # no H2S at all
    raw = _write(tmp_path / "raw.csv", frame)
    out = tmp_path / "m.csv"
    assert main(["ratios", raw, "--out", str(out), "--detection-limit", "H2S=0.2"]) == 0
    row = _rows(out)[0]
    assert row["H2S/SO2"].startswith("<") and row["sigma H2S/SO2"] == ""
    so2_range = float(row["quality range SO2 ppmv"])
    assert float(row["H2S/SO2"][1:]) == pytest.approx(0.2 / so2_range, rel=1e-3)
    m = read_measurements(str(out)).measurements[0]
    k = list(m.ratio_names).index("H2S/SO2")
    assert m.censoring[k] == -1    # the inversion sees a censored term, not a number


def test_gap_and_saturation_flag_windows(tmp_path):
    frame = synthetic_record(3600, seed=7)
    frame = frame.drop(index=range(100, 160)).reset_index(drop=True)     # 60 s gap in window 1
    top = frame["SO2 [ppmv]"].iloc[2500:].max()
    raw = _write(tmp_path / "raw.csv", frame)
    out = tmp_path / "m.csv"
    assert main(["ratios", raw, "--out", str(out), "--max-reading", f"SO2={top:.4f}"]) == 0
    rows = _rows(tmp_path / "m.windows.csv")
    assert rows[0]["SO2/CO2"] == "" and "gap of 61 s" in rows[0]["quality flags SO2/CO2"]
    assert rows[1]["SO2/CO2"] == "" and "SO2 saturated" in rows[1]["quality flags SO2/CO2"]
    assert rows[1]["H2O/CO2"] != ""          # a ratio without the saturated gas is kept
    assert [r["id"] for r in _rows(out)] == [rows[1]["id"]]


def test_plume_threshold_windows_follow_the_passages(raw_day, tmp_path):
    out = tmp_path / "m.csv"
    assert main(["ratios", raw_day, "--out", str(out), "--plume-threshold", "SO2=0.5", "--pad", "20s"]) == 0
    rows = _rows(tmp_path / "m.windows.csv")
    assert len(rows) > 30
    for r in rows:
        start = np.datetime64(r["quality start"][:-1])
        end = np.datetime64(r["quality end"][:-1])
        assert np.timedelta64(0, "s") < end - start <= np.timedelta64(3600, "s")


GOOD_HEAD = "time,CO2 [ppmv],SO2 [ppmv]\n"
GOOD_ROW = "2026-03-14T00:00:{:02d}Z,{},{}\n"


def _lines(n=10, **override):
    rows = [GOOD_ROW.format(i, 420 + i, 0.1 * i) for i in range(n)]
    for i, text in override.items():
        rows[int(i[1:])] = text
    return rows


BAD_RAW = {
    "backwards": (GOOD_HEAD + "".join(_lines(r5="2026-03-14T00:00:01Z,425,0.5\n")), "row 7", "time goes backwards"),
    "duplicate": (GOOD_HEAD + "".join(_lines(r5="2026-03-14T00:00:04Z,425,0.5\n")), "row 7", "duplicated"),
    "unparsable": (GOOD_HEAD + "".join(_lines(r3="14/03/2026 00:00,423,0.3\n")), "row 5", "ISO 8601"),
    "no offset": (GOOD_HEAD + "".join(_lines(r0="2026-03-14T00:00:00,420,0.0\n")), "row 2", "--assume-utc"),
    "missing gas": ("time,CO2 [ppmv]\n" + "2026-03-14T00:00:00Z,420\n", "column 'SO2'", "missing gas"),
    "no unit": ("time,CO2,SO2 [ppmv]\n" + "".join(_lines()), "column 'CO2'", "no unit"),
    "unknown unit": ("time,CO2 [mg/m3],SO2 [ppmv]\n" + "".join(_lines()), "column 'CO2 [mg/m3]'",
                     "unknown unit"),
    "nan": (GOOD_HEAD + "".join(_lines(r4="2026-03-14T00:00:04Z,NaN,0.4\n")), "row 6", "NaN"),
    "empty": (GOOD_HEAD + "".join(_lines(r4="2026-03-14T00:00:04Z,424,\n")), "row 6", "empty"),
    "extra cell": (GOOD_HEAD + "".join(_lines(r6="2026-03-14T00:00:06Z,426,0.6,7\n")), "row 8",
                   "4 cells but the header has 3"),
    "no rows": (GOOD_HEAD, "", "no data rows"),
    "text": (GOOD_HEAD + "".join(_lines(r8="2026-03-14T00:00:08Z,428,high\n")), "row 10",
             "'high' is not a finite number"),
}


@pytest.mark.parametrize("case", sorted(BAD_RAW))
def test_bad_raw_input_is_one_line_exit_2_and_nothing_written(case, tmp_path, capsys):
    text, where, needle = BAD_RAW[case]
    raw = tmp_path / "raw.csv"
    raw.write_text(text)
    out = tmp_path / "m.csv"
    code = main(["ratios", str(raw), "--out", str(out), "--ratios", "SO2/CO2"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.startswith("error: ") and err.strip().count("\n") == 0 and "Traceback" not in err
    assert str(raw) in err and where in err and needle in err, err
    assert list(tmp_path.iterdir()) == [raw]


@pytest.mark.parametrize("extra,needle", [
    (["--window", "abc"], "--window"),
    (["--plume-threshold", "SO2"], "GAS=NUMBER"),
    (["--noise", "SO2=0"], "positive"),
    (["--noise", "Xe=1"], "none of the gases"),
    (["--ratios", "SO2/SO2"], "two different gases"),
    (["--units", "Xe=ppmv"], "not a column"),
])
def test_bad_options_are_one_line_exit_2(extra, needle, raw_day, tmp_path, capsys):
    code = main(["ratios", raw_day, "--out", str(tmp_path / "m.csv")] + extra)
    err = capsys.readouterr().err
    assert code == 2 and needle in err and err.strip().count("\n") == 0, err
    assert not (tmp_path / "m.csv").exists()


def test_units_from_options_and_conversion(tmp_path):
    frame = synthetic_record(1800, seed=8)
    frame["SO2 [ppmv]"] *= 1000.0
    frame = frame.rename(columns={"SO2 [ppmv]": "SO2", "P [hPa]": "P [kPa]"})
    frame["P [kPa]"] /= 10.0
    raw = _write(tmp_path / "raw.csv", frame)
    assert main(["ratios", raw, "--out", str(tmp_path / "m.csv"), "--units", "SO2=ppbv"]) == 0
    m = read_measurements(str(tmp_path / "m.csv")).measurements[0]
    values = dict(zip(m.ratio_names, m.values))
    assert values["SO2/CO2"] == pytest.approx(TRUE_RATIOS["SO2/CO2"], rel=0.03)
    assert values["H2O/CO2"] == pytest.approx(TRUE_RATIOS["H2O/CO2"], rel=0.03)


def test_figures_carry_the_caution(raw_day, tmp_path):
    figs = tmp_path / "figs"
    assert main(["ratios", raw_day, "--out", str(tmp_path / "m.csv"), "--window", "6h", "--figures",
                 str(figs), "--window-figures"]) == 0
    assert sorted(p.name for p in figs.iterdir()) == ["ratios_overview.png", "windows"]
    assert [p.name for p in (figs / "windows").iterdir()] == ["window_W20260314T000000Z.png"]


def test_ratios_then_run_end_to_end(tmp_path, capsys):
    raw = write_synthetic_csv(str(tmp_path / "raw.csv"), 1800, seed=9)
    data = tmp_path / "m.csv"
    assert main(["ratios", raw, "--out", str(data), "--ratios", "SO2/CO2,H2S/SO2,H2O/CO2"]) == 0
    out = tmp_path / "run"
    code = main(["run", str(data), "--prior", str(ROOT / "priors" / "demo_mount_kerrow_fast.toml"),
                 "--out", str(out), "--no-figures", "--max-steps", "60", "--target-ess", "20",
                 "--infer-option", "n_proposal=1000", "--infer-option", "n_prior_draws=300"])
    assert code == 0, capsys.readouterr().err
    summary = _rows(out / "summary.csv")
    assert [r["id"] for r in summary] == [r["id"] for r in _rows(data)]
    assert 0.0 <= float(summary[0]["p_magmatic"]) <= 1.0


def test_an_error_deep_in_the_file_leaves_no_output(tmp_path, capsys):
    frame = synthetic_record(2 * 3600, seed=10)
    frame["CO2 [ppmv]"] = frame["CO2 [ppmv]"].astype(object)
    frame.loc[5000, "CO2 [ppmv]"] = "ERR"      # after windows were already analysed
    raw = _write(tmp_path / "raw.csv", frame)
    figs = tmp_path / "figs"
    code = main(["ratios", raw, "--out", str(tmp_path / "m.csv"), "--chunk-rows", "1000",
                 "--figures", str(figs), "--window-figures"])
    err = capsys.readouterr().err
    assert code == 2 and "row 5003" in err and "'ERR'" in err, err     # file line = index + 3 (comment line, header)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["figs", "raw.csv"]
    assert list(figs.iterdir()) == []


def _puff_pair(centre, lag, n=600, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(n, dtype=float)
    puff = 5.0 * np.exp(-0.5 * ((t - centre) / 20.0) ** 2)
    late = np.concatenate([np.zeros(lag), puff[:n - lag]])      # the sensor sees it `lag` s later
    return puff + 0.02 * rng.standard_normal(n), 420 + late / 0.3 + 0.5 * rng.standard_normal(n)


@pytest.mark.parametrize("centre", [300, 15, 585])   # mid-window, and puffs cut by the window edges
def test_lag_found_by_cross_correlation(centre):
    from ventsource.workflow.plume.analysis import find_lag_samples
    so2, co2 = _puff_pair(centre, lag=7)
    lag, r = find_lag_samples(so2, co2, 30, 0.8)
    assert lag == 7 and r > 0.9


def test_lag_search_refuses_a_plain_trend_and_keeps_the_usual_lag():
    from ventsource.workflow.plume.analysis import LagMemory, find_lag_samples, lag_correlations
    rng = np.random.default_rng(1)
    trend = np.linspace(0, 5, 600)
    so2, co2 = trend + 0.01 * rng.standard_normal(600), 420 + trend / 0.3 + 0.01 * rng.standard_normal(600)
    assert np.isnan(find_lag_samples(so2, co2, 30, 0.8)[1])     # flat correlation curve: no lag
    memory = LagMemory()
    for seed in range(3):
        a, b = _puff_pair(300, 7, seed=seed)
        assert memory.choose("CO2", lag_correlations(a, b[None, :], 30)[0], 30, 0.8) == (7, True)
    assert memory.choose("CO2", lag_correlations(so2, co2[None, :], 30)[0], 30, 0.8) == (7, False)


def test_times_with_an_offset_come_out_in_utc(tmp_path):
    frame = synthetic_record(1800, seed=12, start="2026-03-14T01:00:00")
    frame["time"] = frame["time"].str.replace("Z", "+01:00")
    raw = _write(tmp_path / "raw.csv", frame)
    assert main(["ratios", raw, "--out", str(tmp_path / "m.csv")]) == 0
    row = _rows(tmp_path / "m.csv")[0]
    assert row["quality start"] == "2026-03-14T00:00:00Z" and row["time"] == "2026-03-14T00:14:59Z"
