"""The synthetic demo series at the fictional Mount Kerrow (workflow.demo).

Check values: the trapezoid rule against numpy.trapezoid (a general-purpose reference
library); the story's row counts, windows and sources are the demo's own design
(common practice, no source). Only the series maker runs here (forward model, no
inversion), so these tests are fast.
"""
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsource.inference.priors import load_prior_file
from ventsource.workflow.demo import DEMO_RELEASE_PRIOR, make_demo_data, truth_table
from ventsource.workflow.measurements import read_measurements

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo_files(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    path = make_demo_data(out)
    return pd.read_csv(path, dtype=str), pd.read_csv(out / "truth.csv"), path


def test_release_prior_is_the_fast_prior_plus_hypotheses_and_pooled_pressures():
    with open(ROOT / "priors" / "demo_mount_kerrow_fast.toml", "rb") as fh:
        fast = tomllib.load(fh)
    with open(DEMO_RELEASE_PRIOR, "rb") as fh:
        release = tomllib.load(fh)
    assert set(release) - set(fast) == {"hypotheses", "window"}
    assert release["window"] == {"pressure_rows": "pooled"}
    for table in set(fast) - {"metadata"}:
        assert release[table] == fast[table], table
    spec = load_prior_file(DEMO_RELEASE_PRIOR)
    assert spec.release is not None and spec.name == "demo_mount_kerrow_fast_release"


def test_windows_hold_the_story(demo_files):
    _, truth, _ = demo_files
    sizes = truth.groupby("window").size()
    assert len(sizes) == 4 and sizes.max() <= 25
    for episode in ("scrubbing", "release"):  # each shares its window with quiet rows of its source
        for label in truth.loc[truth["episode"] == episode, "window"].unique():
            same = truth[truth["window"] == label]
            source = truth.loc[truth["episode"] == episode, "source"].iloc[0]
            assert ((same["episode"] == "quiet") & (same["source"] == source)).sum() >= 6
    last = truth[truth["window"] == truth["window"].iloc[-1]]
    assert set(last["source"]) == {"steady", "fresh"}  # the change of source lies inside it
    fresh = truth[truth["source"] == "fresh"].iloc[0]
    steady = truth[truth["source"] == "steady"].iloc[0]
    assert fresh["co2_ppm"] == 2 * steady["co2_ppm"] and fresh["s_ppm"] == steady["s_ppm"] / 2


def test_fluxes_fall_below_detection_and_release_exceeds_the_magmatic_range(demo_files):
    data, truth, path = demo_files
    scrub = truth["episode"] == "scrubbing"
    below = data["SO2 flux"].str.startswith("<")
    assert below[scrub].sum() >= 2 and not below[~scrub].any()
    assert data["CO2 flux"].notna().all()
    quiet_max = truth.loc[truth["episode"] == "quiet", "true SO2/CO2"].max()
    assert truth.loc[truth["episode"] == "release", "true SO2/CO2"].min() > 1.5 * quiet_max
    series = read_measurements(path)
    assert series.windows == truth["window"].tolist()


def test_truth_budget_is_the_trapezoid_of_the_rate(demo_files):
    _, truth, _ = demo_files
    days = (pd.to_datetime(truth["time"]) - pd.to_datetime(truth["time"][0])).dt.total_seconds() / 86400
    end = int(np.flatnonzero(truth["episode"] == "scrubbing")[-1])
    ref = np.trapezoid(truth["retained_s_tpd"][:end + 1], days[:end + 1])  # numpy's trapezoid rule
    assert truth["cumulative_retained_s_t"][end] == pytest.approx(ref, rel=1e-12)
    assert np.all(truth.loc[truth["episode"] == "quiet", "retained_s_tpd"] == 0.0)
    assert np.all(truth.loc[truth["episode"] == "release", "retained_s_tpd"] < 0.0)


def test_few_rows_still_make_a_series():
    t = truth_table(3)
    assert t["id"].tolist() == ["KRW-001", "KRW-002", "KRW-003"] and t["window"].notna().all()


def test_run_both_runs_side_by_side_and_raises_after_both_end():
    """The demo's two runs go side by side (threading.Barrier: each call waits for the
    other, so a one-after-the-other schedule would time out), results come back in call
    order, and an error is raised only once every run has ended."""
    import threading

    from ventsource.common.errors import InputError
    from ventsource.workflow.demo import run_both

    barrier = threading.Barrier(2, timeout=20)
    ended = []

    def run(name, fail=False):
        barrier.wait()  # raises BrokenBarrierError if the other call is not running too
        if fail:
            raise InputError(f"{name} failed")
        ended.append(name)
        return name

    assert run_both(run, [dict(name="windows"), dict(name="rows")]) == ["windows", "rows"]
    barrier.reset()
    ended.clear()
    with pytest.raises(InputError, match="windows failed"):
        run_both(run, [dict(name="windows", fail=True), dict(name="rows")])
    assert ended == ["rows"]  # the other run was not abandoned half-written
