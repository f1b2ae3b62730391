"""`ventsource plan` (workflow/plan.py): the preposterior comparison of candidate
measurements.

* Fast: the command on the synthetic demo prior with tiny settings writes a ranked
  table with Monte Carlo errors and the caution; bad input is one line and exit 2;
  the same seed gives the same table. Means, errors and paired differences against
  scipy.stats.sem on a hand-made long table.
* Slow (the honesty check of issue 23): for the baseline and "add H2/H2O and CO/CO2"
  on the generic arc-basalt prior, 50 fresh simulated data sets are inverted and the
  realised mean Brier score (Brier 1950, Monthly Weather Review 78, 1-3) and 90 % widths
  fall within 2 combined Monte Carlo errors of the planner's estimate; the ranking of
  "add H2/H2O and CO/CO2" against "errors 15 % -> 5 %" agrees with the realised one.
"""
import os

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from ventsource.cli.main import main
from ventsource.workflow.plan import METRICS, default_candidates, run_plan, summarise_plan

TINY = ["-n", "2", "--particles", "60", "--seed", "3"]


def test_plan_command_writes_ranked_table_with_caution(tmp_path, capsys):
    table = tmp_path / "plan.csv"
    args = ["plan", "demo_mount_kerrow_fast", "--table", str(table), *TINY]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "Caution" in out and "rank" in out
    t = pd.read_csv(table)
    assert list(t["rank"]) == list(range(1, len(t) + 1))
    assert set(t["candidate"]) >= {"baseline", "add H2/H2O", "add CO/CO2", "errors 15 % -> 5 %",
                                   "3 rows of the same gas"}
    assert (np.diff(t["brier_mean"]) >= 0).all()
    assert t["brier_mc_error"].notna().all()
    assert "observatory" in (tmp_path / "plan.csv.README.txt").read_text()
    first = table.read_bytes()
    assert main(args) == 0   # same inputs and seed: same numbers
    assert table.read_bytes() == first


@pytest.mark.parametrize("extra, words", [(["--scenario", "SO2/XX"], "XX"),
                                          (["-n", "1"], "-n"),
                                          (["--data", "/nonexistent/data.csv"], "data.csv"),
                                          (["--plot", "/nonexistent/plan.png"], "plan.png")])
def test_plan_bad_input_one_line_exit_2(tmp_path, capsys, extra, words):
    table = tmp_path / "plan.csv"
    assert main(["plan", "demo_mount_kerrow_fast", "--table", str(table), *extra]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and words in err[0]
    assert not os.path.exists(table)


def test_summary_means_errors_and_paired_differences_match_scipy():
    rng = np.random.default_rng(0)
    rows = []
    for name, shift in (("baseline", 0.0), ("better", -0.1)):
        for i in range(12):
            rows.append({"candidate": name, "sim": i, "is_m0": i % 2 == 0,
                         **{k: 0.3 + 0.05 * i + shift + 0.01 * rng.standard_normal() for k in METRICS}})
    long = pd.DataFrame(rows)
    t = summarise_plan(long).set_index("candidate")
    assert list(t.index) == ["better", "baseline"]
    for name in ("baseline", "better"):
        x = long[long["candidate"] == name]["brier"].to_numpy()
        assert t.loc[name, "brier_mean"] == pytest.approx(x.mean())
        assert t.loc[name, "brier_mc_error"] == pytest.approx(stats.sem(x))
    d = (long[long["candidate"] == "better"]["brier"].to_numpy()
         - long[long["candidate"] == "baseline"]["brier"].to_numpy())
    assert t.loc["better", "brier_minus_baseline"] == pytest.approx(d.mean())
    assert t.loc["better", "brier_minus_baseline_error"] == pytest.approx(stats.sem(d))


def test_candidates_skip_ratios_already_measured():
    c = default_candidates(("SO2/CO2", "H2/H2O"), 0.1)
    assert "add H2/H2O" not in c and "add CO/CO2" in c
    assert c["errors 15 % -> 5 %"][1] == {"SO2/CO2": 0.05, "H2/H2O": 0.05}
    assert not any(k.startswith("melt inclusions") for k in c)   # S, dFMQ not named free
    assert any(k.startswith("melt inclusions") for k in default_candidates(("SO2/CO2",), 0.1,
                                                                            ("s_ppm", "dfmq")))


def test_melt_inclusion_prior_is_the_truncated_normal_posterior():
    """A uniform prior times a normal measurement is a normal truncated to the prior's
    bounds (conjugacy, common practice, no source): its mean and sd against
    scipy.stats.truncnorm."""
    import ventsource
    from ventsource.workflow.plan import narrowed_prior
    spec = ventsource.load_prior("demo_mount_kerrow_fast")   # s_ppm uniform(400, 2500)
    truth = spec.full(spec.sample(np.random.default_rng(0), 1))[0]
    names = list(spec.parameter_names)
    new = narrowed_prior(spec, {"s_ppm": 150.0}, truth, np.array([2.0]))
    centre = truth[names.index("s_ppm")] + 300.0
    ref = stats.truncnorm((400 - centre) / 150, (2500 - centre) / 150, loc=centre, scale=150)
    x = new.sample(np.random.default_rng(1), 40000)[:, list(new.free_names).index("s_ppm")]
    assert x.mean() == pytest.approx(ref.mean(), abs=4 * ref.std() / np.sqrt(x.size))
    assert x.std() == pytest.approx(ref.std(), rel=0.03)
    assert spec.distributions["s_ppm"].kind == "uniform"   # the original is untouched
    assert new.free_names == spec.free_names


def _paired(long, a, b, metric):
    """(mean, Monte Carlo error) of metric(a) - metric(b) over the shared data sets."""
    x = long[long["candidate"] == a].set_index("sim")[metric]
    y = long[long["candidate"] == b].set_index("sim")[metric]
    d = (x - y).to_numpy(float)
    d = d[np.isfinite(d)]
    return d.mean(), stats.sem(d)


@pytest.mark.slow
def test_planning_estimate_is_honest_on_arc_basalt():
    """Estimate (20 data sets, seed 1) against realised inversions (50 fresh data sets,
    seed 777). Ranking of "add H2/H2O and CO/CO2" against "errors 15 % -> 5 %": on every
    metric where the estimate resolves their paired difference (beyond 2 errors), the
    realised difference has the same sign; at least one metric must be resolved."""
    import ventsource
    spec = ventsource.load_prior("arc_basalt")
    cands = default_candidates(("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.15)
    both, tight = "add H2/H2O and CO/CO2", "errors 15 % -> 5 %"
    pick = {k: cands[k] for k in ("baseline", both, tight)}
    est_long, real_long = run_plan(spec, pick, n_sim=20, seed=1), run_plan(spec, pick, n_sim=50, seed=777)
    est, real = summarise_plan(est_long).set_index("candidate"), summarise_plan(real_long).set_index("candidate")
    for name in ("baseline", both):
        for k in ("brier", "width90_scrubbed", "width90_pressure"):
            err = np.hypot(est.loc[name, f"{k}_mc_error"], real.loc[name, f"{k}_mc_error"])
            print(f"{name:24s} {k:18s} estimate {est.loc[name, f'{k}_mean']:.4g} realised "
                  f"{real.loc[name, f'{k}_mean']:.4g} (2 errors {2 * err:.3g})")
            assert abs(est.loc[name, f"{k}_mean"] - real.loc[name, f"{k}_mean"]) < 2 * err, (name, k)
    resolved = 0
    for k in METRICS:
        (d_est, e_est), (d_real, e_real) = _paired(est_long, both, tight, k), _paired(real_long, both, tight, k)
        print(f"{both} minus {tight}, {k}: estimate {d_est:+.4g} +- {e_est:.2g}, "
              f"realised {d_real:+.4g} +- {e_real:.2g}")
        if abs(d_est) > 2 * e_est:
            resolved += 1
            assert np.sign(d_est) == np.sign(d_real), k
    assert resolved >= 1


def test_plan_takes_todays_ratios_from_a_data_file(tmp_path):
    """--data: the file's ratios and errors are the baseline (the synthetic demo series,
    SO2/CO2, H2S/SO2, H2O/CO2): the add-a-ratio candidates add only what it lacks."""
    table = tmp_path / "plan.csv"
    assert main(["plan", "demo_mount_kerrow_fast", "--data", "examples/mount_kerrow_synthetic.csv",
                 "--table", str(table), *TINY]) == 0
    names = set(pd.read_csv(table)["candidate"])
    assert {"baseline", "add H2/H2O", "add CO/CO2", "add H2/H2O and CO/CO2"} <= names
    assert "melt inclusions: S +-150 ppm, dFMQ +-0.15" in names   # S and dFMQ free in this prior
    assert "add CO2/ST" not in names   # SO2/CO2 and H2S/SO2 already fix it
    assert set(pd.read_csv(table)["truths_from"]) == {"posterior of mount_kerrow_synthetic.csv"}


def test_co2_st_is_a_candidate_only_when_the_ratios_do_not_fix_it():
    """CO2/ST = 1 / (SO2/CO2 (1 + H2S/SO2)) (ST = SO2 + H2S, definition; common practice,
    no source): checked on forward-model gas, so the rule that skips it is right."""
    import ventsource
    from ventsource.forward.model import ForwardModel
    spec = ventsource.load_prior("demo_mount_kerrow_fast")
    fm = ForwardModel(spec, ("SO2/CO2", "H2S/SO2", "CO2/ST"))
    r, status = fm.ratios_and_status(spec.full(spec.sample(np.random.default_rng(5), 40)))
    r = r[status == 0]
    assert len(r) > 10
    np.testing.assert_allclose(r[:, 2], 1.0 / (r[:, 0] * (1.0 + r[:, 1])), rtol=1e-10)
    assert "add CO2/ST" in default_candidates(("SO2/CO2", "H2O/CO2"), 0.15)
    assert "add CO2/ST" not in default_candidates(("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.15)
    assert "add CO2/ST" not in default_candidates(("ST/CO2", "H2O/CO2"), 0.15)


def test_truths_from_the_data_sit_near_the_data():
    """Posterior truths of a row reproduce its measured SO2/CO2 far better than prior
    truths do (Bayes: the posterior concentrates where the likelihood is; common
    practice, no source)."""
    import ventsource
    from ventsource.workflow.plan import simulate_truths
    from ventsource.workflow.plan_posterior import posterior_truths
    spec = ventsource.load_prior("demo_mount_kerrow_fast")
    series = ventsource.read_measurements("examples/mount_kerrow_synthetic.csv")
    one = series.measurements[0]
    observed = np.log(one.values[list(one.ratio_names).index("SO2/CO2")])

    class OneRow:   # the first row alone, as a series
        path, measurements = series.path, [one]

        def __len__(self):
            return 1
    _, _, post = posterior_truths(spec, OneRow(), ("SO2/CO2",), 12, seed=2, n_particles=100)
    _, _, prior = simulate_truths(spec, ("SO2/CO2",), 12, 0.5, seed=2)
    assert np.median(np.abs(np.log(post[:, 0]) - observed)) < 0.5 * np.median(
        np.abs(np.log(prior[:, 0]) - observed))


def test_rows_per_window_candidate_inverts_the_rows_together(tmp_path):
    """--window-rows 3: three noisy copies of each simulated gas inverted by the window
    model; its scores are probabilities and widths inside the prior's range (the
    scrubbed fraction lives in [0, 1]; common practice, no source)."""
    table = tmp_path / "plan.csv"
    assert main(["plan", "demo_mount_kerrow_fast", "--table", str(table), "-n", "2",
                 "--particles", "60", "--window-rows", "3"]) == 0
    t = pd.read_csv(table).set_index("candidate")
    row = t.loc["3 rows per window (window model)"]
    assert row["n_simulated"] == 2
    assert 0 <= row["brier_mean"] <= 1 and 0 < row["width90_scrubbed_mean"] <= 1
    assert row["width90_pressure_mean"] > 0 and np.isnan(row["contraction_scrubbed_mean"])


@pytest.mark.parametrize("extra", [["--window-rows", "1"], ["--window-rows", "9"],
                                   ["--truths-from-prior"]])
def test_plan_new_options_refuse_bad_values(tmp_path, capsys, extra):
    assert main(["plan", "demo_mount_kerrow_fast", "--table", str(tmp_path / "p.csv"), *extra]) == 2
    err = [e for e in capsys.readouterr().err.splitlines() if e.strip()]
    assert len([e for e in err if e.startswith("error") or "plan:" in e]) == 1
    assert not (tmp_path / "p.csv").exists()
