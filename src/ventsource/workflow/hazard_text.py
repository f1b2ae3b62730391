"""Words of hazard.json and the report: the hypotheses, the prior probabilities with
their labels, and a glossary of every field a hazard.json can carry.

Kept apart from hazard_export (which assembles the document) so that the report page
(report_html) and README.txt quote the same sentences.
"""

HYPOTHESES = {
    "M0": "purely magmatic: the gas reached the surface as it left the magma (no SO2 scrubbed, "
          "no stored sulfur added)",
    "M1": "SO2 scrubbed: part of the magmatic SO2 was removed on the way up (by water or "
          "hydrothermal fluids), a fraction s between 0 and 1",
    "M2": "stored sulfur released: SO2 was added to the magmatic gas from sulfur stored earlier "
          "(SO2 x (1 + r))",
}

FIELD_GLOSSARY = {
    "hypotheses": "the models compared; every probability below is a probability of one of them",
    "prior_model_probabilities": "probability of each hypothesis before the data (from the prior "
                                 "file, or the pi0 option when given)",
    "pi0": "prior probability of M0 relative to M1 (M0 / (M0 + M1)); the prior probabilities of "
           "the hypotheses follow from it and the prior's [hypotheses] table",
    "p_magmatic": "P(M0 | data): probability that the gas is purely magmatic",
    "p_scrubbed": "P(M1 | data): probability that SO2 was scrubbed",
    "p_released": "P(M2 | data): probability that stored sulfur was released",
    "*_error": "Monte Carlo error (1 standard deviation) of the number beside it; it shrinks with "
               "more particles or runs, unlike the model and prior dependence",
    "*_text": "the number as it should be read aloud, by the rounding rule ('< 0.001' means at "
              "most 0.001, never exactly 0)",
    "p_scrubbed_below_epsilon_if_scrubbed": "IF the SO2 was scrubbed (M1), the probability that "
                                            "less than epsilon of it was removed; it is conditional "
                                            "on M1 and is not comparable with P(M0)",
    "scrubbed_so2_model_averaged": "fraction of the magmatic SO2 removed by scrubbing, averaged "
                                   "over the hypotheses (0 under M0 and M2): 5 %, 50 %, 95 % "
                                   "quantiles",
    "scrubbed_so2_if_scrubbed": "fraction of the magmatic SO2 removed IF the gas was scrubbed (the "
                                "posterior under M1 alone): 5 %, 50 %, 95 % quantiles; conditional, "
                                "quote scrubbed_so2_model_averaged instead",
    "window": "label of the group of rows that share one magmatic source (window runs only)",
    "window_setting": "how the rows were grouped: option (the --window value: 1 = row by row, a time "
                      "span such as 30d, or column = the file's window column), mode, and span_days "
                      "(the length of each time span, days; null otherwise)",
    "windows": "each window: first_time and last_time (its first and last row, UTC), span_days (days "
               "from the first to the last row), n_rows, rows, source_check (the change-of-source "
               "check: run, not_run for fewer than 4 rows, failed), its Bayes factors and flags",
    "log10_bf_one_source": "log10 Bayes factor of one shared source against independent sources "
                           "for the rows of the window, each row with its own (below 0: flag mixed_sources)",
    "log10_bf_one_vs_split": "log10 Bayes factor of one source against a change of source inside "
                             "the window (below -2: flag mixed_sources, the window may span a change of magma)",
    "flags": "warnings on a row; their meanings are in flag_glossary",
    "p_magmatic_shift": "how far the data moved P(M0) from its prior value (posterior minus prior); "
                        "near 0 means the prior, not the data, sets P(M0) (flag near_prior)",
    "p_magmatic_shift_reference": "how far data simulated from the prior (one row each, the run's "
                                  "ratios and errors) move P(M0): its spread and mean |shift| with "
                                  "Monte Carlo errors; the yardstick for each row's p_magmatic_shift",
    "unresolved_direction": "the combination of parameters the data resolved least (leading axis of "
                            "the posterior correlation in prior-sd units), in words",
    "read_no_number": "present on an unexplained row: none of its numbers should be read",
    "seed": "random seed of the row or window (the same seed and inputs give the same numbers)",
    "magmatic_s_tpd": "sulfur leaving the magma, t of S per day (5/50/95 % quantiles)",
    "magmatic_so2_flux_tpd": "the same magmatic flux as t of SO2 per day (the SO2 equivalent, "
                             "twice the S mass)",
    "retained_s_tpd": "net sulfur kept below the surface, t of S per day; a negative value means "
                      "released (more S emitted than the magma gave off)",
    "budget_direction": "'retained', 'released' or 'not resolved' (the 5-95 % band of "
                        "retained_s_tpd spans zero)",
    "cumulative_retained_s_t": "running total of retained sulfur since the last restart, t of S; "
                               "negative: net release. Its band widens with time because every "
                               "row's uncertainty adds up, also through quiet periods",
    "budget_basis": "which measured flux the magmatic flux comes from (CO2 flux or SO2 flux)",
    "budget_gap_before": "1: the interval before this row is not in the running total (a gap "
                         "longer than max_gap_days, or a row without a budget)",
    "budget_restarted": "1: the running total restarts at this row because the rows before it "
                        "were in a window flagged mixed_sources (no shared source to integrate)",
    "prior_sensitivity": "how much the answer depends on the prior (from 'ventsource compare' on "
                         "the same data), or a note that it was not run",
}

WHAT_TO_DO = {
    "unexplained": "check the measurement and its errors; read no probability from the row",
    "p_magmatic_error_large": "rerun with more particles (--infer-option n_particles=...)",
    "rhat_high": "rerun with more particles or runs",
    "few_distinct_particles": "rerun with more particles",
    "mixed_sources": "shorten the window or split it with a window column; do not read the "
                     "change as scrubbing",
    "source_check_failed": "look at the window's rows by eye, or shorten the window",
    "source_check_not_run": "look at the window's rows by eye, or join it with a neighbouring "
                            "window of the same source (4 rows or more are checked)",
    "many_failed_states": "the prior puts most mass where no gas is released: narrow it",
    "m0_not_reproducing": "informative when another hypothesis reproduces the row (no "
                           "unexplained flag)",
    "m1_not_reproducing": "informative when another hypothesis reproduces the row (no "
                           "unexplained flag)",
    "m2_not_reproducing": "informative when another hypothesis reproduces the row (no "
                           "unexplained flag)",
}


def labelled_prior_probabilities(spec, pi0=None):
    """{"M0": p0, "M1": p1[, "M2": p2]} for the pi0 in effect (option, else the prior's)."""
    p_m0 = float(spec.p_magmatic if pi0 is None else pi0)
    release = getattr(spec, "release", None)
    probs = (p_m0, 1.0 - p_m0) if release is None else release.probabilities(p_m0)
    return {f"M{k}": float(p) for k, p in enumerate(probs)}


def hypotheses_for(spec):
    keys = ("M0", "M1", "M2") if getattr(spec, "release", None) is not None else ("M0", "M1")
    return {k: HYPOTHESES[k] for k in keys}


def fields_used(doc):
    """The glossary entries of the fields that appear in doc (top level and rows)."""
    names = set(doc)
    for row in doc.get("rows", []):
        names |= set(row)
    out = {}
    for key, text in FIELD_GLOSSARY.items():
        stem = key.lstrip("*")
        if key in names or (key.startswith("*") and any(n.endswith(stem) for n in names)) \
                or any(n == f"{key}_median" for n in names) or key in ("pi0", "hypotheses"):
            out[key] = text
    return out
