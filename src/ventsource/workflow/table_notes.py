"""README.txt written beside every table: the caution and what each file holds.

The tables stay plain CSV (one header row, readable by any CSV reader); the
caution travels with them in this text file in the same folder.
"""
import os

from ventsource.common.caution import CAUTION

README_NAME = "README.txt"


GLOSSARY = [
    "M0, M1, M2: the hypotheses - purely magmatic gas; SO2 scrubbed on the way up; stored "
    "sulfur released (M2 only with a [hypotheses] table in the prior).",
    "p_magmatic = P(M0 | data); p_scrubbed = P(M1 | data); p_released = P(M2 | data). Each "
    "*_error column is its Monte Carlo error (1 sigma). summary.csv keeps full precision; "
    "hazard.json and report.html round to what the error supports and never show 0 or 1 "
    "('< 0.001' means at most 0.001).",
    "p_scrubbed_below_epsilon (summary.csv; in hazard.json "
    "p_scrubbed_below_epsilon_if_scrubbed): IF the SO2 was scrubbed (M1), the probability that "
    "less than epsilon of it was removed. It is conditional on M1: do not compare it with P(M0).",
    "summary.csv has the same columns, with the same meanings, in row-by-row and window runs; "
    "a column that does not apply is empty (docs/outputs.md lists every column).",
    "scrubbed_so2_avg_*: fraction of the magmatic SO2 removed, averaged over the hypotheses "
    "(5 %, 50 %, 95 % quantiles). scrubbed_so2_if_scrubbed_*: the same IF scrubbed (M1 only), "
    "a conditional quantity.",
    "NAME_avg_*: a parameter averaged over the hypotheses (in a window: the magma's shared "
    "posterior, repeated on each of its rows; pressure per row); NAME_if_scrubbed_*: under M1 "
    "(every parameter; in a window from the draws that hold that row scrubbed); NAME_rhat, NAME_ess_bulk: "
    "agreement of the sampler runs and effective draws (a window: its shared parameters); "
    "units: pressure_bar bar, temperature_c C, dfmq log units, *_ppm ppm by mass.",
    "window, window_first_time, window_last_time, window_span_days (days from the first to the "
    "last row), window_n_rows: the window of the row (empty row by row). source_check: the "
    "change-of-source check ran (run), was not run (not_run: fewer than 4 rows; one row runs no "
    "source check) or failed.",
    "log10_bf_one_source, log10_bf_one_vs_split: log10 Bayes factors of one shared source in a "
    "window against each row with its own source / against a change of source inside it "
    "(below 0, resp. below -2: flag mixed_sources).",
    "Sulfur budget (with flux columns): every mass as sulfur, t S/d and t S; "
    "magmatic_so2_flux_tpd_* is the same magmatic flux as SO2 (twice the mass). "
    "retained_s_tpd and cumulative_retained_s_t are net: negative means released. The "
    "running total restarts after a window flagged mixed_sources (budget_restarted = 1) "
    "and skips gaps (budget_gap_before = 1). Its band widens with time, quiet periods "
    "included, because every row's rate is uncertain and the uncertainties add up.",
]


def write_table_readme(folder, files, synthetic=False, flags=None, notes=None):
    """Write (or extend) folder/README.txt naming each file with its description.

    files: {file name relative to folder: one-line description}; flags: the flag codes
    whose meaning the text carries (None: every known flag); notes: further lines (how
    much the data said, information_notes) written after the flags."""
    path = os.path.join(folder, README_NAME)
    known = {}
    if os.path.exists(path):
        with open(path) as fh:
            for line in fh:
                if line.startswith("* ") and ": " in line:
                    name, text = line[2:].rstrip("\n").split(": ", 1)
                    known[name] = text
    known.update(files)
    lines = ["Results written by ventsource.", "",
             "CAUTION: " + CAUTION, ""]
    if synthetic:
        lines += ["SYNTHETIC: the prior or the data here are fictional (made for a demonstration "
                  "or a test); they describe no real volcano.", ""]
    lines += ["Files:"] + [f"* {name}: {text}" for name, text in sorted(known.items())]
    lines += ["", "Glossary:"] + [f"* {text}" for text in GLOSSARY]
    lines += ["", "Flags (also in hazard.json 'flag_glossary' and report.html):"]
    lines += [f"* {code}: {text}" for code, text in _flag_meanings(flags)]
    if notes:
        lines += [""] + list(notes)
    return _write_lines(path, lines)


def _flag_meanings(flags):
    from ventsource.common.flag_glossary import FLAG_GLOSSARY
    codes = sorted(FLAG_GLOSSARY) if flags is None else sorted(set(flags))
    return [(c, FLAG_GLOSSARY.get(c, "No description recorded for this flag.")) for c in codes]


MAX_NOTED_ROWS = 20


def information_notes(rows, reference=None):
    """README lines on how much the data said: rows flagged near_prior and, per row (the
    first MAX_NOTED_ROWS), the shift of P(M0) from its prior and the direction the data
    resolved least (summary.csv columns p_magmatic_shift, *_contraction, unresolved_direction)."""
    told = [r for r in rows if r.get("unresolved_direction")]
    if not told:
        return []
    near = [r["id"] for r in told if "near_prior" in (r.get("flags") or "").split(";")]
    lines = ["How much the data said (contraction 1 - var_post/var_prior per parameter in "
             "summary.csv; a value near 0 means the prior, not the data, sets that parameter):",
             f"- rows flagged near_prior (P(M0) or the scrubbed fraction barely moved from the "
             f"prior): {len(near)} of {len(told)}" + (f" ({', '.join(near[:10])}"
                                                    f"{' ...' if len(near) > 10 else ''})" if near else "")]
    from ventsource.workflow.shift_words import reference_words, row_shift_ratio
    words = reference_words(reference)
    lines.append("- " + (words or "how far data usually move P(M0): not run (ventsource run "
                                   "--shift-reference 16 simulates it from the prior)"))
    for r in told[:MAX_NOTED_ROWS]:
        shift = r.get("p_magmatic_shift")
        ratio = row_shift_ratio(shift, reference)
        moved = "" if shift is None else (f"P(M0) moved {shift:+.3f} from its prior"
                                          + ("" if ratio is None else f" ({ratio:.2f} x the usual)") + "; ")
        lines.append(f"- {r['id']}: {moved}least resolved: {r['unresolved_direction']}")
    if len(told) > MAX_NOTED_ROWS:
        lines.append(f"- ... {len(told) - MAX_NOTED_ROWS} more rows in summary.csv")
    lines.append("To see which added measurement would sharpen the answer: ventsource plan.")
    return lines


def write_table_sidecar(table_path, description, synthetic=False):
    """TABLE.README.txt beside a single table written where the user chose (never a shared
    README.txt that could belong to someone else)."""
    path = str(table_path) + ".README.txt"
    lines = [f"{os.path.basename(str(table_path))}: {description}", "", "CAUTION: " + CAUTION]
    if synthetic:
        lines += ["", "SYNTHETIC: the prior is fictional (made for a demonstration or a test); it "
                  "describes no real volcano."]
    return _write_lines(path, lines)


def _write_lines(path, lines):
    """The text file in one piece: written beside it, then renamed over it."""
    with open(path + ".part", "w") as fh:
        fh.write("\n".join(lines) + "\n")
    os.replace(path + ".part", path)
    return path
