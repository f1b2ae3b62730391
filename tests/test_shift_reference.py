"""How far data simulated from the prior move P(M0) (workflow/shift_reference.py).

Checks against facts of probability, not against numbers of our own:
* the mean of the posterior probability over prior-predictive data equals the prior
  probability (posterior probabilities are a martingale; Doob 1949, from memory; the
  law of total probability): |mean P(M0 | D) - pi0| within 3 Monte Carlo errors;
* a probability's spread is at most that of a Bernoulli(pi0) variable, sqrt(pi0 (1 -
  pi0)) (variance of a [0, 1] variable with mean pi0; common practice, no source);
* the summary's means and standard errors against numpy / scipy.stats on the same values.
"""
import json

import numpy as np
import pytest
from scipy import stats

from ventsource.cli.main import main
from ventsource.workflow.shift_reference import _spread, prior_predictive_shift

DATA = "examples/mount_kerrow_synthetic.csv"


def test_spread_statistics_match_scipy():
    p = np.array([0.1, 0.8, 0.45, 0.02, 0.97, 0.6])
    out = _spread(p, 0.5, np.array([0, 1, 0, 0, 1, 1], bool))
    assert out["p_magmatic_sd"] == pytest.approx(np.std(p, ddof=1))
    assert out["p_magmatic_mean_mc_error"] == pytest.approx(stats.sem(p))
    assert out["mean_abs_shift_mc_error"] == pytest.approx(stats.sem(np.abs(p - 0.5)))
    assert out["largest_possible_sd"] == pytest.approx(0.5)
    assert out["brier_mean"] == pytest.approx(np.mean((p - [0, 1, 0, 0, 1, 1]) ** 2))


def test_prior_predictive_probability_keeps_the_prior_on_average():
    import ventsource
    spec = ventsource.load_prior("demo_mount_kerrow_fast")
    ref = prior_predictive_shift(spec, ("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.15, n_sim=10, seed=4,
                                 n_particles=100)
    assert ref["n_simulated"] >= 8
    assert abs(ref["p_magmatic_mean"] - ref["pi0"]) < 3 * ref["p_magmatic_mean_mc_error"]
    assert 0 < ref["p_magmatic_sd"] <= ref["largest_possible_sd"] + 1e-12
    again = prior_predictive_shift(spec, ("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.15, n_sim=10, seed=4,
                                   n_particles=100)
    assert again == ref   # seeded


def test_run_reports_the_reference_and_resume_reuses_it(tmp_path, capsys):
    rows = tmp_path / "two.csv"
    rows.write_text("".join(open(DATA).readlines()[:3]))
    out = tmp_path / "run"
    args = ["run", str(rows), "--prior", "demo_mount_kerrow_fast", "--out", str(out), "--window", "1",
            "--no-figures", "--infer-option", "n_particles=80", "--shift-reference", "3"]
    assert main(args) == 0
    hazard = json.loads((out / "hazard.json").read_text())
    ref = hazard["p_magmatic_shift_reference"]
    assert ref["n_simulated"] == 3 and 0 <= ref["mean_abs_shift"] <= 1
    assert "p_magmatic_shift_reference" in hazard["field_glossary"]
    assert "move P(M0) from its prior by" in (out / "README.txt").read_text()
    stored = (out / "shift_reference.json").stat().st_mtime_ns
    assert main(args + ["--resume"]) == 0
    assert (out / "shift_reference.json").stat().st_mtime_ns == stored   # settings agree: reused


@pytest.mark.parametrize("value", ["1", "-2", "1001"])
def test_bad_count_is_one_line_exit_2(tmp_path, capsys, value):
    args = ["run", DATA, "--prior", "demo_mount_kerrow_fast", "--out", str(tmp_path / "r"),
            "--shift-reference", value]
    assert main(args) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len([e for e in err if "shift-reference" in e]) == 1
    assert not (tmp_path / "r").exists()


def test_without_reference_hazard_says_not_run(tmp_path):
    rows = tmp_path / "one.csv"
    rows.write_text("".join(open(DATA).readlines()[:2]))
    out = tmp_path / "run"
    assert main(["run", str(rows), "--prior", "demo_mount_kerrow_fast", "--out", str(out),
                 "--window", "1", "--no-figures", "--infer-option", "n_particles=80"]) == 0
    ref = json.loads((out / "hazard.json").read_text())["p_magmatic_shift_reference"]
    assert ref["note"].startswith("not run")
