"""Command-line behaviour: public option names, JSON shape, one-line errors with exit 2."""
import json
import re

import numpy as np
from pathlib import Path
import subprocess
import sys

import pytest

from ventsource.cli.main import main


def run(args, capsys):
    code = main(args)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_speciate_json_has_the_public_fields(capsys):
    code, out, _ = run(["speciate", "--temperature-c", "1100", "--pressure-bar", "100", "--dfmq",
                        "1", "--bulk", "H2O=90,CO2=8,SO2=2", "--json"], capsys)
    assert code == 0
    doc = json.loads(out)
    assert set(doc["species"]) == {"H2O", "H2", "O2", "CO2", "CO", "CH4", "SO2", "H2S", "S2", "COS"}
    assert abs(sum(doc["species"].values()) - 1.0) < 1e-12
    assert set(doc["fugacity_coefficients"]) == set(doc["species"])
    # Frost 1991 FMQ at 1373.15 K and 100 bar, plus 1
    expected = -25096.3 / 1373.15 + 8.735 + 0.110 * 99 / 1373.15 + 1
    assert abs(doc["log_fO2"] - expected) < 1e-9


@pytest.mark.parametrize("args,needle", [
    (["--temperature-c", "1500"], "outside the supported range"),
    (["--pressure-bar", "0"], "outside the supported range"),
    (["--dfmq", "7"], "outside the supported range"),
    (["--bulk", "H2O=90,Xe=2"], "unknown species"),
    (["--bulk", "H2O=-1,CO2=1,SO2=1"], "positive"),
    (["--bulk", "H2O=0,CO2=1,SO2=1"], "positive"),
    (["--bulk", "H2O90"], "NAME=AMOUNT"),
    (["--bulk", "H2O=abc,CO2=1,SO2=1"], "not a number"),
    (["--bulk", "H2O=90,CO2=8"], "no S"),
])
def test_speciate_bad_input_is_one_line_exit_2(args, needle, capsys):
    base = {"--temperature-c": "1100", "--pressure-bar": "100", "--dfmq": "1",
            "--bulk": "H2O=90,CO2=8,SO2=2"}
    for k, v in zip(args[::2], args[1::2]):
        base[k] = v
    argv = ["speciate"] + [x for kv in base.items() for x in kv]
    code, out, err = run(argv, capsys)
    assert code == 2
    assert needle in err
    assert err.strip().count("\n") == 0 and "Traceback" not in err


def test_forward_json(capsys):
    code, out, _ = run(["forward", "--prior", "priors/arc_basalt.toml", "--set", "pressure_bar=200",
                        "temperature_c=1100", "dfmq=1", "scrubbed_so2=0.3", "h2o_wt=4",
                        "co2_ppm=2000", "s_ppm=2000", "quench_temperature_c=900",
                        "h2_retained_log10=0",
                        "--json"], capsys)
    assert code == 0
    doc = json.loads(out)
    for key in ("ratios", "gas", "gas_wt_fraction", "saturation_pressure_bar", "deep_gas", "magmatic_gas"):
        assert key in doc
    assert doc["ratios"]["SO2/CO2"] > 0 and doc["saturation_pressure_bar"] > 200
    # the shipped prior's gas-buffered quench re-speciates the gas at 900 C and 1 bar: the
    # species move, the atoms do not (H, C, O, S per mole of H)
    from ventsource.chemistry.species import ELEMENT_MATRIX, SPECIES
    deep, vent = (np.array([doc[k][s] for s in SPECIES]) for k in ("deep_gas", "magmatic_gas"))
    atoms_deep, atoms_vent = deep @ ELEMENT_MATRIX, vent @ ELEMENT_MATRIX
    assert np.allclose(atoms_vent / atoms_vent[0], atoms_deep / atoms_deep[0], rtol=1e-9)
    h2s_so2 = [g[SPECIES.index("H2S")] / g[SPECIES.index("SO2")] for g in (deep, vent)]
    assert abs(np.log10(h2s_so2[1] / h2s_so2[0])) > 0.05


@pytest.mark.parametrize("extra,needle", [
    (["nonsense=1"], "unknown parameter"),
    (["pressure_bar=-5"], "unphysical"),
    (["pressure_bar=abc"], "not a number"),
])
def test_forward_bad_set(extra, needle, capsys):
    code, _, err = run(["forward", "--prior", "priors/arc_basalt.toml", "--set"] + extra, capsys)
    assert code == 2 and needle in err and err.strip().count("\n") == 0


def test_console_script_runs_without_traceback():
    proc = subprocess.run([sys.executable, "-m", "ventsource.cli.main", "speciate", "--temperature-c",
                           "abc"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and "not a number" in proc.stderr


# --- `ventsource run`: malformed inputs give one line, exit 2 and no output directory ---

import os  # noqa: E402
import pathlib  # noqa: E402

from test_measurements import BAD as BAD_MEASUREMENTS  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
GOOD_DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
             "KRW-001,2025-01-10T00:00:00Z,0.70148,0.28677,36.329\n")
BAD_PRIORS = sorted((ROOT / "tests" / "data" / "bad_priors").glob("*.toml"))


def one_line_exit_2(code, out, err):
    assert code == 2, (code, err)
    assert err.startswith("error: ") and err.strip().count("\n") == 0, err
    assert "Traceback" not in err


@pytest.mark.parametrize("case", sorted(BAD_MEASUREMENTS))
def test_run_with_malformed_measurements(case, tmp_path, capsys):
    text, needle = BAD_MEASUREMENTS[case]
    data = tmp_path / "m.csv"
    data.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    code, o, err = run(["run", str(data), "--prior", str(ROOT / "priors" / "demo_mount_kerrow_fast.toml"),
                        "--out", str(out)], capsys)
    one_line_exit_2(code, o, err)
    assert needle in err and str(data) in err
    assert not out.exists()   # nothing written, so nothing that could look complete


def test_bad_prior_corpus_has_at_least_ten_files():
    assert len(BAD_PRIORS) >= 10


@pytest.mark.parametrize("prior", BAD_PRIORS, ids=lambda p: p.stem)
def test_run_with_malformed_prior(prior, tmp_path, capsys):
    data = tmp_path / "m.csv"
    data.write_text(GOOD_DATA)
    out = tmp_path / "out"
    code, o, err = run(["run", str(data), "--prior", str(prior), "--out", str(out)], capsys)
    one_line_exit_2(code, o, err)
    assert prior.name in err
    assert not out.exists()


@pytest.mark.parametrize("extra,needle", [
    (["--workers", "0"], "--workers"),
    (["--corner", "NOPE"], "--corner"),
    (["--infer-option", "nonsense=1"], "--infer-option"),
    (["--dask-local", "--dask-scheduler", "tcp://x:1"], "not allowed with"),
    (["--sigma", "-1"], "--sigma"),
    (["--sigma", "CO/CO2=0.2"], "not a ratio column"),
    (["--infer-option", "pi0=1.5"], "pi0=1.5: outside the allowed range (0, 1)"),
    (["--infer-option", "max_steps=0"], "max_steps=0: outside the allowed range"),
    (["--infer-option", "target_ess=x"], "target_ess='x': must be a number"),
    (["--infer-option", "target_ess=-5"], "target_ess=-5.0: outside the allowed range"),
    (["--infer-option", "epsilon=2"], "epsilon=2.0: outside the allowed range (0, 1)"),
    (["--infer-option", "model_choice=yes"], "model_choice='yes': must be true or false"),
    (["--seed", "abc"], "--seed"),
    (["--out", "/dev/null/x"], "is a file, not a folder"),
])
def test_run_bad_options(extra, needle, tmp_path, capsys):
    data = tmp_path / "m.csv"
    data.write_text(GOOD_DATA)
    out = tmp_path / "out"
    code, o, err = run(["run", str(data), "--prior", str(ROOT / "priors" / "demo_mount_kerrow_fast.toml"),
                        "--out", str(out)] + extra, capsys)
    one_line_exit_2(code, o, err)
    assert needle in err
    assert not out.exists()


def test_compare_needs_two_priors(tmp_path, capsys):
    data = tmp_path / "m.csv"
    data.write_text(GOOD_DATA)
    code, o, err = run(["compare", str(data), "--prior", "priors/arc_basalt.toml", "--out",
                        str(tmp_path / "o")], capsys)
    one_line_exit_2(code, o, err)
    assert "two" in err


def test_run_stopped_by_a_row_error_leaves_nothing_that_looks_complete(tmp_path, capsys):
    data = tmp_path / "m.csv"
    data.write_text(GOOD_DATA)
    out = tmp_path / "out"
    # 4 walkers for 5 free parameters: refused by the sampler for the first row
    code, o, err = run(["run", str(data), "--prior", str(ROOT / "priors" / "demo_mount_kerrow_fast.toml"),
                        "--out", str(out), "--engine", "emcee", "--infer-option", "n_walkers=4"], capsys)
    assert code == 2
    lines = err.strip().splitlines()   # progress lines, then the error as the last line
    assert lines[-1].startswith("error: ") and sum(ln.startswith("error") for ln in lines) == 1
    assert "Traceback" not in err and "KRW-001" in lines[-1] and "n_walkers" in lines[-1]
    assert not (out / "summary.csv").exists() and not (out / "hazard.json").exists()
    record = json.loads((out / "run.json").read_text())
    assert record["status"] == "stopped" and "n_walkers" in record["error"]   # and resumable


def test_forward_reports_open_path_started_at_cap(tmp_path, capsys):
    # open style, a magma whose sulfur (large D_S * S) keeps a gas beyond the 20 kbar
    # search cap: the path starts at the cap and the output says so; an ordinary state
    # does not carry the flag (behaviour documented in the README)
    text = Path("priors/arc_basalt.toml").read_text().replace('degassing = "closed"', 'degassing = "open"')
    # the partition sulfur option (the case needs D_S; arc_basalt ships sulfur = "capacity")
    text = re.sub(r'^sulfur = .*$', 'sulfur = "partition"', text, flags=re.M)
    text += ('\n[parameters.s_partition]\ndistribution = "loguniform"\nmin = 10.0\nmax = 500.0\n'
             'source = "from memory: D_S of tens to hundreds in basalt"\n')
    prior = tmp_path / "open.toml"
    prior.write_text(text)
    base = ["forward", "--prior", str(prior), "--json", "--set", "pressure_bar=1000", "temperature_c=1199",
            "dfmq=1.8", "scrubbed_so2=0", "h2o_wt=5.3", "co2_ppm=1980", "s_partition=354",
            "quench_temperature_c=900", "h2_retained_log10=0"]
    code, out, _ = run(base + ["s_ppm=2380"], capsys)
    doc = json.loads(out)
    assert code == 0 and doc["status"] == "gas" and doc["open_path_started_at_cap"] is True
    assert doc["saturation_pressure_bar"] is None and doc["ratios"]["SO2/CO2"] > 0
    code, out, _ = run(base + ["s_ppm=10"], capsys)
    doc = json.loads(out)
    assert code == 0 and doc["open_path_started_at_cap"] is False and doc["saturation_pressure_bar"] > 1000
