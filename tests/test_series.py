"""Series runs: seeds per row id, identical numbers with 1 and 2 workers and on Dask,
outputs of a finished run (summary.csv, hazard.json, figures with the caution)."""
import hashlib
import io
import json
import os

import numpy as np
import pandas as pd
import pytest

from ventsource.common.caution import CAUTION
from ventsource.workflow.hazard_format import round_probability
from ventsource.workflow.measurements import read_measurements
from ventsource.workflow.series import Progress, row_key, row_seed, run_series

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PRIOR = os.path.join(ROOT, "priors", "demo_mount_kerrow_fast.toml")
# tiny configuration: the point is bookkeeping and determinism, not posterior quality
TINY = dict(n_walkers=16, target_ess=20, max_steps=200, n_proposal=2000, n_prior_draws=100)
DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
        "KRW-001,2025-01-10T00:00:00Z,0.70148,0.28677,36.329\n"
        "KRW-004,2025-11-18T00:00:00Z,0.10239,1.5958,6.4303\n"
        "KRW-008,2027-01-08T00:00:00Z,0.051542,<8,45.659\n")


@pytest.fixture(scope="module")
def data_file(tmp_path_factory):
    p = tmp_path_factory.mktemp("data") / "m.csv"
    p.write_text(DATA)
    return str(p)


@pytest.fixture(scope="module")
def one_worker(data_file, tmp_path_factory):
    out = str(tmp_path_factory.mktemp("w1"))
    run_series(read_measurements(data_file), PRIOR, out, seed=5, workers=1, options=TINY,
               progress_stream=io.StringIO())
    return out


def numbers(out):
    s = pd.read_csv(os.path.join(out, "summary.csv"), dtype={"id": str, "flags": str}, keep_default_na=False)
    return s


def assert_same(a, b):
    # exact where no float arithmetic differs; floats to 1e-9 relative because freshly
    # compiled and disk-cached numba kernels (fastmath reassociation) may differ in the
    # last bits between processes (see tests/test_resume.py)
    assert list(a.columns) == list(b.columns)
    for c in a.columns:
        if a[c].dtype.kind == "f":
            assert np.allclose(a[c], b[c], rtol=1e-9, atol=0, equal_nan=True), c
        else:
            assert a[c].tolist() == b[c].tolist(), c


def test_row_seed_depends_on_run_seed_and_id_only():
    # sha256 is the reference (hashlib, FIPS 180-4); the rule is documented in hazard.json
    d = hashlib.sha256(b"7:A-1").digest()
    assert row_seed(7, "A-1") == int.from_bytes(d[:8], "little") % (2**63 - 1)
    assert row_seed(7, "A-1") != row_seed(8, "A-1") != row_seed(8, "A-2")


def test_row_keys_unique_and_safe():
    keys = {row_key(x) for x in ("a/b", "a_b", "a b", "A-1")}
    assert len(keys) == 4 and row_key("A-1") == "A-1"
    assert all("/" not in k and " " not in k for k in keys)


def test_finished_run_outputs(one_worker, data_file):
    s = numbers(one_worker)
    assert s["id"].tolist() == ["KRW-001", "KRW-004", "KRW-008"]
    for col in ("p_magmatic", "p_magmatic_error", "p_scrubbed_below_epsilon", "flags",
                "pressure_bar_if_scrubbed_median", "pressure_bar_if_scrubbed_q05", "pressure_bar_if_scrubbed_q95",
                "pressure_bar_avg_median", "dfmq_avg_median", "pressure_bar_rhat",
                "pressure_bar_ess_bulk", "pp SO2/CO2_q05", "pp SO2/CO2_q95"):
        assert col in s.columns, col
    p = s["p_magmatic"].astype(float)
    assert ((p > 0) & (p < 1)).all()
    for tag in ("pressure_bar_if_scrubbed", "pressure_bar_avg", "dfmq_avg"):
        assert (s[f"{tag}_q05"].astype(float) <= s[f"{tag}_median"].astype(float)).all()
        assert (s[f"{tag}_median"].astype(float) <= s[f"{tag}_q95"].astype(float)).all()
    assert (s["window"] == "").all() and (s["source_check"] == "").all()   # row by row: empty
    assert s["seed"].tolist() == [row_seed(5, i) for i in s["id"]]
    h = json.load(open(os.path.join(one_worker, "hazard.json")))
    assert h["caution"] == CAUTION
    assert h["input_sha256"] == hashlib.sha256(open(data_file, "rb").read()).hexdigest()
    assert h["priors"][0]["sha256"] == hashlib.sha256(open(PRIOR, "rb").read()).hexdigest()
    assert h["priors"][0]["models"]["degassing"] == "closed"
    # hazard.json rounds to what the Monte Carlo error supports (workflow/hazard_format.py)
    err = s["p_magmatic_error"].astype(float)
    assert [r["p_magmatic"] for r in h["rows"]] == [round_probability(a, b)[0] for a, b in zip(p, err)]
    assert json.load(open(os.path.join(one_worker, "run.json")))["status"] == "complete"


def test_two_workers_give_identical_numbers(one_worker, data_file, tmp_path):
    out = str(tmp_path / "w2")
    run_series(read_measurements(data_file), PRIOR, out, seed=5, workers=2, options=TINY,
               progress_stream=io.StringIO())
    assert_same(numbers(one_worker), numbers(out))


def test_dask_local_cluster_gives_identical_numbers(one_worker, data_file, tmp_path):
    pytest.importorskip("distributed")
    out = str(tmp_path / "dask")
    run_series(read_measurements(data_file), PRIOR, out, seed=5, workers=2, options=TINY,
               dask_local=True, progress_stream=io.StringIO())
    assert_same(numbers(one_worker), numbers(out))


def test_figures_carry_the_caution(one_worker, data_file, monkeypatch):
    import matplotlib.figure
    from ventsource.workflow.figures import run_figures
    from ventsource.inference.priors import load_prior_file
    texts = []
    orig = matplotlib.figure.Figure.savefig

    def spy(self, *a, **k):
        texts.append(" ".join(t.get_text() for t in self.texts))
        return orig(self, *a, **k)
    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", spy)
    paths = run_figures(one_worker, read_measurements(data_file), load_prior_file(PRIOR),
                        corner_ids=["KRW-004"], n_prior=200)
    assert [os.path.basename(p) for p in paths] == ["series.png", "ratio_plane.png", "corner_KRW-004.png"]
    assert len(texts) == 3 and all(CAUTION in t for t in texts)
    assert all(os.path.getsize(p) > 10_000 for p in paths)


def test_existing_run_needs_resume(one_worker, data_file):
    from ventsource.common.errors import InputError
    with pytest.raises(InputError, match="--resume"):
        run_series(read_measurements(data_file), PRIOR, one_worker, seed=5, options=TINY)
    with pytest.raises(InputError, match="different"):
        run_series(read_measurements(data_file), PRIOR, one_worker, seed=6, resume=True, options=TINY)


def test_progress_bar_estimates_time_left():
    buf = io.StringIO()
    bar = Progress(4, 1, stream=buf)
    bar.t0 -= 10.0             # pretend 10 s passed for one new row
    bar.update("x")
    line = buf.getvalue().strip().splitlines()[-1]
    assert "2/4 rows" in line and "~0:20 left" in line   # 10 s per row, 2 rows left


@pytest.mark.slow   # a second cluster start-up (~15 s); the --dask-local path runs by default
def test_dask_scheduler_address(one_worker, data_file, tmp_path):
    distributed = pytest.importorskip("distributed")
    out = str(tmp_path / "sched")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        run_series(read_measurements(data_file), PRIOR, out, seed=5, options=TINY,
                   dask_scheduler=cluster.scheduler_address, progress_stream=io.StringIO())
    assert_same(numbers(one_worker), numbers(out))


def test_dask_scheduler_unreachable_is_one_line(data_file, tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    from ventsource.workflow import row_jobs
    from ventsource.common.errors import InputError
    monkeypatch.setattr(row_jobs, "DASK_CONNECT_TIMEOUT_S", 1)
    with pytest.raises(InputError, match="cannot connect"):
        run_series(read_measurements(data_file), PRIOR, str(tmp_path / "x"), options=TINY,
                   dask_scheduler="tcp://127.0.0.1:1", progress_stream=io.StringIO())
