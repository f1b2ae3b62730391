"""Segments the data choose (`--window auto`): the prior over segmentations, the search,
the per-row change probabilities, and real runs on series made by the package's own
forward model with known changes of source (tests/segment_data.py).

Outside checks: the number of segmentations against enumeration with itertools; the
prior on the number of changes against scipy.stats (geom, poisson); the search and
p_change_before against brute-force enumeration of every segmentation, on a conjugate
normal model whose segment evidence is checked against
scipy.stats.multivariate_normal. The slow set holds the statistical checks.
"""
import io
import itertools
import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import special, stats

from ventsource.common.errors import InputError
from ventsource.inference.segments.change_prior import (log_count_prior, log_n_segmentations, log_prior,
                                                         parse_change_prior)
from ventsource.inference.segments.search import _binary_segmentation, change_probabilities

from segment_data import NAMES, source_series, write_csv

ROOT = Path(__file__).resolve().parents[1]
FAST = ROOT / "priors" / "demo_mount_kerrow_fast.toml"


def segmentations(n, m):
    """Every segmentation of n rows into segments of >= m rows, as tuples of change rows."""
    for k in range(n // m):
        for cuts in itertools.combinations(range(1, n), k):
            edges = (0,) + cuts + (n,)
            if all(b - a >= m for a, b in zip(edges, edges[1:])):
                yield cuts


@pytest.mark.parametrize("n,m", [(7, 2), (12, 3), (13, 4), (10, 1)])
def test_segmentation_count_matches_enumeration(n, m):
    counts = {}
    for cuts in segmentations(n, m):
        counts[len(cuts)] = counts.get(len(cuts), 0) + 1
    for k, c in counts.items():
        assert math.isclose(math.exp(log_n_segmentations(n, k, m)), c, rel_tol=1e-9), (k, c)
    assert log_n_segmentations(n, max(counts) + 1, m) == -math.inf


def test_change_count_priors_match_scipy():
    for k in range(6):   # scipy's geom counts trials from 1: P(k changes) = geom.pmf(k + 1, 1 - q)
        assert math.isclose(math.exp(log_count_prior(k, "geometric", 0.3)), stats.geom.pmf(k + 1, 0.7))
        assert math.isclose(math.exp(log_count_prior(k, "poisson", 1.7)), stats.poisson.pmf(k, 1.7))
    # every placement of k changes equally likely: the segmentations with k changes share P(k)
    total = sum(math.exp(log_prior(12, len(c), "geometric", 0.5, 3)) for c in segmentations(12, 3))
    assert math.isclose(total, sum(stats.geom.pmf(k + 1, 0.5) for k in range(4)))


@pytest.mark.parametrize("text,expected", [("geometric", ("geometric", 0.5)), ("poisson:2", ("poisson", 2.0)),
                                           ("Geometric:0.2", ("geometric", 0.2))])
def test_change_prior_parsing(text, expected):
    assert parse_change_prior(text) == expected


@pytest.mark.parametrize("text", ["geometric:1.5", "poisson:0", "normal", "geometric:x"])
def test_bad_change_prior_is_one_line(text):
    with pytest.raises(InputError, match="--change-prior"):
        parse_change_prior(text)


class NormalEvidence:
    """Segment evidence of a conjugate normal model: rows y ~ N(mu, 1), mu ~ N(0, tau^2) per
    segment; closed form (checked against scipy below). Same interface as SegmentEvidence."""

    def __init__(self, y, tau=3.0):
        self.y, self.tau, self.cache = np.asarray(y, float), tau, {}

    def log_z(self, a, b):
        if (a, b) not in self.cache:
            x, t2 = self.y[a:b], self.tau ** 2
            n = x.size
            val = (-0.5 * n * np.log(2 * np.pi) - 0.5 * np.log1p(n * t2)
                   - 0.5 * (x @ x - t2 * x.sum() ** 2 / (1 + n * t2)))
            self.cache[(a, b)] = (float(val), 0.0)
        return self.cache[(a, b)]


def test_normal_evidence_against_scipy():
    y = np.random.default_rng(0).normal(size=6)
    cov = np.eye(6) + 9.0 * np.ones((6, 6))
    ref = stats.multivariate_normal(np.zeros(6), cov).logpdf(y)
    assert math.isclose(NormalEvidence(y).log_z(0, 6)[0], ref, rel_tol=1e-12)


def _brute_force_posterior(ev, n, m, kind_value, max_changes):
    """log posterior of every segmentation with at most max_changes changes."""
    out = {}
    for cuts in segmentations(n, m):
        if len(cuts) <= max_changes:
            edges = (0,) + cuts + (n,)
            out[cuts] = sum(ev.log_z(a, b)[0] for a, b in zip(edges, edges[1:])) + \
                log_prior(n, len(cuts), *kind_value, m)
    return out


def test_change_probabilities_match_enumeration_without_a_change():
    """One-source series: no change found, and p_change_before equals the exact posterior
    over every segmentation with at most one change (brute-force enumeration)."""
    y = np.random.default_rng(3).normal(size=14)
    ev, kv, m = NormalEvidence(y), ("geometric", 0.5), 3
    starts = _binary_segmentation(ev, 14, kv, m)
    assert starts == [0]
    p = change_probabilities(ev, starts, 14, kv, m)
    post = _brute_force_posterior(ev, 14, m, kv, 1)
    norm = special.logsumexp(list(post.values()))
    for i in range(1, 14):
        exact = math.exp(post[(i,)] - norm) if (i,) in post else 0.0
        assert math.isclose(p[i], exact, rel_tol=1e-9, abs_tol=1e-15), i


def test_search_finds_two_mean_shifts_and_the_map_segmentation():
    """Two shifts of 4 sd at rows 9 and 17 of 26 (row 9 drew 2.15, between the two means):
    found within a row, and the segmentation found is the most probable of all
    (enumeration of every segmentation with up to 3 changes)."""
    rng = np.random.default_rng(11)
    y = np.r_[rng.normal(0, 1, 9), rng.normal(4, 1, 8), rng.normal(-1, 1, 9)]
    ev, kv, m = NormalEvidence(y), ("geometric", 0.5), 3
    starts = _binary_segmentation(ev, 26, kv, m)
    post = _brute_force_posterior(ev, 26, m, kv, 3)
    assert tuple(starts[1:]) == max(post, key=post.get)
    assert len(starts) == 3 and abs(starts[1] - 9) <= 1 and starts[2] == 17, starts
    p = change_probabilities(ev, starts, 26, kv, m)
    assert p[starts[1]] > 0.5 and p[17] > 0.9 and np.nansum(p) < 2.2, np.round(p, 3)


def test_segment_evidence_does_not_depend_on_the_order_asked(tmp_path):
    """Each segment is seeded from (run seed, start, end): the same numbers whatever the
    search asks first (what makes the segments independent of worker count and order)."""
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.likelihood import Likelihood
    from ventsource.inference.priors import load_prior_file
    from ventsource.inference.segments.evidence import SegmentEvidence
    spec = load_prior_file(FAST)
    fw = ForwardModel(spec, ratio_names=NAMES)
    meas, _ = source_series(spec, fw, 6, seed=2)
    liks = [Likelihood(x, prediction_names=fw.ratio_names) for x in meas]
    opt = dict(split_particles=60, split_runs=2)
    one, two = SegmentEvidence(spec, fw, liks, 7, opt), SegmentEvidence(spec, fw, liks, 7, opt)
    a = [one.log_z(0, 3), one.log_z(3, 6)]
    b = [two.log_z(3, 6), two.log_z(0, 3)][::-1]
    assert a == b and len(one.cache) == 2
    assert one.log_z(0, 3) is one.cache[(0, 3)]   # asked again: not run again


def test_window_auto_run_finds_the_change_and_writes_its_outputs(tmp_path, monkeypatch):
    """Fast but real: 8 rows from the package's forward model, a recharge (twice the CO2,
    half the S) from row 4 on, demo prior; `--window auto` through run_series. The change
    is found within 2 rows, each segment is inverted as a window, summary.csv carries the
    segment labels and p_change_before, segments.csv and hazard.json (validated against
    docs/hazard.schema.json) the segments; a resume does not choose again."""
    import jsonschema
    import pandas as pd
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    from ventsource.workflow.measurements import read_measurements
    from ventsource.workflow.series import run_series
    spec = load_prior_file(FAST)
    meas, _ = source_series(spec, ForwardModel(spec, ratio_names=NAMES), 8, change_at=(4,), seed=4)
    data = write_csv(tmp_path / "d.csv", meas)
    out = tmp_path / "run"
    opts = dict(n_particles=60, n_runs=2)   # the evidences: the check's own size (100 x 2)
    kw = dict(seed=1, window="auto", options=opts, segments={"min_rows": 3}, progress_stream=io.StringIO())
    run_series(read_measurements(data), str(FAST), str(out), **kw)
    s = pd.read_csv(out / "summary.csv", dtype={"id": str})
    seg = pd.read_csv(out / "segments.csv")
    assert len(seg) == 2 and abs(int(seg["n_rows"][0]) - 4) <= 2, seg
    assert s["window"].tolist() == ["s01"] * int(seg["n_rows"][0]) + ["s02"] * int(seg["n_rows"][1])
    c = int(seg["n_rows"][0])
    assert np.isnan(s["p_change_before"][0]) and s["p_change_before"][c] > 0.5
    assert s["p_magmatic"].between(0, 1).all()
    hazard = json.loads((out / "hazard.json").read_text())
    jsonschema.validate(hazard, json.loads((ROOT / "docs" / "hazard.schema.json").read_text()))
    assert [x["segment"] for x in hazard["segments"]["segments"]] == ["s01", "s02"]
    assert "CAUTION" in (out / "README.txt").read_text() and "segments.csv" in (out / "README.txt").read_text()
    import ventsource.inference.segments.search as search
    monkeypatch.setattr(search, "segment_series", lambda *a, **k: pytest.fail("chose again on resume"))
    run_series(read_measurements(data), str(FAST), str(out), resume=True, **kw)
    from ventsource.workflow.segments_figure import plot_segments
    (out / "figures").mkdir()
    assert plot_segments(str(out), str(out / "figures"))


def test_segment_options_need_window_auto_and_are_checked():
    import argparse
    from ventsource.cli.series_options import _segment_option
    args = argparse.Namespace(window="30d", min_segment_rows=3, change_prior=None)
    with pytest.raises(InputError, match="--window auto"):
        _segment_option(args)
    args = argparse.Namespace(window="auto", min_segment_rows=1, change_prior=None)
    with pytest.raises(InputError, match="--min-segment-rows"):
        _segment_option(args)
    args = argparse.Namespace(window="auto", min_segment_rows=None, change_prior="poisson:2")
    assert _segment_option(args) == {"min_rows": 4, "change_prior": "poisson:2"}


# --- statistical checks on arc_basalt series (slow) -------------------------------------

@pytest.fixture(scope="module")
def basalt():
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    spec = load_prior_file(ROOT / "priors" / "arc_basalt.toml")
    return spec, ForwardModel(spec, ratio_names=NAMES)


@pytest.mark.slow
@pytest.mark.parametrize("n_rows,changes,seed", [(20, (), 21), (20, (10,), 22), (24, (8, 16), 23)])
def test_known_change_points_are_found_within_two_rows(basalt, n_rows, changes, seed):
    """Series from the package's own forward model with none, one and two recharges (each
    twice the CO2 and half the S of the source before), a third of the rows scrubbed
    30-80 %: as many changes found as made, each within 2 rows (the issue's level)."""
    from ventsource.inference.segments.search import segment_series
    spec, forward = basalt
    rng = np.random.default_rng(seed)
    scrubbed = np.where(rng.random(n_rows) < 1 / 3, rng.uniform(0.3, 0.8, n_rows), 0.0)
    meas, _ = source_series(spec, forward, n_rows, change_at=changes, scrubbed=scrubbed, seed=seed)
    seg = segment_series(meas, spec, forward=forward, seed=seed)
    found = seg.starts[1:]
    assert len(found) == len(changes), (found, changes)
    assert all(abs(f - c) <= 2 for f, c in zip(found, changes)), (found, changes)


@pytest.mark.slow
def test_no_spurious_change_in_one_source_series(basalt, capsys):
    """One source, 40 rows, a random half of them scrubbed 30-90 %: no change found in at
    least 9 of 10 seeds (the issue's level). Measured on 0.4.1 (seeds 0-9, one at a time):
    no change found in any of the 10, 238-375 CPU-s each on a loaded machine."""
    from ventsource.inference.segments.search import segment_series
    spec, forward = basalt
    found = []
    for k in range(10):
        rng = np.random.default_rng(300 + k)
        scrubbed = np.where(rng.random(40) < 0.5, rng.uniform(0.3, 0.9, 40), 0.0)
        meas, _ = source_series(spec, forward, 40, scrubbed=scrubbed, seed=400 + k)
        found.append(segment_series(meas, spec, forward=forward, seed=k).starts[1:])
    with capsys.disabled():
        print(f"\nchanges found in 10 one-source series of 40 rows: {found}")
    assert sum(bool(f) for f in found) <= 1, found


@pytest.mark.slow
def test_acceptance_recharge_found_and_scrubbing_not_taken_for_a_change(basalt, capsys):
    """40 rows: source A magmatic (rows 0-13), A with 70 % of its SO2 scrubbed (14-26), a
    recharge to source B with twice the CO2 and half the S (27-39), as
    `ventsource bench --only window` makes it. The recharge is found within 2 rows and no
    change is put at or inside the scrubbing stretch (rows 14-26): every change found is
    the recharge (the issue's acceptance). Then each segment is inverted as a window, as a
    run does: every scrubbed row P(M0) <= 0.1, every magmatic row of A and of B >= 0.7,
    no convergence flag, and each segment's 90 % bands hold its source's H2O, CO2, S and
    dFMQ. Measured on 0.5.0 (persistent hypotheses), seed 1: A's magmatic rows 0.83-1.00,
    A's scrubbed rows 0.000, B's rows 0.94-0.99; R-hat 1.009 and 1.008. On 0.4.2
    (independent hypotheses) B's rows read 0.41-0.92 and A's 0.70-0.94; the segments,
    p_change_before 0.9999973 at row 27 and <= 2.5e-6 elsewhere, are unchanged (the
    segment evidences do not use the hypotheses)."""
    from ventsource.bench.segments import story
    from ventsource.inference.segments.search import segment_series
    from ventsource.inference.window.sampling import infer_window
    spec, forward = basalt
    meas, change, scrub_from = story(spec, forward, 40)
    seg = segment_series(meas, spec, forward=forward, seed=1)
    with capsys.disabled():
        print(f"\nsegments start at {seg.starts}; p_change_before {np.round(seg.p_change_before, 3).tolist()}")
    assert any(abs(c - change) <= 2 for c in seg.starts[1:]), seg.starts
    assert all(abs(c - change) <= 2 for c in seg.starts[1:]), (seg.starts, scrub_from)
    names = list(spec.free_names)
    truth_a = dict(zip(names, spec.sample(np.random.default_rng(3), 1)[0]))   # story()'s first draw
    truth_b = dict(truth_a, co2_ppm=2.0 * truth_a["co2_ppm"], s_ppm=0.5 * truth_a["s_ppm"])
    bounds = list(seg.starts) + [len(meas)]
    for start, end in zip(bounds[:-1], bounds[1:]):
        res = infer_window(meas[start:end], spec, forward=forward, seed=1)
        p = np.array([r.p_magmatic for r in res.rows])
        rows = np.arange(start, end)
        with capsys.disabled():
            print(f"rows {start}-{end - 1}: P(M0) {np.round(p, 3).tolist()}, R-hat {res.diagnostics['rhat_max']:.3f}")
        assert not {"rhat_high", "few_distinct_particles"} & set(res.flags), res.flags
        assert np.all(p[(rows >= scrub_from) & (rows < change)] <= 0.1), p
        assert np.all(p[(rows < scrub_from) | (rows >= change)] >= 0.7), p
        truth = truth_a if start < change else truth_b
        for j, name in enumerate(res.shared_names):
            if name in ("h2o_wt", "co2_ppm", "s_ppm", "dfmq"):
                lo, hi = np.quantile(res.shared_draws[:, :, j], [0.05, 0.95])
                assert lo <= truth[name] <= hi, (start, name, lo, hi, truth[name])
