"""A run never mixes or loses results: settings recorded and checked on --resume, finished
rows verified before they are kept, one run per folder, write failures reported in one
line with the folder left resumable, the prior stored once per run."""
import csv
import errno
import fcntl
import json
import os
import shutil

import pandas as pd
import pytest

from ventsource.cli.main import main
from ventsource.common.errors import InputError
from ventsource.workflow import series as series_mod
from ventsource.workflow.measurements import read_measurements
from ventsource.workflow.series import row_key, run_series, worker_count

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PRIOR = os.path.join(ROOT, "priors", "demo_mount_kerrow_fast.toml")
TINY = dict(n_walkers=16, target_ess=20, max_steps=200, n_proposal=2000, n_prior_draws=100)
TINY_CLI = ["--target-ess", "20", "--max-steps", "200", "--infer-option", "n_proposal=2000",
            "--infer-option", "n_prior_draws=100", "--infer-option", "n_walkers=16", "--seed", "5",
            "--no-figures"]
QUOTED_ID = 'K "1", a'   # a double quote and a comma: summary.csv must quote it
DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
        '"K ""1"", a",2025-01-10T00:00:00Z,0.70148,0.28677,36.329\n'
        "K2,2025-11-18T01:00:00+01:00,0.10239,1.5958,6.4303\n")
NOTES_BYTES = 1_000_000


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    d = tmp_path_factory.mktemp("inputs")
    (d / "m.csv").write_text(DATA)
    text = open(PRIOR).read()
    # a long free-text note: must be stored once per run, not in every row file
    text = text.replace('notes = "Not a real volcano.', 'notes = "' + "n" * NOTES_BYTES + ' Not a real volcano.', 1)
    (d / "prior.toml").write_text(text)
    (d / "one.csv").write_text("\n".join(DATA.splitlines()[::2]) + "\n")   # header and K2: one row
    return str(d / "m.csv"), str(d / "prior.toml")


def one_row(inputs):
    return os.path.join(os.path.dirname(inputs[0]), "one.csv")


@pytest.fixture(scope="module")
def finished(inputs, tmp_path_factory):
    data, prior = inputs
    out = str(tmp_path_factory.mktemp("run") / "out")
    assert main(["run", data, "--prior", prior, "--out", out, *TINY_CLI]) == 0
    return out


def snapshot(folder):
    return {os.path.relpath(os.path.join(d, f), folder): os.stat(os.path.join(d, f)).st_mtime_ns
            for d, _, files in os.walk(folder) for f in files}


def one_line_exit_2(code, err):
    assert code == 2, err
    assert err.startswith("error: ") and err.count("\n") == 1 and "Traceback" not in err, err


def test_settings_that_change_numbers_are_recorded(finished):
    run = json.load(open(os.path.join(finished, "run.json")))
    hazard = json.load(open(os.path.join(finished, "hazard.json")))
    assert run["status"] == "complete" and run["seed"] == 5 and run["sigma"] == 0.15
    assert run["options"] == {"target_ess": 20.0, "max_steps": 200, "n_proposal": 2000,
                              "n_prior_draws": 100, "n_walkers": 16}
    assert hazard["default_relative_sigma"] == 0.15 and hazard["inference_options"] == run["options"]
    assert hazard["inference_options_in_effect"]["max_steps"] == 200


def test_summary_csv_keeps_quotes_and_commas_in_ids(finished):
    # the reference reader is Python's csv module (RFC 4180 quoting)
    with open(os.path.join(finished, "summary.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["id"] for r in rows] == [QUOTED_ID, "K2"]
    assert rows[1]["time"] == "2025-11-18T00:00:00Z"    # +01:00 converted to UTC
    running = pd.read_csv(os.path.join(finished, "summary.running.csv"), dtype=str)
    assert sorted(running["id"]) == sorted([QUOTED_ID, "K2"])


def test_prior_is_stored_once_and_rows_refer_to_it(finished, inputs):
    import arviz as az
    stored = [f for f in os.listdir(finished) if f.startswith("prior-") and f.endswith(".toml")]
    assert len(stored) == 1
    assert open(os.path.join(finished, stored[0]), "rb").read() == open(inputs[1], "rb").read()
    nc = os.path.join(finished, "rows", f"{row_key('K2')}.nc")
    assert os.path.getsize(nc) < NOTES_BYTES / 2
    ref = json.loads(az.from_netcdf(nc).posterior.attrs["prior"])
    assert ref["file"] == stored[0] and stored[0] == f"prior-{ref['sha256'][:12]}.toml"


@pytest.mark.parametrize("extra,needle", [
    (["--sigma", "0.3"], "--sigma"),
    (["--seed", "6"], "--seed"),
    (["--infer-option", "n_proposal=3000"], "inference option n_proposal"),
])
def test_resume_with_other_settings_is_refused(finished, inputs, extra, needle, capsys):
    before = snapshot(finished)
    args = ["run", inputs[0], "--prior", inputs[1], "--out", finished, *TINY_CLI, "--resume", *extra]
    if "--seed" in extra:
        args.remove("5")
        args.remove("--seed")
    code = main(args)
    err = capsys.readouterr().err
    one_line_exit_2(code, err)
    assert needle in err and "different" in err
    assert snapshot(finished) == before


def test_resume_of_a_finished_run_writes_nothing(finished, inputs, capsys):
    before = snapshot(finished)
    assert main(["run", inputs[0], "--prior", inputs[1], "--out", finished, *TINY_CLI, "--resume"]) == 0
    assert snapshot(finished) == {k: v for k, v in before.items()}


def test_truncated_row_file_is_inverted_again(finished, inputs, tmp_path, capsys):
    out = str(tmp_path / "copy")
    shutil.copytree(finished, out)
    os.remove(os.path.join(out, "summary.csv"))
    nc = os.path.join(out, "rows", f"{row_key('K2')}.nc")
    with open(nc, "r+b") as fh:
        fh.truncate(os.path.getsize(nc) // 2)
    kept = os.path.join(out, "rows", f"{row_key(QUOTED_ID)}.nc")
    kept_mtime = os.stat(kept).st_mtime_ns
    assert main(["run", inputs[0], "--prior", inputs[1], "--out", out, *TINY_CLI, "--resume"]) == 0
    err = capsys.readouterr().err
    assert "1 finished row(s) failed verification" in err and "K2" in err
    assert os.stat(kept).st_mtime_ns == kept_mtime            # the good row was kept
    a = pd.read_csv(os.path.join(finished, "summary.csv"), dtype=str, keep_default_na=False)
    b = pd.read_csv(os.path.join(out, "summary.csv"), dtype=str, keep_default_na=False)
    assert a["id"].tolist() == b["id"].tolist()
    assert (a["p_magmatic"].astype(float) - b["p_magmatic"].astype(float)).abs().max() < 1e-9
    assert json.load(open(os.path.join(out, "run.json")))["status"] == "complete"


def _no_space(*args, **kwargs):
    raise OSError(errno.ENOSPC, "No space left on device")


def test_disk_full_during_a_run_is_one_line_and_resumable(inputs, tmp_path, monkeypatch):
    data, prior = one_row(inputs), inputs[1]
    out = str(tmp_path / "out")

    def half_written(self, path, *a, **k):   # the netCDF writer fills the disk part-way
        with open(path, "wb") as fh:
            fh.write(b"CDF\x01" + b"\0" * 100)
        _no_space()
    from ventsource.workflow import row_jobs
    monkeypatch.setattr(row_jobs, "write_netcdf", half_written)
    with pytest.raises(InputError) as err:
        run_series(read_measurements(data), prior, out, seed=5, options=TINY, progress_stream=open(os.devnull, "w"))
    msg = str(err.value)
    assert "No space left on device" in msg and "--resume" in msg and "\n" not in msg
    assert not [f for f in snapshot(out) if f.endswith(".part")]
    assert json.load(open(os.path.join(out, "run.json")))["status"] == "stopped"
    monkeypatch.undo()
    rows = run_series(read_measurements(data), prior, out, seed=5, options=TINY, resume=True,
                      progress_stream=open(os.devnull, "w"))
    assert [r["id"] for r in rows] == ["K2"]
    assert json.load(open(os.path.join(out, "run.json")))["status"] == "complete"


def test_resume_of_finished_run_on_full_disk_keeps_status(finished, inputs, tmp_path, monkeypatch):
    out = str(tmp_path / "copy")
    shutil.copytree(finished, out)
    os.remove(os.path.join(out, "summary.csv"))   # something to write again
    real_open = open

    def full_disk_open(path, mode="r", *a, **k):
        if any(c in mode for c in "wa") and str(path).startswith(out) and not str(path).endswith(".lock"):
            _no_space()
        return real_open(path, mode, *a, **k)
    monkeypatch.setattr("builtins.open", full_disk_open)
    with pytest.raises(InputError, match="No space left on device"):
        run_series(read_measurements(inputs[0]), inputs[1], out, seed=5, options=TINY, resume=True,
                   progress_stream=real_open(os.devnull, "w"))
    monkeypatch.undo()
    assert json.load(open(os.path.join(out, "run.json")))["status"] == "complete"
    assert not [f for f in snapshot(out) if f.endswith(".part")]


def test_second_run_into_a_locked_folder_is_refused(inputs, finished, tmp_path, capsys):
    out = str(tmp_path / "copy")
    shutil.copytree(finished, out)
    with open(os.path.join(out, ".lock"), "a") as held:   # another run holds the folder
        fcntl.flock(held.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        before = snapshot(out)
        for resume in (["--resume"], []):   # with or without --resume: the live run is named
            code = main(["run", inputs[0], "--prior", inputs[1], "--out", out, *TINY_CLI, *resume])
            err = capsys.readouterr().err
            one_line_exit_2(code, err)
            assert "another run is using this folder" in err
            assert snapshot(out) == before


def test_worker_count_is_capped_at_rows_and_cores():
    cores = os.cpu_count()
    assert worker_count(40, 2) == min(2, cores)
    assert worker_count(40, 2, oversubscribe=True) == 2
    assert worker_count(40, 1000) == cores
    assert worker_count(3, 0) == 1


@pytest.mark.parametrize("make", ["file", "file_parent", "read_only"])
def test_unusable_output_folder_is_one_line(inputs, tmp_path, capsys, monkeypatch, make):
    target = tmp_path / "out"
    if make == "file":
        target.write_text("keep me")
    elif make == "file_parent":
        (tmp_path / "f").write_text("keep me")
        target = tmp_path / "f" / "out"
    else:
        target.mkdir()
        target.chmod(0o555)
        if os.geteuid() == 0:   # root writes anyway: a read-only mount is what stops root
            monkeypatch.setattr(series_mod.os, "access", lambda p, m: os.path.abspath(p) != str(target))
    before = snapshot(tmp_path)
    code = main(["run", inputs[0], "--prior", inputs[1], "--out", str(target), *TINY_CLI])
    one_line_exit_2(code, capsys.readouterr().err)
    assert snapshot(tmp_path) == before
    if make == "read_only":
        target.chmod(0o755)


def test_failed_start_can_be_run_again(inputs, tmp_path, capsys):
    data, prior = one_row(inputs), inputs[1]
    out = str(tmp_path / "out")
    # 4 walkers for 5 free parameters: the sampler refuses the first row
    code = main(["run", data, "--prior", prior, "--out", out, *TINY_CLI, "--engine", "emcee", "--infer-option", "n_walkers=4"])
    assert code == 2
    run = json.load(open(os.path.join(out, "run.json")))
    assert run["status"] == "stopped" and "n_walkers" in run["error"]
    # no row finished: the same folder takes a corrected run without --resume
    assert main(["run", data, "--prior", prior, "--out", out, *TINY_CLI]) == 0
    assert json.load(open(os.path.join(out, "run.json")))["status"] == "complete"


def test_api_refuses_bad_seed_and_options_before_writing(inputs, tmp_path):
    data, prior = inputs
    out = tmp_path / "out"
    for kwargs, needle in [({"seed": "abc"}, "seed"), ({"options": {"pi0": 1.5}}, "pi0"),
                           ({"options": {"epsilon": 2}}, "epsilon"), ({"workers": 0}, "workers")]:
        with pytest.raises(InputError, match=needle):
            run_series(read_measurements(data), prior, str(out), **kwargs)
    assert not out.exists()
