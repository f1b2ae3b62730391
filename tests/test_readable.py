"""Results a scientist and a hazard panel can read: figure labels, hazard.json, tables, CLI.

One small fast run (fictional demo prior, 3 rows, one value below a detection
limit, 100 particles x 2 runs) feeds the figure and hazard.json checks. The
check values are the package's own contract (labels, units, schema), plus
JSON Schema validation by the general-purpose `jsonschema` library.
"""
import io
import json
import os
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsource.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
FAST_PRIOR = ROOT / "priors" / "demo_mount_kerrow_fast.toml"
FAST = ["--infer-option", "n_particles=100", "--infer-option", "n_runs=2"]
DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
        "KRW-001,2025-01-10T00:00:00Z,0.70351,0.28689,36.746\n"
        "KRW-002,2025-01-23T00:00:00Z,0.94951,<0.5,45.756\n"
        "KRW-003,2025-02-05T00:00:00Z,0.74351,0.3017,45.693\n")


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    base = tmp_path_factory.mktemp("readable")
    data = base / "kerrow_small.csv"
    data.write_text(DATA)
    out = base / "run"
    code = main(["run", str(data), "--prior", str(FAST_PRIOR), "--out", str(out), "--corner", "KRW-002",
                 "--no-figures"] + FAST)
    assert code == 0
    return data, out


def _texts(fig):
    """Every piece of text a Figure shows: titles, labels, tick labels, legends, fig texts."""
    fig.canvas.draw()
    out = [t.get_text() for t in fig.texts]
    if getattr(fig, "_suptitle", None) is not None:
        out.append(fig._suptitle.get_text())
    for leg in fig.legends:
        out += [t.get_text() for t in leg.get_texts()]
    for ax in fig.axes:
        out += [ax.get_title(), ax.get_xlabel(), ax.get_ylabel()]
        out += [t.get_text() for t in ax.get_xticklabels() + ax.get_yticklabels()]
        out += [t.get_text() for t in ax.texts]
        if ax.get_legend() is not None:
            out += [t.get_text() for t in ax.get_legend().get_texts()]
    return out


def _log_tick_texts(fig):
    fig.canvas.draw()
    out = []
    for ax in fig.axes:
        if ax.get_yscale() == "log":
            out += [t.get_text() for t in ax.get_yticklabels() if t.get_text()]
        if ax.get_xscale() == "log":
            out += [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    return out


def test_series_figure_labels(small_run):
    import matplotlib.pyplot as plt
    from ventsource.workflow.figures import series_figure
    from ventsource.workflow.measurements import read_measurements
    data, out = small_run
    fig = series_figure(out / "summary.csv", series=read_measurements(str(data)), title="test series",
                        prior_name="demo_mount_kerrow_fast", p_magmatic_prior=0.5)
    text = "\n".join(_texts(fig))
    for needed in ("(mol/mol)", "pressure (bar)", "(fraction)", "(probability)", "time (UTC)",
                   "below detection limit", "if scrubbed", "model-averaged", "prior P(M0) = 0.5",
                   "prior: demo_mount_kerrow_fast", "data: kerrow_small.csv", "Caution:"):
        assert needed in text, needed
    ticks = _log_tick_texts(fig)
    assert ticks, "log axes carry tick labels"
    for t in ticks:  # plain decimals: no powers of ten or mathtext
        assert re.fullmatch(r"[0-9.]+", t), t
    flagged = pd.read_csv(out / "summary.csv", keep_default_na=False)["flags"].str.len().gt(0).any()
    assert ("row carries a flag" in text) == bool(flagged)
    plt.close(fig)


def test_series_figure_marks_flags_and_units_of_pressure(small_run, tmp_path):
    """A summary with a flagged row gets the ring and its flag code beside the point."""
    import matplotlib.pyplot as plt
    from ventsource.workflow.figures import series_figure
    data, out = small_run
    s = pd.read_csv(out / "summary.csv", dtype={"id": str}, keep_default_na=False)
    s.loc[0, "flags"] = "unexplained"
    s.to_csv(tmp_path / "summary.csv", index=False)
    fig = series_figure(tmp_path / "summary.csv", prior_name="p", p_magmatic_prior=0.3)
    text = "\n".join(_texts(fig))
    assert "row carries a flag (meanings:\nreport.html, README.txt)" in text
    pressure = [ax for ax in fig.axes if ax.get_ylabel().startswith("degassing")]
    legend = [t.get_text() for t in pressure[0].get_legend().get_texts()]
    # rows one by one show the model-averaged pressure, the same quantity as a window run
    assert legend == ["5-95 %, model-averaged", "median, model-averaged"]
    assert "unexplained" in text
    assert "prior P(M0) = 0.3" in text
    _assert_legends_beside_data(fig)
    plt.close(fig)


def _assert_legends_beside_data(fig):
    """No legend box overlaps the data area of any panel (matplotlib's own layout geometry)."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    legends = [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None]
    assert legends
    for leg in legends:
        box = leg.get_window_extent(renderer)
        for ax in fig.axes:
            assert not box.overlaps(ax.get_window_extent(renderer)), leg.get_texts()[0].get_text()


def test_plain_number_ticks():
    from ventsource.workflow.log_axes import plain_number
    assert [plain_number(v) for v in (0.2, 0.5, 1.0, 2.0, 300.0)] == ["0.2", "0.5", "1", "2", "300"]


def test_ratio_plane_figure(small_run):
    import matplotlib.pyplot as plt
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.measurements import read_measurements
    from ventsource.workflow.prior_predictive import (overlay_points, prior_predictive_table,
                                                      ratio_plane_figure)
    data, _ = small_run
    spec = load_prior_file(FAST_PRIOR)
    table = prior_predictive_table(spec, 300, seed=1, ratio_names=("H2S/SO2", "SO2/CO2"))
    points = overlay_points(read_measurements(str(data)), "H2S/SO2", "SO2/CO2")
    assert (points["cens_x"] < 0).sum() == 1  # the censored H2S/SO2 is kept
    fig = ratio_plane_figure(table, "H2S/SO2", "SO2/CO2", data=points, title=spec.name)
    text = "\n".join(_texts(fig))
    assert "scrubbing free" not in text
    for needed in ("no scrubbing", "with scrubbing", "H2S/SO2 (mol/mol)", "SO2/CO2 (mol/mol)",
                   "censored", "measurement (colour: time)", "measurement time", "Caution:"):
        assert needed in text, needed
    for t in _log_tick_texts(fig):
        assert re.fullmatch(r"[0-9.]+", t), t
    # axes hold the measurements and stay inside a margin around the 1-99 % of the draws
    ax = fig.axes[0]
    ok = table[(table["status"] == 0)]
    x_hi = max(np.quantile(ok["H2S/SO2"][ok["H2S/SO2"] > 0], 0.99), points["x"].max())
    assert ax.get_xlim()[0] <= points["x"].min() and ax.get_xlim()[1] >= points["x"].max()
    assert ax.get_xlim()[1] < 10 * x_hi
    plt.close(fig)


def test_ratio_plane_shows_the_released_sulfur_hypothesis():
    """With a [hypotheses] table the plane gets a third panel, M2: the M0 gas with its SO2
    multiplied by 1 + r (the hypothesis' definition, inference/hypotheses/release_marginal.py),
    so per draw SO2/CO2 grows by 1 + r, H2S/SO2 shrinks by it and H2O/CO2 stays."""
    import matplotlib.pyplot as plt
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.demo import DEMO_RELEASE_PRIOR
    from ventsource.workflow.prior_predictive import M2_LABEL, prior_predictive_table, ratio_plane_figure
    spec = load_prior_file(DEMO_RELEASE_PRIOR)
    table = prior_predictive_table(spec, 40, seed=2, ratio_names=("H2S/SO2", "SO2/CO2", "H2O/CO2"))
    m0 = table[table["model"] == "M0 purely magmatic"].reset_index(drop=True)
    m2 = table[table["model"] == M2_LABEL].reset_index(drop=True)
    ok = (m0["status"] == 0).to_numpy()
    assert ok.sum() > 10
    one_r = 1.0 + m2["released_so2"].to_numpy()
    assert np.allclose(m2["SO2/CO2"][ok], m0["SO2/CO2"][ok] * one_r[ok], rtol=1e-9)
    assert np.allclose(m2["H2S/SO2"][ok], m0["H2S/SO2"][ok] / one_r[ok], rtol=1e-9)
    assert np.allclose(m2["H2O/CO2"][ok], m0["H2O/CO2"][ok], rtol=1e-9)
    fig = ratio_plane_figure(table, "H2S/SO2", "SO2/CO2", title=spec.name)
    titles = [ax.get_title() for ax in fig.axes]
    assert sum("stored sulfur released" in t for t in titles) == 1 and len(titles) >= 3
    plt.close(fig)


def test_corner_figure_truth_lines_and_footer(small_run):
    import matplotlib.pyplot as plt
    from ventsource.workflow.demo import truth_table
    from ventsource.workflow.figures import corner_figure
    _, out = small_run
    truth = truth_table(3)
    fig = corner_figure(out / "rows" / "KRW-002.nc", "KRW-002", truth)
    text = "\n".join(_texts(fig))
    assert "synthetic truth" in text and "if scrubbed" in text and "scrubbing free" not in text
    true_p = float(truth.loc[truth["id"] == "KRW-002", "pressure_bar"].iloc[0])
    xs = [line.get_xdata()[0] for line in fig.axes[0].get_lines() if len(line.get_xdata())]
    assert any(np.isclose(x, true_p) for x in xs)
    renderer = fig.canvas.get_renderer()
    footer = [t for t in fig.texts if t.get_text().startswith("Caution:")][0].get_window_extent(renderer)
    for ax in fig.axes:
        label = ax.xaxis.label
        if label.get_text():
            assert not footer.overlaps(label.get_window_extent(renderer)), label.get_text()
    # every kind of line is named in the figure's legend: quantiles, contours, truth
    legend = [t.get_text() for leg in fig.legends for t in leg.get_texts()]
    assert any("5 %, 50 %, 95 % quantiles" in t for t in legend)
    assert any("synthetic truth" in t for t in legend) and any("contours" in t for t in legend)
    box = fig.legends[0].get_window_extent(renderer)
    for ax in [a for a in fig.axes if a.has_data()]:  # in the empty upper-right triangle
        assert not box.overlaps(ax.get_window_extent(renderer))
    plt.close(fig)


def test_compare_figure_has_time_axis():
    import matplotlib.pyplot as plt
    from ventsource.workflow.compare import compare_figure
    table = pd.DataFrame({"id": ["a", "b"], "time": ["2025-01-10T00:00:00Z", "2025-03-10T00:00:00Z"],
                          "p_magmatic [A]": [0.4, 0.6], "p_magmatic_error [A]": [0.02, 0.03],
                          "p_magmatic [B]": [0.5, 0.7], "p_magmatic_error [B]": [0.02, 0.02]})
    fig = compare_figure(table, ["A", "B"])
    text = "\n".join(_texts(fig))
    assert "measurement time (UTC)" in text and "prior A" in text
    assert "2025" in "".join(t.get_text() for t in fig.axes[0].get_xticklabels())
    assert "a" not in [t.get_text() for t in fig.axes[0].get_xticklabels()]
    plt.close(fig)


def test_hazard_json_validates_against_schema(small_run):
    import jsonschema
    from ventsource.workflow.hazard_format import decimals_for_error
    _, out = small_run
    doc = json.loads((out / "hazard.json").read_text())
    schema = json.loads((ROOT / "docs" / "hazard.schema.json").read_text())
    jsonschema.validate(doc, schema)
    assert doc["synthetic"] is True  # the demo prior is fictional
    assert not os.path.isabs(doc["input_file"]) and not os.path.isabs(doc["priors"][0]["file"])
    assert (out / doc["input_file"]).resolve() == (out.parent / "kerrow_small.csv").resolve()
    assert (out / doc["priors"][0]["file"]).resolve() == FAST_PRIOR.resolve()
    used = {f for r in doc["rows"] for f in r["flags"]}
    assert set(doc["flag_glossary"]) == used
    for r in doc["rows"]:
        p, err = r["p_magmatic"], r["p_magmatic_error"]
        d = decimals_for_error(err)
        assert p == round(p, d)
        assert r["scrubbed_so2_model_averaged"]["median"] is not None
        assert "p_scrubbed_below_epsilon_if_scrubbed" in r  # the name says it is conditional on M1
    from hazard_checks import assert_rounding_rule
    assert_rounding_rule(doc)


def test_unexplained_row_says_read_no_number():
    """A row no hypothesis reproduces (the raw-data example with H2/SO2 gave three) keeps its
    numbers for the machine but says in words that none should be read."""
    from ventsource.workflow.hazard_export import _hazard_row
    row = {"id": "W1", "time": "2026-03-14T00:09:59Z", "p_magmatic": 0.0, "p_magmatic_error": 0.0,
           "scrubbed_so2_avg_q05": 0.86, "scrubbed_so2_avg_median": 0.86, "scrubbed_so2_avg_q95": 0.86}
    out = _hazard_row(row, ["m0_not_reproducing", "m1_not_reproducing", "unexplained"])
    assert "mean nothing" in out["read_no_number"]
    assert out["p_magmatic_text"] == "< 0.01" and out["p_magmatic"] == 0.01
    assert "read_no_number" not in _hazard_row(row, [])


def test_hazard_json_reads_top_down(small_run):
    """Hypotheses defined and prior probabilities labelled before the rows; pi0 never null and
    equal to the labelled P(M0) prior; every field in the rows explained."""
    _, out = small_run
    doc = json.loads((out / "hazard.json").read_text(encoding="utf-8"))
    keys = list(doc)
    assert keys.index("hypotheses") < keys.index("prior_model_probabilities") < keys.index("rows")
    assert set(doc["hypotheses"]) == set(doc["prior_model_probabilities"]) == {"M0", "M1"}
    assert doc["pi0"]["value"] == doc["prior_model_probabilities"]["M0"]
    assert doc["inference_options_in_effect"]["pi0"] == doc["pi0"]["value"]
    assert doc["priors"][0]["p_magmatic_prior"] == doc["pi0"]["value"]
    glossary = doc["field_glossary"]
    for name in doc["rows"][0]:
        explained = name in glossary or any(k.startswith("*") and name.endswith(k[1:]) for k in glossary)
        assert explained or name in ("id", "time"), name
    assert "conditional on M1" in glossary["p_scrubbed_below_epsilon_if_scrubbed"]


def test_schema_refuses_absolute_paths(small_run):
    import jsonschema
    _, out = small_run
    doc = json.loads((out / "hazard.json").read_text())
    doc["input_file"] = "/home/someone/data.csv"
    schema = json.loads((ROOT / "docs" / "hazard.schema.json").read_text())
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(doc, schema)


def test_rounding_rule():
    # reporting to the first significant digit of the uncertainty: common practice, no source
    from ventsource.workflow.hazard_format import round_probability
    assert round_probability(0.66357, 0.0251) == (0.66, 0.03)
    assert round_probability(0.123456, 0.0042) == (0.123, 0.004)
    assert round_probability(0.5, None) == (0.5, None)
    assert round_probability(0.98765, 0.00001)[0] == 0.9877  # at most 4 decimals
    # the error is rounded to one significant digit first: 0.00099 -> 0.001, so 3 decimals
    assert round_probability(0.82621, 0.00099) == (0.826, 0.001)
    # never exactly 0 or 1: the bound, and the text says so
    assert round_probability(0.9999, 0.01) == (0.99, 0.01)
    assert round_probability(0.00001, 0.0002) == (0.0001, 0.0002)
    from ventsource.workflow.hazard_format import probability_text, round_log10_bf
    assert probability_text(0.9999, 0.01) == "> 0.99"
    assert probability_text(0.00002, 0.0004) == "< 0.0001"
    assert probability_text(0.00002, 0.0004) != "0.0000"
    assert probability_text(0.66357, 0.0251) == "0.66 ± 0.03"
    assert round_log10_bf(29.17612422981421) == 29.2


def test_readme_beside_tables(small_run):
    from ventsource.common.caution import CAUTION
    _, out = small_run
    text = (out / "README.txt").read_text()
    assert CAUTION in text and "summary.csv" in text and "SYNTHETIC" in text
    assert "Glossary:" in text and "conditional on M1" in text and "band widens" in text
    assert "docs/flags.md" not in text  # a panel has the folder, not the package's docs
    header = (out / "summary.csv").read_text().splitlines()[0]
    assert header.startswith("id,time,")  # the table itself stays plain CSV


def test_flag_glossary_matches_docs():
    from ventsource.common.flag_glossary import FLAG_GLOSSARY
    doc = (ROOT / "docs" / "flags.md").read_text()
    codes = set()
    for line in doc.splitlines():
        if line.startswith("| `"):
            codes |= set(re.findall(r"`([a-z0-9_]+)`", line.split("|")[1]))
    assert codes == set(FLAG_GLOSSARY)


def test_prior_predictive_table_option_and_sidecar(tmp_path, capsys):
    from ventsource.common.caution import CAUTION
    assert main(["prior-predictive", "--prior", str(FAST_PRIOR), "-n", "20", "--out", str(tmp_path)]) == 2
    assert "--table FILE" in capsys.readouterr().err
    table = tmp_path / "pp.csv"
    assert main(["prior-predictive", "--prior", str(FAST_PRIOR), "-n", "20", "--table", str(table)]) == 0
    assert CAUTION in (tmp_path / "pp.csv.README.txt").read_text()
    assert set(pd.read_csv(table)["model"]) == {"M0 purely magmatic", "M1 with scrubbing"}


def test_repeated_set_is_refused(capsys):
    code = main(["forward", "--prior", str(FAST_PRIOR), "--set", "pressure_bar=100", "--set",
                 "pressure_bar=200"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "pressure_bar is given twice" in err[0]


def test_every_option_has_help_with_default():
    import argparse
    from ventsource.cli.main import build_parser
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    for name, p in sub.choices.items():
        for action in p._actions:
            if isinstance(action, argparse._HelpAction):
                continue
            assert action.help, f"{name} {action.option_strings or action.dest} has no help"
        text = p.format_help()
        for action in p._actions:
            if action.default not in (None, False, [], argparse.SUPPRESS) and action.help \
                    and action.help != argparse.SUPPRESS and action.option_strings:
                assert "default" in text, name
    assert "(default: 1)" in sub.choices["run"].format_help()  # --workers
    assert "(default: 2)" in sub.choices["demo"].format_help()


def test_compile_notice_only_with_empty_cache(tmp_path, monkeypatch):
    import ventsource
    from ventsource.cli import shared as cli
    fake = tmp_path / "ventsource"
    (fake / "chemistry" / "__pycache__").mkdir(parents=True)
    monkeypatch.setattr(ventsource, "__file__", str(fake / "__init__.py"))
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    stream = io.StringIO()
    cli.announce_compilation(stream)
    assert stream.getvalue().strip() == "compiling the model's kernels (first run only, about 30 s)"
    (fake / "chemistry" / "__pycache__" / "eos.kernel-1.py311.nbi").write_bytes(b"")
    stream = io.StringIO()
    cli.announce_compilation(stream)
    assert stream.getvalue() == ""


def test_progress_names_its_label():
    from ventsource.workflow.series import Progress
    bar = Progress(2, 0, stream=io.StringIO(), label="prior 1/2 arc_basalt")
    assert bar.text().startswith("prior 1/2 arc_basalt: [")


def test_bench_numbers_are_plain():
    from ventsource.bench.inference import _plain
    text = _plain(("SO2/CO2", "H2S/SO2"), np.array([0.512345, 0.2]), 4)
    assert text == "SO2/CO2=0.5123, H2S/SO2=0.2" and "np." not in text


@pytest.mark.parametrize("written", ["Moore et al. 1998", "moore  ET AL., 1998", "moore1998"])
def test_solubility_law_by_citation(tmp_path, written):
    from ventsource.inference.priors import load_prior_file
    text = FAST_PRIOR.read_text().replace('h2o_solubility = "moore1998"', f'h2o_solubility = "{written}"')
    text = text.replace('co2_solubility = "shishkina2014"', 'co2_solubility = "Shishkina et al. 2014"')
    path = tmp_path / "cited.toml"
    path.write_text(text)
    spec = load_prior_file(path)
    assert spec.models["h2o_solubility"] == "moore1998"
    assert spec.models["co2_solubility"] == "shishkina2014"


def test_unknown_law_lists_citations(tmp_path):
    from ventsource.inference.priors import PriorFileError, load_prior_file
    text = FAST_PRIOR.read_text().replace('h2o_solubility = "moore1998"', 'h2o_solubility = "Moore 1999"')
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(PriorFileError, match="Moore et al. 1998"):
        load_prior_file(path)


def test_library_warnings_go_to_a_log(tmp_path, monkeypatch, capsys):
    import warnings
    from ventsource.cli.shared import route_warnings
    monkeypatch.setattr(warnings, "showwarning", warnings.showwarning)  # restored afterwards
    route_warnings(str(tmp_path))
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.warn("a library speaks", UserWarning)
    assert "a library speaks" not in capsys.readouterr().err
    assert "a library speaks" in (tmp_path / "warnings.log").read_text()


def test_rows_vs_windows_figure(small_run, tmp_path):
    import matplotlib.pyplot as plt
    from ventsource.workflow.figures import rows_vs_windows_figure
    _, out = small_run
    rows = pd.read_csv(out / "summary.csv", dtype={"id": str}, keep_default_na=False)
    windows = rows.copy()
    windows["flags"] = ["", "mixed_sources", ""]
    windows.to_csv(tmp_path / "windows.csv", index=False)
    fig = rows_vs_windows_figure(out / "summary.csv", tmp_path / "windows.csv", p_magmatic_prior=0.4)
    text = "\n".join(_texts(fig))
    for needed in ("prior P(M0) = 0.4", "(probability)", "(fraction)", "time (UTC)", "row by row",
                   "by windows", "mixed_sources", "Caution:"):
        assert needed in text, needed
    _assert_legends_beside_data(fig)
    plt.close(fig)
