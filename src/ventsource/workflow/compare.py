"""The same measurements under several prior files: how much the answer depends on the prior.

Each prior gets its own resumable run in OUT/runs/NAME/. The comparison table
(OUT/compare.csv) has per row: P(M0) and its error under each prior (and P(M1),
P(M2) when a prior has the released-sulfur hypothesis), each prior's own P(M0) before
the data (pi0 in the three-model sense) and the row's flags under it, the spread
(max - min) of each probability across priors (the prior-sensitivity measure) and the
standard deviation of P(M0), and for every parameter free in two priors the overlap
coefficient of their marginal posteriors. Two priors whose posteriors both sit at their
own prior probability have learnt nothing from the data: a small spread then is no sign
of robustness, which is why the prior probabilities stand beside the posteriors.
Every run's hazard.json and report.html then carry the spreads (prior_sensitivity).

Overlap coefficient OVL = integral of min(f, g) (Inman and Bradley 1989, Commun.
Statist. Theory Meth. 18, 3851-3874): 1 for identical marginals, 0 for disjoint
ones; estimated here from histograms on a shared grid.
"""
import itertools
import re
import os

import numpy as np
import pandas as pd

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.workflow.series import row_key, run_series


def overlap_coefficient(a, b, bins=60):
    """Histogram estimate of the overlap coefficient of two samples' densities."""
    a = np.asarray(a, dtype=float).ravel()
    b = np.asarray(b, dtype=float).ravel()
    a, b = a[np.isfinite(a)], b[np.isfinite(b)]
    if a.size == 0 or b.size == 0:
        return float("nan")
    lo, hi = min(a.min(), b.min()), max(a.max(), b.max())
    if hi <= lo:
        return 1.0
    edges = np.linspace(lo, hi, bins + 1)
    fa, _ = np.histogram(a, edges)
    fb, _ = np.histogram(b, edges)
    return float(np.minimum(fa / a.size, fb / b.size).sum())


def _posterior(out_dir, rid):
    import arviz as az
    return az.from_netcdf(os.path.join(out_dir, "rows", f"{row_key(rid)}.nc")).posterior


_FOLDER_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9_.+-]{0,99}")


def _check_folder_name(prior_path, name):
    """A prior's name becomes OUT/runs/NAME: a plain name, so that no run lands outside OUT."""
    if _FOLDER_NAME.fullmatch(name or "") is None or ".." in name:
        raise InputError(f"{prior_path}: metadata.name '{name}' names the prior's run folder: use "
                         "letters, digits, '_', '-', '.', '+' only (no path, no leading '.')")


def run_compare(series_by_prior, prior_paths, out_dir, seed=0, workers=1, resume=False,
                options=None, dask_scheduler=None, dask_local=False, progress_stream=None,
                window=None, oversubscribe=False):
    """Run every prior, write compare.csv and compare.png; returns their paths."""
    from ventsource.inference.priors import load_prior_file
    specs = [load_prior_file(p) for p in prior_paths]
    names = [s.name for s in specs]
    for path, name in zip(prior_paths, names):
        _check_folder_name(path, name)
    if len(set(names)) < len(names):
        raise InputError("two prior files share the metadata.name "
                         f"'{next(n for n in names if names.count(n) > 1)}'; each needs its own")
    run_dirs = {n: os.path.join(out_dir, "runs", n) for n in names}
    results = {}
    for k, (path, spec) in enumerate(zip(prior_paths, specs)):
        rows = run_series(series_by_prior[path], path, run_dirs[spec.name], seed=seed, workers=workers,
                          resume=resume, options=options, dask_scheduler=dask_scheduler,
                          dask_local=dask_local, progress_stream=progress_stream, window=window,
                          oversubscribe=oversubscribe,
                          progress_label=f"prior {k + 1}/{len(specs)} {spec.name}")
        results[spec.name] = {r["id"]: r for r in rows}
    series = series_by_prior[prior_paths[0]]
    table = compare_table(series.ids, names, specs, results, run_dirs)
    csv_path = os.path.join(out_dir, "compare.csv")
    table.to_csv(csv_path + ".part", index=False)
    os.replace(csv_path + ".part", csv_path)
    fig_path = os.path.join(out_dir, "compare.png")
    plot_compare(table, names, fig_path)
    record_sensitivity(table, names, run_dirs)
    from ventsource.workflow.table_notes import write_table_readme
    write_table_readme(out_dir, {"compare.csv": "P(M0), P(M1), P(M2) per row under each prior, each "
                                 "prior's own P(M0), flags, the spread of each probability across "
                                 "priors and posterior overlap coefficients",
                                 "compare.png": "P(M0) against time under each prior",
                                 "runs/": "one complete run (summary.csv, hazard.json) per prior"},
                       synthetic=any(getattr(s, "fictional", False) for s in specs))
    return [csv_path, fig_path]


PROBABILITIES = ("p_magmatic", "p_scrubbed", "p_released")
LABELS = {"p_magmatic": "P(M0)", "p_scrubbed": "P(M1)", "p_released": "P(M2)"}


def _spread(values):
    v = [x for x in values if x is not None and np.isfinite(x)]
    return float(max(v) - min(v)) if len(v) > 1 else float("nan")


def _probabilities(rec, r, n, spec):
    """P(M0..M2) under one prior (P(M1) = 1 - P(M0) without M2), its prior P(M0), flags."""
    from ventsource.workflow.hazard_text import labelled_prior_probabilities
    p0 = r.get("p_magmatic")
    rec[f"prior_p_magmatic [{n}]"] = labelled_prior_probabilities(spec)["M0"]
    rec[f"p_magmatic [{n}]"] = p0
    rec[f"p_magmatic_error [{n}]"] = r.get("p_magmatic_error")
    two = getattr(spec, "release", None) is None
    rec[f"p_scrubbed [{n}]"] = (None if p0 is None else 1.0 - p0) if two else r.get("p_scrubbed")
    rec[f"p_released [{n}]"] = 0.0 if two else r.get("p_released")
    rec[f"flags [{n}]"] = r.get("flags") or ""


def compare_table(ids, names, specs, results, run_dirs):
    free = {s.name: tuple(s.free_names) for s in specs}
    records = []
    for rid in ids:
        rec = {"id": rid, "time": results[names[0]][rid]["time"]}
        for n, spec in zip(names, specs):
            _probabilities(rec, results[n][rid], n, spec)
        for name in PROBABILITIES:
            rec[f"{name}_spread"] = _spread([rec[f"{name} [{n}]"] for n in names])
        # how far the data moved P(M0) from each prior's own value, the largest over priors:
        # a small spread with a small move means the priors, not the data, agree
        moves = [abs(rec[f"p_magmatic [{n}]"] - rec[f"prior_p_magmatic [{n}]"]) for n in names
                 if rec[f"p_magmatic [{n}]"] is not None]
        rec["p_magmatic_moved_by_data"] = float(max(moves)) if moves else float("nan")
        ps = [rec[f"p_magmatic [{n}]"] for n in names if rec[f"p_magmatic [{n}]"] is not None]
        rec["p_magmatic_sd"] = float(np.std(ps, ddof=1)) if len(ps) > 1 else float("nan")
        posts = {n: _posterior(run_dirs[n], rid) for n in names}
        for a, b in itertools.combinations(names, 2):
            for par in free[a]:
                if par in free[b]:
                    rec[f"overlap {par} [{a} vs {b}]"] = overlap_coefficient(
                        posts[a][par].values, posts[b][par].values)
        records.append(rec)
    return pd.DataFrame(records)


def record_sensitivity(table, names, run_dirs):
    """prior_sensitivity in every run's hazard.json (then its report.html): the largest spread
    of each probability across the priors, over rows, and per row."""
    import json
    from ventsource.workflow.report_html import write_report
    from ventsource.workflow.run_folder import write_text_json
    spread = {LABELS[k]: round(float(np.nanmax(table[f"{k}_spread"])), 2)
              for k in PROBABILITIES if np.isfinite(table[f"{k}_spread"]).any()}
    moved = table["p_magmatic_moved_by_data"].astype(float)
    sensitivity = {"priors": list(names), "spread": spread,
                   "rows_data_barely_moved": [str(i) for i in table.loc[moved < 0.05, "id"]],
                   "per_row": {str(r["id"]): {LABELS[k]: round(float(r[f"{k}_spread"]), 2) for k in PROBABILITIES
                                              if np.isfinite(r[f"{k}_spread"])} for _, r in table.iterrows()},
                   "note": "spread = largest minus smallest probability across the priors (2 decimals); "
                           "compare.csv also gives each prior's own P(M0): a posterior that stays at "
                           "its prior has learnt little from the data, however small the spread; "
                           "rows_data_barely_moved lists the rows where P(M0) moved less than 0.05 "
                           "from its prior value under every prior"}
    for folder in run_dirs.values():
        path = os.path.join(folder, "hazard.json")
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
        doc["prior_sensitivity"] = sensitivity
        write_text_json(path, doc)
        write_report(folder)


def plot_compare(table, names, path):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig = compare_figure(table, names)
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def compare_figure(table, names):
    """P(M0) against measurement time under each prior, and the mean posterior overlaps."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    colours = ["#1d3557", "#b5651d", "#6a3d7a", "#457b9d", "#8c564b", "#555555"]
    markers = ["o", "s", "D", "^", "v", "P"]
    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(9, 7.5), gridspec_kw={"height_ratios": [3, 2]})
    times = pd.to_datetime(table["time"].astype(str).str.rstrip("Z"))
    span = (times.max() - times.min()) if len(times) > 1 else pd.Timedelta(days=1)
    shift = span / max(len(times), 1) * 0.15  # small offsets so priors at one time stay apart
    for k, n in enumerate(names):
        ax1.errorbar(times + (k - (len(names) - 1) / 2) * shift, table[f"p_magmatic [{n}]"].astype(float),
                     yerr=table[f"p_magmatic_error [{n}]"].astype(float).fillna(0), fmt=markers[k % 6],
                     ms=4, color=colours[k % 6], capsize=2, label=f"prior {n}")
        if f"prior_p_magmatic [{n}]" in table:  # where the posterior would sit without data
            ax1.axhline(float(table[f"prior_p_magmatic [{n}]"].iloc[0]), color=colours[k % 6], ls="--",
                        lw=1, label=f"P(M0) before the data, {n}")
    ax1.set_ylim(-0.03, 1.03)
    ax1.set_ylabel("P(M0) purely magmatic\n(probability)")
    ax1.set_xlabel("measurement time (UTC)")
    ax1.tick_params(axis="x", labelrotation=30)
    ax1.legend(fontsize=8, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    ax1.set_title("Same measurements, different prior files")
    ov = [c for c in table.columns if c.startswith("overlap ")]
    if ov:
        mean_ov = table[ov].astype(float).mean(axis=0)
        ax2.barh(range(len(ov)), mean_ov.values, color="#8da9c4")
        ax2.set_yticks(range(len(ov)))
        pairs = {c[c.index("["):] for c in ov}
        labels = [c[len("overlap "):c.index(" [")] if len(pairs) == 1 else c[len("overlap "):] for c in ov]
        ax2.set_yticklabels(labels, fontsize=7)
        if len(pairs) == 1:
            ax2.set_title(pairs.pop().strip("[]"), fontsize=9)
        ax2.set_xlim(0, 1)
        ax2.set_xlabel("posterior overlap coefficient, mean over rows (1 = same marginal)")
    else:
        ax2.text(0.5, 0.5, "no parameter free under two priors", ha="center")
        ax2.set_axis_off()
    fig.text(0.01, 0.005, "Caution: " + CAUTION, fontsize=7, color="#333333")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    return fig
