"""The columns of summary.csv: one list for row-by-row and window runs.

Each name means one thing in both (docs/outputs.md lists them): a column that does not
apply to a run is present and empty, so a script reads either table. Per parameter:
`NAME_avg_*` is the posterior averaged over the hypotheses (row by row: M0 and M1 draws
mixed by P(M0), inference/row/averaged.py; in a window: the window's shared posterior,
whose rows' hypotheses are integrated out, repeated on each of its rows, or the row's own
model-averaged draws for a per-row parameter), `NAME_if_scrubbed_*` the posterior under
M1 (row by row every parameter from the M1 runs; in a window every parameter from the
window's draws in which that row is M1, workflow/window_if_scrubbed.py), `NAME_rhat` and
`NAME_ess_bulk` the convergence of the sampler runs that drew NAME (row by row: the M1
runs; in a window: the shared parameters across the window's runs; empty for what a
window integrates out), `NAME_contraction` 1 - var_post/var_prior under M1 (both: of the
draws `NAME_if_scrubbed_*` is taken from), `p_scrubbed_below_epsilon` P(s < epsilon | M1)
(the same draws).
"""
QUANTILES = ("q05", "median", "q95")
WINDOW_COLUMNS = ["window", "window_first_time", "window_last_time", "window_span_days",
                  "window_n_rows", "source_check", "log10_bf_one_source", "log10_bf_one_vs_split",
                  "log10_bf_one_vs_split_error"]
# names of before (version 0.3.0 and earlier) -> names now; docs/outputs.md keeps the list
RENAMED = {"row by row": "NAME_median/q05/q95 -> NAME_if_scrubbed_median/q05/q95 "
                         "(scrubbed_so2_median -> scrubbed_so2_if_scrubbed_median)",
           "windows": "pressure_bar_q05/median/q95 -> pressure_bar_avg_q05/median/q95"}


def quantile_columns(tag):
    return [f"{tag}_{q}" for q in QUANTILES]


def summary_columns(free_names, ratio_names):
    """Every column of summary.csv, row-by-row and window runs alike (the prior's free
    parameters and the file's ratios decide the list; the hypotheses and sulfur budget
    columns follow, hypothesis_rows.extra_columns)."""
    cols = ["id", "time", "p_magmatic", "p_magmatic_error", "p_scrubbed_below_epsilon",
            "p_scrubbed_below_epsilon_error", "flags", "seed"] + WINDOW_COLUMNS
    cols += quantile_columns("scrubbed_so2_avg") + quantile_columns("scrubbed_so2_if_scrubbed")
    for name in free_names:
        if name != "scrubbed_so2":
            cols += quantile_columns(f"{name}_avg") + quantile_columns(f"{name}_if_scrubbed")
        cols += [f"{name}_rhat", f"{name}_ess_bulk", f"{name}_contraction"]
    cols += ["p_magmatic_shift", "unresolved_direction"]  # how much the data said
    for r in ratio_names:  # posterior predictive of each measured ratio (for the figures)
        cols += [f"pp {r}_q05", f"pp {r}_median", f"pp {r}_q95"]
    return cols


def complete(row, cols):
    """row with every column of cols present (None where it does not apply): --resume
    then knows a summary written under other column names (and inverts that row again)."""
    return {**{c: None for c in cols}, **row}


def has_columns(row, cols):
    """Every column but the posterior-predictive ones (those follow the row's own ratios)."""
    return all(c in row for c in cols if not c.startswith("pp "))
