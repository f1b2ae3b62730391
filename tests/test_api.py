"""The public Python interface: every name in ventsource.__all__ has a docstring with an
example, and the examples run (doctest, the standard library's; fast demo prior, small
settings). The checks inside the examples are the interface's own promises (types,
shapes, probabilities within [0, 1], files written); the numbers themselves are checked
against references in the other tests."""
import doctest
import importlib
import pathlib

import numpy as np
import pytest

import ventsource

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_all_lists_the_interface():
    assert set(ventsource.__all__) >= {"Measurement", "load_prior", "read_measurements", "infer",
                                       "infer_window", "run", "compare", "ForwardModel"}
    for name in ventsource.__all__:
        doc = getattr(ventsource, name).__doc__ or ""
        assert ">>> " in doc, f"ventsource.{name} has no example in its docstring"


@pytest.mark.parametrize("name", ["__init__"] + sorted(set(ventsource._HOMES.values())))
def test_examples_run(name, monkeypatch):
    monkeypatch.chdir(ROOT)  # the examples read examples/*.csv
    module = ventsource if name == "__init__" else importlib.import_module(f"ventsource.api.{name}")
    flags = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE | doctest.IGNORE_EXCEPTION_DETAIL
    result = doctest.testmod(module, optionflags=flags, verbose=False, raise_on_error=False)
    assert result.attempted > 0 and result.failed == 0, f"{module.__name__}: {result}"


def test_measurement_example_runs(monkeypatch):
    from ventsource.inference import likelihood
    finder = doctest.DocTestFinder()
    tests = [t for t in finder.find(likelihood.Measurement, "Measurement", globs={}) if t.examples]
    assert tests
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    for t in tests:
        runner.run(t)
    assert runner.summarize(verbose=False).failed == 0


def test_load_prior_names_the_shipped_priors():
    from ventsource.inference.priors import PriorFileError
    with pytest.raises(PriorFileError, match=r"^priors/arc_basalt_x\.toml: no such file, .*arc_basalt"):
        ventsource.load_prior("priors/arc_basalt_x.toml")
    assert ventsource.load_prior("arc_basalt").name == "arc_basalt"


def test_averaged_summary_is_the_mixture():
    """The default summary is the mixture P(M0) x M0 + (1 - P(M0)) x M1: its scrubbed
    fraction's 5 % quantile is 0 when P(M0) > 0.05, and its mean is (1 - P(M0)) times
    M1's mean (a mixture's mean; common practice, no source)."""
    m = ventsource.Measurement.from_strings({"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": "<60"},
                                            relative_sigma=0.15)
    r = ventsource.infer(m, "demo_mount_kerrow_fast", seed=3, n_particles=200, n_runs=2)
    avg, m1 = r.summary(), r.summary("M1")
    post1 = r.posterior("M1").posterior["scrubbed_so2"].values.reshape(-1)
    np.testing.assert_allclose(avg.loc["scrubbed_so2", "mean"], (1 - r.p_magmatic) * post1.mean(), rtol=1e-9)
    if r.p_magmatic > 0.06:
        assert avg.loc["scrubbed_so2", "5%"] == 0.0
    assert "r_hat" in m1.columns and "r_hat" not in avg.columns
    assert r.posterior("magmatic") is r.idata_m0 and r.posterior("scrubbed") is r.idata


def test_import_stays_light():
    """`import ventsource` loads no NumPy: the command line sets its thread limits
    before NumPy loads (common practice, no source: OpenBLAS reads them at load)."""
    import subprocess
    import sys
    code = "import sys, ventsource; print(sorted(ventsource.__all__) == sorted(set(ventsource.__all__)), 'numpy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["True", "False"]


def test_weighted_quantiles_match_numpy_with_equal_weights():
    """Equal weights give the Hazen quantiles, numpy's method="hazen" (Hyndman & Fan 1996,
    The American Statistician 50:361, definition 5)."""
    from ventsource.inference.row.averaged import weighted_quantiles
    x = np.random.default_rng(5).lognormal(size=999)
    qs = (0.01, 0.05, 0.5, 0.95, 0.999)
    np.testing.assert_allclose(weighted_quantiles(x, np.ones_like(x), qs), np.quantile(x, qs, method="hazen"),
                               rtol=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("script, expected", [("invert_one_measurement.py", "P(purely magmatic) = "),
                                              ("worked_example.py", "figure: ")])
def test_example_scripts_run(script, expected, tmp_path):
    """The examples use the interface as docs/python.md shows it; they must keep running."""
    import subprocess
    import sys
    proc = subprocess.run([sys.executable, str(ROOT / "examples" / script), str(tmp_path / "out")],
                          capture_output=True, text=True, cwd=tmp_path, timeout=900)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert expected in proc.stdout and "Caution:" in proc.stdout
