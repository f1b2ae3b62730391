"""`--window auto`: the segments of a series that share one magma source, chosen by the data.

The segmentation (inference/segments/search.py) runs once, before the windows are
inverted, in the run's own process; its result is kept as segments.json in the run
folder (with the settings it was made under), so --resume does not choose again. Each
segment is then inverted as a window exactly as a `--window 30d` window is
(workflow/windows.py). Outputs: the segment's label in summary.csv's `window` column,
the posterior probability of a change just before each row (`p_change_before`),
segments.csv (one line per segment) and the `segments` entry of hazard.json.
"""
from __future__ import annotations

import csv
import json
import os

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.inference.segments.change_prior import (DEFAULT_CHANGE_PRIOR, DEFAULT_MIN_ROWS,
                                                         check_min_rows, parse_change_prior)

SEGMENTS_JSON = "segments.json"
SEGMENTS_CSV = "segments.csv"
SEGMENT_COLUMNS = ("p_change_before",)
TABLE_COLUMNS = ("segment", "first_time", "last_time", "n_rows", "first_id", "last_id", "log_z",
                 "log_z_error", "log10_odds_change_inside", "p_change_at_start")
_EVIDENCE_OPTIONS = ("split_particles", "split_runs", "ess_target", "split_max_moves", "kind", "dof")


def segment_settings(segments=None):
    """The settings of a `--window auto` run: {"min_rows", "change_prior"} (checked)."""
    given = dict(segments or {})
    unknown = sorted(set(given) - {"min_rows", "change_prior"})
    if unknown:
        raise InputError(f"segments: unknown setting(s) {unknown}; known: min_rows, change_prior")
    kind, value = parse_change_prior(given.get("change_prior", DEFAULT_CHANGE_PRIOR))
    return {"min_rows": check_min_rows(given.get("min_rows", DEFAULT_MIN_ROWS)),
            "change_prior": f"{kind}:{value:g}"}


def time_order(series):
    t = np.array(series.times, dtype="datetime64[s]").astype(np.int64)
    return [int(i) for i in np.argsort(t, kind="stable")]


def choose_segments(series, spec, out_dir, settings, stream=None):
    """[(label, [row indices])] of the segments, and the segmentation record (a dict)."""
    from ventsource.workflow.row_jobs import _time_text
    from ventsource.workflow.run_folder import _atomic, _dump_json
    order = time_order(series)
    made_under = {"data": settings.get("data_sha256"), "prior": settings.get("prior_sha256"),
                  "seed": settings["seed"], "segments": settings["segments"],
                  "options": settings.get("options"), "version": settings.get("package_version")}
    path = os.path.join(out_dir, SEGMENTS_JSON)
    record = _read_record(path, made_under)
    if record is None:
        if stream is not None:
            stream.write(f"choosing segments of {len(order)} rows (change-of-source evidences)...\n")
        seg = _segment(series, spec, order, settings)
        ids = [series.ids[i] for i in order]
        times = [_time_text(series.times[i]) for i in order]
        record = {"made_under": made_under, "caution": CAUTION, "change_prior": settings["segments"]["change_prior"],
                  "min_rows": settings["segments"]["min_rows"], "log_score": seg.log_score,
                  "log_prior": seg.log_prior, "diagnostics": seg.diagnostics,
                  "segments": [dict(s, segment=lab, first_id=ids[s["start"]], last_id=ids[s["end"] - 1],
                                    first_time=times[s["start"]], last_time=times[s["end"] - 1],
                                    n_rows=s["end"] - s["start"],
                                    p_change_at_start=_finite(seg.p_change_before[s["start"]]))
                               for lab, s in zip(seg.labels, seg.segments)],
                  "p_change_before": {rid: _finite(p) for rid, p in zip(ids, seg.p_change_before)}}
        record = _json_safe(record)   # the same record whether made now or read on --resume
        _atomic(path, lambda part: _dump_json(part, record, None))
        if stream is not None:
            stream.write(f"{len(record['segments'])} segment(s), {seg.diagnostics['n_segment_evidences']} "
                         f"segment evidences, {seg.diagnostics['cpu_s']:.0f} CPU-s\n")
    groups = [(s["segment"], order[s["start"]:s["end"]]) for s in record["segments"]]
    return groups, record


def _segment(series, spec, order, settings):
    from ventsource.inference.segments.search import segment_series
    from ventsource.inference.window.sampling import WindowError
    from ventsource.workflow.row_jobs import row_seed
    opts = {k: v for k, v in (settings.get("options") or {}).items() if k in _EVIDENCE_OPTIONS}
    seg_opts = settings["segments"]
    try:
        return segment_series([series.measurements[i] for i in order], spec,
                              seed=row_seed(settings["seed"], "segments"), min_rows=seg_opts["min_rows"],
                              change_prior=seg_opts["change_prior"], options=opts)
    except WindowError as exc:
        raise InputError(f"--window auto: {exc}") from None


def _read_record(path, made_under):
    try:
        with open(path) as fh:
            record = json.load(fh)
    except (OSError, ValueError):
        return None
    if not isinstance(record, dict) or record.get("made_under") != _json_safe(made_under):
        return None
    return record


def _finite(x):
    return float(x) if np.isfinite(x) else None


def _json_safe(obj):
    return json.loads(json.dumps(_nan_to_none(obj), default=float))


def _nan_to_none(obj):
    if isinstance(obj, dict):
        return {k: _nan_to_none(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_nan_to_none(v) for v in obj]
    if isinstance(obj, float) and not np.isfinite(obj):
        return None
    return obj


def add_change_probabilities(rows, record):
    """Each summary row (a dict with "id") gets p_change_before."""
    if record is None:
        return rows
    p = record["p_change_before"]
    return [dict(row, p_change_before=p.get(row["id"])) for row in rows]


def write_segments_table(out_dir, record):
    """segments.csv: one line per segment (the caution is in the README.txt beside it)."""
    from ventsource.workflow.run_folder import _atomic

    def write(part):
        with open(part, "w", newline="") as fh:
            out = csv.writer(fh, lineterminator="\n")
            out.writerow(TABLE_COLUMNS)
            for s in record["segments"]:
                out.writerow(["" if s.get(c) is None else s.get(c) for c in TABLE_COLUMNS])
    _atomic(os.path.join(out_dir, SEGMENTS_CSV), write)


def hazard_change_fields(row):
    """p_change_before of a hazard.json row, by the house rounding rule (2 decimals without
    an error, never exactly 0 or 1: workflow/hazard_format.py)."""
    from ventsource.workflow.hazard_format import round_probability
    return {"p_change_before": round_probability(row.get("p_change_before"), None)[0]}


def hazard_segments(record):
    """The `segments` entry of hazard.json (probabilities and log10 odds rounded by the
    house rule)."""
    from ventsource.workflow.hazard_format import round_log10_bf, round_probability
    rounded = [dict(s, p_change_at_start=round_probability(s.get("p_change_at_start"), None)[0],
                    log10_odds_change_inside=round_log10_bf(s.get("log10_odds_change_inside")))
               for s in record["segments"]]
    return {"how": "segments chosen by the data (--window auto): binary segmentation by Bayesian model "
                   "comparison of where the magma source changes; each segment scored by the window "
                   "model with every row's SO2 free (a change of scrubbing is not a change of source)",
            "change_prior": record["change_prior"], "min_rows": record["min_rows"],
            "caution": CAUTION,
            "segments": [{k: s.get(k) for k in TABLE_COLUMNS if k not in ("log_z", "log_z_error")}
                         for s in rounded]}
