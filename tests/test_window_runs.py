"""Window runs end to end: short windows (one row: no source check; fewer than 4 rows:
the change-of-source check says "not_run" and the run warns), each window's span in the
tables, one summary.csv shape for row-by-row and window runs, and progress inside a
window with a time estimate that holds.

The runs are tiny (40 particles, 2 runs): the point is bookkeeping, not posterior quality.
"""
import io
import json
import os
import re

import numpy as np
import pandas as pd
import pytest

from ventsource.workflow.measurements import read_measurements
from ventsource.workflow.series import run_series

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PRIOR = os.path.join(ROOT, "priors", "demo_mount_kerrow_fast.toml")
TINY = dict(n_particles=40, n_runs=2)
# windows of 1, 3 and 4 rows (the change-of-source check needs 2 rows on each side)
DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2,window\n"
        "K1,2025-01-10T00:00:00Z,0.70148,0.28677,36.329,a\n"
        "K2,2025-01-20T00:00:00Z,0.65,0.30,35.0,b\n"
        "K3,2025-01-25T00:00:00Z,0.60,0.33,34.0,b\n"
        "K4,2025-02-02T12:00:00Z,0.55,0.35,33.5,b\n"
        "K5,2025-03-01T00:00:00Z,0.50,0.40,33.0,c\n"
        "K6,2025-03-05T00:00:00Z,0.45,0.45,32.0,c\n"
        "K7,2025-03-09T00:00:00Z,0.40,0.50,31.0,c\n"
        "K8,2025-03-13T00:00:00Z,0.35,0.55,30.0,c\n")
WORK_PER_SECOND = 2000.0   # the test's clock: forward-model states solved / this


@pytest.fixture(scope="module")
def data_file(tmp_path_factory):
    p = tmp_path_factory.mktemp("data") / "m.csv"
    p.write_text(DATA)
    return str(p)


@pytest.fixture(scope="module")
def window_run(data_file, tmp_path_factory):
    """The window run, its progress output, and the clock of each progress line: the
    bar's clock counts forward-model states solved (work, not wall time, so the check of
    the estimate does not depend on the machine's load)."""
    from ventsource.forward.model import ForwardModel
    from ventsource.workflow import row_jobs
    solved = [0]
    original = ForwardModel.state

    def counting(self, theta_full, *args, **kwargs):
        solved[0] += len(np.atleast_2d(theta_full))
        return original(self, theta_full, *args, **kwargs)

    class Stream(io.StringIO):
        def write(self, text):
            stamps.append((solved[0] / WORK_PER_SECOND, text))
            return super().write(text)

    stamps = []
    out = str(tmp_path_factory.mktemp("windows"))
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(ForwardModel, "state", counting)
        mp.setattr(row_jobs, "PROGRESS_CLOCK", lambda: solved[0] / WORK_PER_SECOND)
        run_series(read_measurements(data_file), PRIOR, out, seed=3, options=TINY, progress_stream=Stream())
    return out, stamps, solved[0] / WORK_PER_SECOND


def _table(out):
    return pd.read_csv(os.path.join(out, "summary.csv"), dtype={"id": str, "window": str},
                       keep_default_na=False, na_values=[""])


def test_one_row_window_runs_no_source_check(window_run):
    # with one row, "one source" and "each row its own source" are the same model: their
    # Bayes factor is exactly 1 (an identity), so nothing is checked and nothing flagged
    s = _table(window_run[0]).set_index("id")
    assert s.loc["K1", "window_n_rows"] == 1 and s.loc["K1", "source_check"] == "not_run"
    assert np.isnan(s.loc["K1", "log10_bf_one_source"]) and np.isnan(s.loc["K1", "log10_bf_one_vs_split"])
    flags = s.loc["K1", "flags"].split(";")
    assert "mixed_sources" not in flags and "source_check_not_run" in flags


def test_one_row_window_in_python_has_no_shared_source_factor():
    from ventsource.inference.likelihood import Measurement
    from ventsource.inference.priors import load_prior_file
    from ventsource.inference.window.sampling import infer_window
    m = Measurement(("SO2/CO2", "H2S/SO2", "H2O/CO2"), [0.70148, 0.28677, 36.329], 0.15, label="one")
    res = infer_window([m], load_prior_file(PRIOR), seed=1, **TINY)
    assert np.isnan(res.log10_bf_shared) and res.source_check == "not_run"
    assert "mixed_sources" not in res.flags and "source_check_not_run" in res.flags


def test_three_row_window_says_not_run_and_warns(window_run):
    out, stamps, _ = window_run
    s = _table(out).set_index("id")
    b = s.loc[["K2", "K3", "K4"]]
    assert (b["source_check"] == "not_run").all() and b["log10_bf_one_vs_split"].isna().all()
    assert np.isfinite(b["log10_bf_one_source"]).all()      # the one-vs-own check still runs
    assert all("source_check_not_run" in f.split(";") for f in b["flags"])
    c = s.loc[["K5", "K6", "K7", "K8"]]                       # 4 rows: checked
    assert (c["source_check"] == "run").all() and np.isfinite(c["log10_bf_one_vs_split"]).all()
    assert not any("source_check_not_run" in f.split(";") for f in c["flags"].fillna(""))
    console = "".join(text for _, text in stamps)
    warning = [line for line in console.splitlines() if line.startswith("warning:")]
    assert len(warning) == 1 and "'a' (1 row)" in warning[0] and "'b' (3 rows)" in warning[0]
    assert "'c'" not in warning[0]
    assert "4 of 8 rows source_check_not_run" in console          # the end-of-run flag summary
    readme = open(os.path.join(out, "README.txt")).read()
    assert "Warning: 2 window(s) of fewer than 4 rows" in readme and "* source_check_not_run:" in readme


def test_window_span_start_end_and_rows(window_run):
    # expected values by calendar arithmetic on DATA (common practice, no source)
    out = window_run[0]
    s = _table(out).set_index("id")
    expect = {"a": ("2025-01-10T00:00:00Z", "2025-01-10T00:00:00Z", 0.0, 1),
              "b": ("2025-01-20T00:00:00Z", "2025-02-02T12:00:00Z", 13.5, 3),
              "c": ("2025-03-01T00:00:00Z", "2025-03-13T00:00:00Z", 12.0, 4)}
    for rid, row in s.iterrows():
        first, last, span, n = expect[row["window"]]
        assert (row["window_first_time"], row["window_last_time"]) == (first, last), rid
        assert row["window_span_days"] == span and row["window_n_rows"] == n, rid
    doc = json.load(open(os.path.join(out, "hazard.json")))
    assert doc["window_setting"] == {"option": "column", "mode": "the measurement file's window column",
                                     "span_days": None}
    for w in doc["windows"]:
        first, last, span, n = expect[w["window"]]
        assert (w["first_time"], w["last_time"], w["span_days"], w["n_rows"]) == (first, last, span, n)
        assert len(w["rows"]) == n
        assert w["source_check"] == ("run" if n >= 4 else "not_run")
    import jsonschema
    with open(os.path.join(ROOT, "docs", "hazard.schema.json")) as fh:
        jsonschema.validate(doc, json.load(fh))


def test_window_setting_records_the_span():
    from ventsource.workflow.hazard_export import window_setting
    from ventsource.workflow.windows import parse_window_option
    # 30 d = 2,592,000 s; 12 h = 0.5 d; 2 w = 14 d (calendar arithmetic, common practice, no source)
    assert window_setting(parse_window_option("30d"), False) == {
        "option": "30d", "mode": "consecutive time spans from the first row", "span_days": 30.0}
    assert window_setting(parse_window_option("12h"), True)["span_days"] == 0.5
    assert window_setting(parse_window_option("2w"), False)["option"] == "2w"
    assert window_setting(parse_window_option("90min"), False)["option"] == "90min"
    assert window_setting("rows", True)["mode"] == "row by row"
    assert window_setting(None, False)["mode"] == "row by row"
    assert window_setting(None, True)["option"] == "column"


def test_row_by_row_and_window_tables_have_one_shape(window_run, data_file, tmp_path):
    out_rows = str(tmp_path / "rows")
    series = read_measurements(data_file)
    run_series(series, PRIOR, out_rows, seed=3, options=TINY, window="rows", progress_stream=io.StringIO())
    by_rows, by_windows = _table(out_rows), _table(window_run[0])
    assert list(by_rows.columns) == list(by_windows.columns)
    # one name, one meaning: no bare NAME_median whose model differs between the two
    assert not [c for c in by_rows.columns if re.fullmatch(r"(pressure_bar|scrubbed_so2|dfmq)_(q05|median|q95)", c)]
    for table in (by_rows, by_windows):
        for tag in ("scrubbed_so2_avg", "scrubbed_so2_if_scrubbed", "pressure_bar_avg",
                    "pressure_bar_if_scrubbed", "dfmq_avg", "s_ppm_avg"):
            q = table[[f"{tag}_q05", f"{tag}_median", f"{tag}_q95"]].to_numpy(float)
            assert np.all(np.isfinite(q)) and np.all(q[:, 0] <= q[:, 1]) and np.all(q[:, 1] <= q[:, 2]), tag
        assert np.all(np.isfinite(table["dfmq_rhat"])) and np.all(table["dfmq_ess_bulk"] > 0)
    # what does not apply is present and empty
    assert by_rows["window"].isna().all() and by_rows["source_check"].isna().all()
    # a window row's posterior if scrubbed (the window's draws holding that row M1;
    # test_window_table.py checks the numbers): filled where the row has M1 draws
    m1 = by_windows["p_magmatic"] < 0.9
    assert m1.any()
    for col in ("p_scrubbed_below_epsilon", "dfmq_if_scrubbed_median", "dfmq_contraction",
                "scrubbed_so2_contraction", "pressure_bar_contraction"):
        assert np.all(np.isfinite(by_windows.loc[m1, col].to_numpy(float))), col
    assert by_windows["p_scrubbed_below_epsilon"].dropna().between(0.0, 1.0).all()
    assert by_windows["pressure_bar_rhat"].isna().all()      # integrated out in a window, not sampled
    # a window repeats its shared magma's quantiles on each of its rows
    assert by_windows.groupby("window")["dfmq_avg_median"].nunique().eq(1).all()


def _estimates(stamps):
    """(clock, seconds left) of each progress line that states an estimate."""
    out = []
    for t, text in stamps:
        m = re.search(r"~(\d+):(\d\d) left", text)
        if m:
            out.append((t, 60 * int(m.group(1)) + int(m.group(2))))
    return out


def test_progress_by_rows_inside_a_window_with_a_sane_estimate(window_run):
    """A line per row's worth of a window's work before its rows are recorded, counts that
    never go back, and estimates of the time left within a factor 2.5 of what was left
    (once a tenth of the work is done; "sane", common practice, no source)."""
    _, stamps, total = window_run
    lines = [text for _, text in stamps if "rows" in text and "[" in text]
    inside = [x for x in lines if "window 'c'" in x]
    assert len(inside) == 3, inside        # 4-row window: 1, 2, 3 rows' work, then its rows recorded
    assert len([x for x in lines if "window 'b'" in x]) == 2
    counts = [int(re.search(r"\] (\d+)/8 rows", x).group(1)) for x in lines]
    assert counts == sorted(counts) and counts[-1] == 8
    checked = [(t, left) for t, left in _estimates(stamps) if t > 0.1 * total and total - t > 0.05 * total]
    assert len(checked) >= 4
    for t, left in checked:
        assert 1 / 2.5 <= left / (total - t) <= 2.5, (t, left, total)


def test_progress_reports_do_not_change_the_numbers():
    from ventsource.inference.likelihood import Measurement
    from ventsource.inference.priors import load_prior_file
    from ventsource.inference.window.sampling import infer_window
    names = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
    rows = [Measurement(names, v, 0.15, label=str(i)) for i, v in
            enumerate([[0.65, 0.30, 35.0], [0.60, 0.33, 34.0]])]
    spec = load_prior_file(PRIOR)
    seen = []
    a = infer_window(rows, spec, seed=4, progress=seen.append, **TINY)
    b = infer_window(rows, spec, seed=4, **TINY)
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 3
    assert [r.p_magmatic for r in a.rows] == [r.p_magmatic for r in b.rows]
    assert np.array_equal(a.shared_draws, b.shared_draws)


def test_two_workers_report_progress_inside_windows_and_give_the_same_numbers(window_run, data_file, tmp_path):
    """Worker processes send their windows' progress to the bar through a queue; the
    numbers are those of the one-process run (seeds per window, reporting touches no
    random stream)."""
    out = str(tmp_path / "two")
    stream = io.StringIO()
    run_series(read_measurements(data_file), PRIOR, out, seed=3, options=TINY, workers=2,
               progress_stream=stream)
    assert "window 'c' 1 of 4 rows' work" in stream.getvalue()
    one, two = _table(window_run[0]), _table(out)
    assert list(one.columns) == list(two.columns)
    for c in one.columns:
        if one[c].dtype.kind == "f":   # 1e-9: compiled kernels may differ in the last bits between processes
            assert np.allclose(one[c], two[c], rtol=1e-9, atol=0, equal_nan=True), c
        else:
            assert one[c].tolist() == two[c].tolist(), c


def _documented_columns():
    """Regular expressions of the columns docs/outputs.md lists for summary.csv."""
    text = open(os.path.join(ROOT, "docs", "outputs.md")).read()
    section = text.split("## `summary.csv` columns")[1].split("\n## ")[0]
    patterns = []
    for line in section.splitlines():
        if not line.startswith("| `"):
            continue
        previous = None
        for name in re.findall(r"`([^`]+)`", line.split("|")[1]):
            if name.startswith("..."):
                name = previous + name[3:]
            previous = name
            rx = re.escape(name).replace("NAME", r"\w+").replace("RATIO", r"[^_]+")
            rx = rx.replace(r"q05/median/q95", "(q05|median|q95)").replace(r"median/q05/q95", "(q05|median|q95)")
            patterns.append(rx)
    return patterns


def test_every_column_is_documented_and_the_readme_agrees(window_run):
    """Every column of both tables has its line in docs/outputs.md, and README.txt beside the
    table names the window columns and the model-averaged / if-scrubbed convention."""
    patterns = _documented_columns()
    table = _table(window_run[0])
    missing = [c for c in table.columns if not any(re.fullmatch(p, c) for p in patterns)]
    assert not missing, missing
    readme = open(os.path.join(window_run[0], "README.txt")).read()
    for word in ("same columns", "NAME_avg_*", "NAME_if_scrubbed_*", "window_span_days", "source_check",
                 "scrubbed_so2_if_scrubbed_*", "NAME_rhat"):
        assert word in readme, word
