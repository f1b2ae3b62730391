"""`ventsource watch FOLDER`: raw sensor files dropped into a folder, each taken once complete,
through the raw-data step of `ventsource ratios`, and their ratio rows followed by the watch.

Data: synthetic in-plume records of the package's own generator (workflow/plume/synthetic.py,
fictional Mount Kerrow, invented numbers). The rows appended must be the rows `ventsource
ratios` writes for the same file (the same code path, run here through run_ratios); the
rest checks the taking rules (docs/running.md, "Live monitoring": a file is complete when its
size and time are the same at two looks; common practice for polled drop folders, no source).
"""
import csv
import json
import shutil
import warnings
from pathlib import Path

import pytest

from ventsource.common.errors import InputError
from ventsource.workflow.plume.pipeline import run_ratios
from ventsource.workflow.plume.synthetic import write_synthetic_csv
from ventsource.cli.ratios_command import parse_ratio_options
from ventsource.workflow.watch.raw_folder import MEASUREMENT_NAME, RawOptions
from ventsource.workflow.watch.session import make_context, run_watch

ROOT = Path(__file__).resolve().parents[1]
PRIOR = ROOT / "priors" / "demo_mount_kerrow_fast.toml"
# the demo prior's ratios; 30 min windows: a one-hour record gives two rows
OPTIONS = "--window 30min --ratios SO2/CO2,H2S/SO2,H2O/CO2"


def _watch(folder, out):
    ctx = make_context(str(folder), str(PRIOR), str(out), seed=2, window="30d", figures=False,
                       n_particles=60, n_runs=2, check_every=0, raw_options=RawOptions(OPTIONS, *parse_ratio_options(OPTIONS)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return run_watch(ctx, once=True, stream=open("/dev/null", "w"))


def _drop(folder, name, hour, seed):
    write_synthetic_csv(folder / name, 3600, seed=seed, start=f"2026-03-14T{hour:02d}:00:00")


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _state(out):
    return json.loads((out / "state" / "watch.json").read_text())


def test_dropped_files_give_the_rows_of_ventsource_ratios_and_a_restart_repeats_nothing(tmp_path):
    raw, out = tmp_path / "raw", tmp_path / "one"
    raw.mkdir()
    _drop(raw, "a.csv", 0, 1)
    _watch(raw, out)                     # first look: seen, not yet taken
    assert not (out / MEASUREMENT_NAME).exists()
    _watch(raw, out)                     # unchanged since: taken
    _drop(raw, "b.csv", 1, 2)
    _watch(raw, out)
    _watch(raw, out)
    # the rows are those `ventsource ratios` writes for each file, in time order
    expected = []
    for name in ("a.csv", "b.csv"):
        settings, kw = parse_ratio_options(OPTIONS)
        run_ratios(str(raw / name), str(tmp_path / f"ref-{name}"), settings, **kw)
        expected += _rows(tmp_path / f"ref-{name}")
    got = _rows(out / MEASUREMENT_NAME)
    assert len(expected) == 4
    assert got == expected
    ids = [r["id"] for r in expected]
    assert [r["id"] for r in _rows(out / "summary.csv")] == ids
    assert [r["id"] for r in _rows(out / "answers.csv")] == ids
    files = _state(out)["raw"]["files"]
    assert [(f["name"], f["rows"]) for f in files] == [("a.csv", 2), ("b.csv", 2)]
    assert all(len(f["sha256"]) == 64 for f in files)
    # the same drops watched with extra restarts between them: nothing taken twice, same summary
    raw2, two = tmp_path / "raw2", tmp_path / "two"
    raw2.mkdir()
    shutil.copy2(raw / "a.csv", raw2 / "a.csv")
    for _ in range(3):
        _watch(raw2, two)
    shutil.copy2(raw / "b.csv", raw2 / "b.csv")
    for _ in range(3):
        _watch(raw2, two)
    assert (two / MEASUREMENT_NAME).read_text() == (out / MEASUREMENT_NAME).read_text()
    assert (two / "summary.csv").read_text() == (out / "summary.csv").read_text()
    log = (two / "watch.log").read_text()
    assert log.count("raw file a.csv:") == 1 and log.count("raw file b.csv:") == 1
    assert _state(two)["rows_taken"] == 4


def test_a_growing_file_is_not_taken_until_it_stops_growing(tmp_path):
    raw, out = tmp_path / "raw", tmp_path / "out"
    raw.mkdir()
    write_synthetic_csv(tmp_path / "full.csv", 3600, seed=3)
    text = (tmp_path / "full.csv").read_text()
    half = len(text) // 2
    (raw / "c.csv").write_text(text[:half])      # a writer half way through
    _watch(raw, out)
    (raw / "c.csv").write_text(text[:half + 20000])   # still growing at the next look
    _watch(raw, out)
    assert _state(out)["raw"]["files"] == []
    assert not (out / MEASUREMENT_NAME).exists()
    (raw / "c.csv").write_text(text)             # done
    _watch(raw, out)
    assert _state(out)["raw"]["files"] == []     # seen complete once: not yet
    _watch(raw, out)
    assert [f["rows"] for f in _state(out)["raw"]["files"]] == [2]
    assert len(_rows(out / "summary.csv")) == 2
    # a name a writer uses before renaming is never taken
    (raw / "d.csv.part").write_text(text)
    _watch(raw, out)
    _watch(raw, out)
    assert [f["name"] for f in _state(out)["raw"]["files"]] == ["c.csv"]


def test_a_corrupt_file_and_a_copy_are_skipped_with_one_log_line_each(tmp_path):
    raw, out = tmp_path / "raw", tmp_path / "out"
    raw.mkdir()
    write_synthetic_csv(tmp_path / "good.csv", 3600, seed=4)
    lines = (tmp_path / "good.csv").read_text().splitlines(keepends=True)
    row = lines[10].split(",")
    row[2] = "abc"                                # an SO2 reading that is not a number
    lines[10] = ",".join(row)
    (raw / "bad.csv").write_text("".join(lines))
    shutil.copy2(tmp_path / "good.csv", raw / "good.csv")
    shutil.copy2(tmp_path / "good.csv", raw / "good-copy.csv")
    for _ in range(3):
        _watch(raw, out)
    log = (out / "watch.log").read_text().splitlines()
    bad = [l for l in log if "skipped raw file bad.csv" in l]
    assert len(bad) == 1 and "bad.csv" in bad[0]
    assert sum("skipped raw file good.csv" in l for l in log) == 1   # name order: the copy is first
    state = _state(out)
    assert sorted(s["raw_file"] for s in state["skipped"]) == ["bad.csv", "good.csv"]
    assert "same content as good-copy.csv" in next(s["reason"] for s in state["skipped"]
                                                    if s["raw_file"] == "good.csv")
    assert len(_rows(out / "summary.csv")) == 2   # the watch went on with the readable file


def test_bad_raw_options_are_refused_before_anything_is_written(tmp_path):
    (tmp_path / "raw").mkdir()
    with pytest.raises(InputError, match="--raw-options: argument --method"):
        parse_ratio_options("--method nope")
    with pytest.raises(InputError, match="do not apply"):
        parse_ratio_options("--figures x")
    with pytest.raises(InputError, match="raw sensor files needs"):
        make_context(str(tmp_path / "raw"), str(PRIOR), str(tmp_path / "out"))
    assert not (tmp_path / "out").exists()


def test_a_stop_in_the_middle_of_an_append_is_finished_on_restart(tmp_path, monkeypatch):
    from ventsource.workflow.watch import raw_folder
    raw, out = tmp_path / "raw", tmp_path / "out"
    raw.mkdir()
    _drop(raw, "a.csv", 0, 1)
    _watch(raw, out)
    finish = raw_folder.RawFolder._finish_append

    def cut(self, state):   # half the recorded text written, then the process stops
        with open(self.measurement_path, "w") as fh:
            fh.write(state["pending"]["text"][:len(state["pending"]["text"]) // 2])
        raise KeyboardInterrupt
    monkeypatch.setattr(raw_folder.RawFolder, "_finish_append", cut)
    with pytest.raises(KeyboardInterrupt):
        _watch(raw, out)
    assert _state(out)["raw"]["pending"] is not None
    monkeypatch.setattr(raw_folder.RawFolder, "_finish_append", finish)
    _watch(raw, out)
    settings, kw = parse_ratio_options(OPTIONS)
    run_ratios(str(raw / "a.csv"), str(tmp_path / "ref.csv"), settings, **kw)
    assert _rows(out / MEASUREMENT_NAME) == _rows(tmp_path / "ref.csv")
    assert [r["id"] for r in _rows(out / "summary.csv")] == [r["id"] for r in _rows(tmp_path / "ref.csv")]


def test_the_command_refuses_bad_raw_options_with_one_line_and_status_2(tmp_path, capsys):
    """Bad input: one line naming the option, exit status 2, nothing written (common practice, no source)."""
    from ventsource.cli.main import main
    (tmp_path / "raw").mkdir()
    code = main(["watch", str(tmp_path / "raw"), "--prior", str(PRIOR), "--out", str(tmp_path / "out"),
                 "--raw-options", "--window ten"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "--window" in err[0]
    assert not (tmp_path / "out").exists()
