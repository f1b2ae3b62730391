"""The series figure shows the three hypotheses and the cumulative retained sulfur when a
run carries them (columns written by ventsource.workflow.hypothesis_rows), and not otherwise.
The numbers below are arbitrary placeholders for the plotting check only."""
import matplotlib
import pandas as pd
import pytest

matplotlib.use("Agg")

from ventsource.workflow.figures import series_figure  # noqa: E402


def _summary(tmp_path, with_sulfur):
    times = ["2026-01-01T00:00:00Z", "2026-01-11T00:00:00Z", "2026-01-21T00:00:00Z"]
    d = {"id": ["a", "b", "c"], "time": times, "p_magmatic": [0.8, 0.1, 0.05],
         "p_magmatic_error": [0.01, 0.01, 0.01], "flags": ["", "", ""],
         "scrubbed_so2_avg_q05": [0, 0.4, 0], "scrubbed_so2_avg_median": [0, 0.6, 0],
         "scrubbed_so2_avg_q95": [0.1, 0.8, 0.1],
         "pp SO2/CO2_q05": [0.5, 0.2, 1.5], "pp SO2/CO2_median": [0.7, 0.3, 2.0],
         "pp SO2/CO2_q95": [0.9, 0.4, 2.5]}
    if with_sulfur:
        d.update({"p_scrubbed": [0.15, 0.85, 0.05], "p_scrubbed_error": [0.01] * 3,
                  "p_released": [0.05, 0.05, 0.9], "p_released_error": [0.01] * 3,
                  "cumulative_retained_s_t_q05": [0, 50, 20], "cumulative_retained_s_t_median": [0, 80, 40],
                  "cumulative_retained_s_t_q95": [0, 110, 60]})
    path = tmp_path / "summary.csv"
    pd.DataFrame(d).to_csv(path, index=False)
    return str(path)


def _texts(fig):
    out = []
    for ax in fig.axes:
        out.append(ax.get_ylabel())
        leg = ax.get_legend()
        if leg is not None:
            out += [t.get_text() for t in leg.get_texts()]
    return " | ".join(out)


def test_sulfur_panels_appear_only_with_their_columns(tmp_path):
    with_s = series_figure(_summary(tmp_path, True), prior_name="p")
    text = _texts(with_s)
    assert "P(M2) stored sulfur released" in text and "P(M1) SO2 scrubbed" in text
    assert "sulfur retained" in text and "(t S)" in text
    assert with_s.axes[-1].get_xlabel() == "time (UTC)"
    without = series_figure(_summary(tmp_path, False), prior_name="p")
    assert "P(M2)" not in _texts(without) and "sulfur retained" not in _texts(without)
    assert len(with_s.axes) == len(without.axes) + 2


def test_budget_panel_shows_a_synthetic_truth_and_window_labels(tmp_path):
    summary = _summary(tmp_path, True)
    s = pd.read_csv(summary)
    s["window"] = ["period 1", "period 1", "period 2"]
    s.to_csv(summary, index=False)
    truth = tmp_path / "truth.csv"
    pd.DataFrame({"time": s["time"], "cumulative_retained_s_t": [0, 70, 45]}).to_csv(truth, index=False)
    fig = series_figure(summary, truth_csv=str(truth), prior_name="p")
    legend = [t.get_text() for t in fig.axes[-1].get_legend().get_texts()]
    assert "synthetic truth" in legend
    tops = [t.get_text() for t in fig.axes[0].texts]
    assert tops.count("period 1") == 1 and tops.count("period 2") == 1


def test_rows_vs_windows_gets_a_released_panel_and_the_prior_of_m0(tmp_path):
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.demo import DEMO_RELEASE_PRIOR
    from ventsource.workflow.figures import prior_p_magmatic, rows_vs_windows_figure
    summary = _summary(tmp_path, True)
    fig = rows_vs_windows_figure(summary, summary)
    assert len(fig.axes) == 3 and "P(M2)" in fig.axes[1].get_ylabel()
    # p_magmatic 0.5 shared with p_released 0.2: (1 - 0.2) x 0.5 (the prior file's numbers)
    assert prior_p_magmatic(load_prior_file(DEMO_RELEASE_PRIOR)) == pytest.approx(0.4)
