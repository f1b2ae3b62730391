"""Prior comparison: the overlap coefficient against its closed form, and a small
`ventsource compare` run (table columns, spread, figure with the caution)."""
import os

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from ventsource.cli.main import main
from ventsource.workflow.compare import overlap_coefficient

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PRIOR = os.path.join(ROOT, "priors", "demo_mount_kerrow_fast.toml")


@pytest.mark.parametrize("delta", [0.0, 0.5, 1.0, 2.0, 4.0])
def test_overlap_of_two_unit_normals(delta):
    # OVL of N(0,1) and N(delta,1) is 2 Phi(-|delta|/2) (Inman and Bradley 1989,
    # Commun. Statist. Theory Meth. 18, 3851-3874, eq. for equal variances)
    rng = np.random.default_rng(1)
    a = rng.normal(0.0, 1.0, 200_000)
    b = rng.normal(delta, 1.0, 200_000)
    assert abs(overlap_coefficient(a, b, bins=80) - 2 * norm.cdf(-delta / 2)) < 0.02


def test_overlap_disjoint_and_identical():
    x = np.linspace(0, 1, 1000)
    assert overlap_coefficient(x, x + 5.0) == 0.0
    assert overlap_coefficient(x, x) == pytest.approx(1.0)


def test_compare_two_priors(tmp_path, capsys):
    data = tmp_path / "m.csv"
    data.write_text("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
                    "A,2025-01-10T00:00:00Z,0.70148,0.28677,36.329\n"
                    "B,2027-01-08T00:00:00Z,0.051542,6.3697,45.659\n")
    text = open(PRIOR).read()
    other = tmp_path / "sceptical.toml"   # same file, another name and prior odds 0.2
    other.write_text(text.replace('name = "demo_mount_kerrow_fast"', 'name = "sceptical"')
                     .replace("p_magmatic = 0.5", "p_magmatic = 0.2"))
    out = tmp_path / "cmp"
    code = main(["compare", str(data), "--prior", PRIOR, "--prior", str(other), "--out", str(out),
                 "--target-ess", "20", "--max-steps", "200", "--infer-option", "n_proposal=2000",
                 "--infer-option", "n_prior_draws=100", "--infer-option", "n_walkers=16",
                 "--engine", "emcee", "--seed", "2"])  # emcee: evidences independent of pi0
    assert code == 0
    t = pd.read_csv(out / "compare.csv", dtype={"id": str})
    assert t["id"].tolist() == ["A", "B"]
    pa, pb = t["p_magmatic [demo_mount_kerrow_fast]"], t["p_magmatic [sceptical]"]
    # same data, same seeds, same likelihood: only pi0 differs, so the posterior odds scale
    # by the prior odds (Bayes' theorem): odds_b = odds_a * (0.2/0.8) / (0.5/0.5)
    odds = pa / (1 - pa) * 0.25
    assert np.allclose(pb, odds / (1 + odds), rtol=1e-9)
    assert np.allclose(t["p_magmatic_spread"], np.abs(pa - pb))
    ov = [c for c in t.columns if c.startswith("overlap ")]
    assert len(ov) == 5 and np.allclose(t[ov].to_numpy(), 1.0)  # identical posteriors
    assert (out / "compare.png").stat().st_size > 10_000
    # every hypothesis, each prior's own P(M0) (pi0) and the flags beside the posteriors
    assert np.allclose(t["p_scrubbed [sceptical]"], 1.0 - pb, rtol=1e-12)
    assert np.allclose(t["p_scrubbed_spread"], np.abs(pa - pb))  # two models: P(M1) moves as P(M0)
    assert (t["prior_p_magmatic [demo_mount_kerrow_fast]"] == 0.5).all()
    assert (t["prior_p_magmatic [sceptical]"] == 0.2).all()
    assert "flags [sceptical]" in t.columns
    moved = np.maximum(np.abs(pa - 0.5), np.abs(pb - 0.2))  # distance from each prior's P(M0)
    assert np.allclose(t["p_magmatic_moved_by_data"], moved, rtol=1e-12)
    # the runs' hazard.json and report.html carry the spread (prior_sensitivity)
    import json
    hz = json.loads((out / "runs" / "sceptical" / "hazard.json").read_text(encoding="utf-8"))
    assert hz["prior_sensitivity"]["priors"] == ["demo_mount_kerrow_fast", "sceptical"]
    assert hz["prior_sensitivity"]["spread"]["P(M0)"] == round(float(np.abs(pa - pb).max()), 2)
    page = (out / "runs" / "sceptical" / "report.html").read_text(encoding="utf-8")
    assert "Priors compared: demo_mount_kerrow_fast, sceptical" in page
