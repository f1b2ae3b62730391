"""The watch folder's files, each rewritten whole and atomically (temp file + rename), so
a reader never sees half a file: answers.csv (each row's instant answer), summary.csv and
hazard.json (every row taken, the current window's with its latest numbers), the series
figure and report.html."""
from __future__ import annotations

import os
from types import SimpleNamespace

from ventsource.common.caution import CAUTION
from ventsource.workflow.run_folder import HAZARD_NAME, SUMMARY_NAME, _atomic, _rewrite, write_text_json
from ventsource.workflow.summary_columns import summary_columns

ANSWERS_NAME = "answers.csv"
ANSWER_COLUMNS = ["id", "time", "line", "window", "window_rows_before", "p_magmatic_on_arrival",
                  "p_magmatic_on_arrival_error", "answered_at"]
LIVE_NOTE = ("Live monitoring (ventsource watch): the rows of the current window carry the numbers of "
             "its latest update and change as rows arrive; a closed window's rows are final.")


def write_answers(out_dir, answers):
    _rewrite(os.path.join(out_dir, ANSWERS_NAME), ANSWER_COLUMNS, answers)


def write_tables(out_dir, ctx, rows, skipped, ratio_names):
    """summary.csv and hazard.json of every row taken so far."""
    from ventsource.workflow.hazard_export import hazard_document, ordered
    from ventsource.workflow.hypothesis_rows import extend_hazard
    cols = summary_columns(ctx.spec.free_names, ratio_names) + ["line"]
    _rewrite(os.path.join(out_dir, SUMMARY_NAME), cols, rows)
    series = SimpleNamespace(path=ctx.data, fluxes=None, default_sigma=ctx.sigma)
    doc = hazard_document(series, ctx.spec, ctx.prior_path, rows, ctx.seed, {}, LIVE_NOTE, sigma=ctx.sigma,
                          out_dir=out_dir, synthetic_data=ctx.synthetic,
                          window_per_row=list(ctx.spec.window_per_row))
    doc = ordered(extend_hazard(doc, rows, series))
    doc["live"] = {"rows_taken": len(rows), "skipped_lines": skipped,
                   "note": "skipped lines are listed with their reason (watch.log has one line each)"}
    write_text_json(os.path.join(out_dir, HAZARD_NAME), doc)


def write_figure_and_report(out_dir, figures=True):
    """figures/series.png from summary.csv (atomic), then report.html."""
    from ventsource.workflow.report_html import write_report
    if figures:
        from ventsource.workflow.figures import _plt, series_figure
        import warnings
        plt = _plt()
        os.makedirs(os.path.join(out_dir, "figures"), exist_ok=True)
        with warnings.catch_warnings():   # a window of a few rows: matplotlib's date-axis notes
            warnings.simplefilter("ignore")
            fig = series_figure(os.path.join(out_dir, SUMMARY_NAME), title="Live monitoring (ventsource watch)")
            try:
                _atomic(os.path.join(out_dir, "figures", "series.png"),
                        lambda part: fig.savefig(part, dpi=100, format="png"))
            finally:
                plt.close(fig)
    write_report(out_dir)


def write_readme(out_dir, synthetic):
    from ventsource.workflow.table_notes import write_table_readme
    write_table_readme(out_dir, {ANSWERS_NAME: "each row's instant answer: P(M0) given the row and the "
                                               "window's earlier rows, before the window was updated",
                                 SUMMARY_NAME: "one row per measurement, latest numbers (docs/outputs.md)",
                                 HAZARD_NAME: "per-row probabilities with provenance and flag meanings",
                                 "alerts.jsonl": "one JSON line per alert (docs/running.md)",
                                 "report.html": "the watch on one page"},
                       synthetic=synthetic, flags=[], notes=[f"Caution: {CAUTION}"])
