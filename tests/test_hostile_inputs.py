"""Hostile inputs: each is refused with one line naming file, row and column, exit status 2,
and leaves every input file and the output folder as they were (common practice, no source).

The corpus is tests/data/hostile/*.case: line 1 the command (with {data} and {out}),
line 2 the text the error must contain, the rest the measurement file.
"""
import hashlib
import os
import shutil
from pathlib import Path

import pytest

from ventsource.cli.main import main
from ventsource.cli.shared import COMPILE_NOTICE

ROOT = Path(__file__).resolve().parents[1]
CORPUS = sorted((ROOT / "tests" / "data" / "hostile").glob("*.case"))
RAW = ROOT / "examples" / "mount_kerrow_raw_sensors_synthetic.csv"
GOOD = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
        "a,2026-01-01T00:00:00Z,0.5,0.3,30\n")


def tree_state(folder):
    """{relative path: sha256} of every file under folder (None if it does not exist)."""
    if not os.path.exists(folder):
        return None
    out = {}
    for base, _, files in os.walk(folder):
        for f in files:
            p = os.path.join(base, f)
            out[os.path.relpath(p, folder)] = hashlib.sha256(Path(p).read_bytes()).hexdigest()
    return out


def refused(argv, capsys, expected, watched):
    before = {w: tree_state(w) for w in watched}
    assert main(argv) == 2
    lines = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip() and ln != COMPILE_NOTICE]
    err = "\n".join(lines)  # the first model call may say it compiles; then one line of error
    assert len(lines) == 1 and "Traceback" not in err, err
    assert expected in err, err
    assert {w: tree_state(w) for w in watched} == before
    return err


def test_the_corpus_is_there():
    assert len(CORPUS) >= 15


@pytest.mark.parametrize("case", CORPUS, ids=[c.stem for c in CORPUS])
def test_every_corpus_case_is_refused_cleanly(case, tmp_path, capsys):
    command, expected, data = case.read_text(encoding="utf-8").split("\n", 2)
    data_path, out = tmp_path / "in" / "data.csv", tmp_path / "out"
    data_path.parent.mkdir()
    data_path.write_text(data, encoding="utf-8")
    argv = [a.format(data=data_path, out=out) for a in command.split()]
    refused(argv, capsys, expected, [tmp_path / "in", out])
    assert not out.exists()


def test_ratios_never_writes_over_its_raw_file(tmp_path, capsys):
    raw = tmp_path / "raw.csv"
    shutil.copy(RAW, raw)
    refused(["ratios", str(raw), "--out", str(raw)], capsys, "is the input file", [tmp_path])


def test_a_run_never_writes_over_its_own_measurement_file(tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    data = out / "summary.csv"
    data.write_text(GOOD)
    refused(["run", str(data), "--prior", "demo_mount_kerrow_fast", "--out", str(out)], capsys,
            "over the input file", [tmp_path])


def test_a_folder_with_the_users_own_tables_is_refused(tmp_path, capsys):
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    out.mkdir()
    (out / "summary.csv").write_text("my own notes\n")
    (out / "README.txt").write_text("mine\n")
    refused(["run", str(data), "--prior", "demo_mount_kerrow_fast", "--out", str(out)], capsys,
            "not written by a ventsource run", [tmp_path])


@pytest.mark.parametrize("name", ["../../x", "/tmp/elsewhere", ".hidden", "a/b", ""])
def test_compare_keeps_every_run_inside_out(tmp_path, capsys, name):
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    shipped = (ROOT / "priors" / "demo_mount_kerrow_fast.toml").read_text()
    assert 'name = "demo_mount_kerrow_fast"' in shipped
    prior = tmp_path / "p.toml"
    prior.write_text(shipped.replace('name = "demo_mount_kerrow_fast"', f'name = "{name}"'))
    refused(["compare", str(data), "--prior", str(prior), "--prior", "demo_mount_kerrow_fast",
             "--out", str(out)], capsys, "metadata.name", [tmp_path])
    assert not out.exists()


def test_prior_predictive_reads_its_data_before_writing(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("id,time,SO2/CO2\na,not a time,0.5\n")
    table = tmp_path / "t.csv"
    refused(["prior-predictive", "--prior", "demo_mount_kerrow_fast", "-n", "5", "--table", str(table),
             "--plot", str(tmp_path / "p.png"), "--data", str(bad)], capsys, "row 2, column 'time'",
            [tmp_path])


def test_emcee_is_refused_for_windows_before_anything_is_written(tmp_path, capsys):
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    refused(["run", str(data), "--prior", "demo_mount_kerrow_fast", "--out", str(out), "--engine", "emcee",
             "--window", "30d"], capsys, "--engine emcee inverts row by row", [tmp_path])


def test_a_window_option_error_comes_before_the_data_is_read(tmp_path, capsys):
    missing = tmp_path / "no-such-file.csv"
    refused(["run", str(missing), "--prior", "demo_mount_kerrow_fast", "--out", str(tmp_path / "o"),
             "--window", "5y"], capsys, "--window '5y'", [tmp_path])


def test_dask_options_without_dask_are_refused_first(tmp_path, capsys, monkeypatch):
    import sys
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # import fails as if not installed
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    refused(["run", str(data), "--prior", "demo_mount_kerrow_fast", "--out", str(out), "--dask-local"],
            capsys, "need dask", [tmp_path])


def _edited_prior(tmp_path, old, new, name="p.toml"):
    shipped = (ROOT / "priors" / "demo_mount_kerrow_fast.toml").read_text()
    assert old in shipped
    prior = tmp_path / name
    prior.write_text(shipped.replace(old, new))
    return prior


def test_a_prior_that_never_makes_gas_is_named_before_the_folder_is_made(tmp_path, capsys):
    prior = _edited_prior(tmp_path, "min = 5.0\nmax = 2500.0", "min = 4500.0\nmax = 5000.0")
    text = prior.read_text().replace("value = 4.0", "value = 0.2")
    prior.write_text(text.replace("min = 300.0\nmax = 6000.0", "min = 300.0\nmax = 310.0"))
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    err = refused(["run", str(data), "--prior", str(prior), "--out", str(out)], capsys,
                  "releases gas", [tmp_path])
    assert str(prior) in err and "row" not in err
    assert not out.exists()


def test_an_absurd_student_t_dof_is_refused(tmp_path, capsys):
    prior = _edited_prior(tmp_path, 'kind = "normal"\n', 'kind = "student_t"\ndof = 1e308\n')
    data = tmp_path / "data.csv"
    data.write_text(GOOD)
    refused(["run", str(data), "--prior", str(prior), "--out", str(tmp_path / "out")], capsys,
            "likelihood.dof", [tmp_path])


RAW_HEAD = "# a comment line\n# another\ntime,CO2 [ppmv],SO2 [ppmv],H2S [ppmv],T [C],RH [%],P [hPa]\n"


@pytest.mark.parametrize("cells, column, expected", [
    ("418.5,0.02,0.01,-300,48,850", "T [C]", "not a plausible air temperature"),
    ("418.5,0.02,0.01,12,500,850", "RH [%]", "not a relative humidity"),
    ("418.5,0.02,0.01,12,48,0", "P [hPa]", "not a plausible station pressure"),
    ("1e300,0.02,0.01,12,48,850", "CO2 [ppmv]", "more than a mole fraction of 100 %"),
])
def test_raw_sensor_values_outside_physics_are_refused(tmp_path, capsys, cells, column, expected):
    raw = tmp_path / "raw.csv"
    good = "418.5,0.02,0.01,12,48,850"
    raw.write_text(RAW_HEAD + f"2026-03-14T00:00:00Z,{good}\n2026-03-14T00:00:01Z,{cells}\n")
    err = refused(["ratios", str(raw), "--out", str(tmp_path / "m.csv")], capsys, expected, [tmp_path])
    assert f"row 5, column '{column}'" in err, err    # line 5 of the file: 2 comments, header, 2 rows


def test_a_unit_error_names_the_header_line_after_comments(tmp_path, capsys):
    raw = tmp_path / "raw.csv"
    raw.write_text(RAW_HEAD.replace("T [C]", "T [F]") + "2026-03-14T00:00:00Z,418.5,0.02,0.01,12,48,850\n")
    refused(["ratios", str(raw), "--out", str(tmp_path / "m.csv")], capsys,
            "row 3, column 'T [F]': unknown unit", [tmp_path])


def test_resume_takes_options_spelled_at_their_defaults(tmp_path, capsys):
    """--window 1 on a file without a window column and --engine smc are what the run used."""
    tiny = ["--target-ess", "20", "--max-steps", "200", "--infer-option", "n_proposal=2000",
            "--infer-option", "n_prior_draws=100", "--infer-option", "n_walkers=16", "--no-figures"]
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    base = ["run", str(data), "--prior", "demo_mount_kerrow_fast", "--out", str(out), *tiny]
    assert main(base) == 0
    summary = (out / "summary.csv").read_bytes()
    capsys.readouterr()
    assert main(base + ["--resume", "--window", "1", "--engine", "smc"]) == 0, capsys.readouterr().err
    assert (out / "summary.csv").read_bytes() == summary
    refused(base + ["--resume", "--engine", "emcee"], capsys, "different inference option engine", [out])


def test_a_windows_rows_are_taken_in_time_order():
    """The change-of-source check splits a window in time; a file need not be sorted."""
    import numpy as np
    from ventsource.workflow.windows import assign_windows

    class Series:
        path = "x.csv"
        times = [np.datetime64("2026-01-01") + np.timedelta64(d, "D") for d in (9, 2, 5, 40, 1)]
        windows = ["a", "a", "a", "b", "a"]
    assert assign_windows(Series, None) == [("a", [4, 1, 2, 0]), ("b", [3])]
    assert [rows for _, rows in assign_windows(Series, 30 * 86400)] == [[4, 1, 2, 0], [3]]


def test_resume_takes_a_prior_changed_only_in_its_comments(tmp_path, capsys):
    tiny = ["--target-ess", "20", "--max-steps", "200", "--infer-option", "n_proposal=2000",
            "--infer-option", "n_prior_draws=100", "--infer-option", "n_walkers=16", "--no-figures"]
    prior = tmp_path / "p.toml"
    prior.write_text((ROOT / "priors" / "demo_mount_kerrow_fast.toml").read_text())
    data, out = tmp_path / "data.csv", tmp_path / "out"
    data.write_text(GOOD)
    base = ["run", str(data), "--prior", str(prior), "--out", str(out), *tiny]
    assert main(base) == 0
    summary = (out / "summary.csv").read_bytes()
    prior.write_text("# a note added after the run\n" + prior.read_text().replace("\n\n", "\n\n\n"))
    capsys.readouterr()
    assert main(base + ["--resume"]) == 0, capsys.readouterr().err
    assert (out / "summary.csv").read_bytes() == summary
    prior.write_text(prior.read_text().replace("value = 1080.0", "value = 1081.0"))  # the temperature
    refused(base + ["--resume"], capsys, "different prior file", [out])
