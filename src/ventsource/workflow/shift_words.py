"""The words for how far data usually move P(M0) (workflow/shift_reference.py), apart
from its simulation so that the table notes can use them without the planner."""
from __future__ import annotations


def reference_words(ref):
    """One line for README.txt: how far prior-predictive data move P(M0)."""
    if not ref or "p_magmatic_sd" not in ref:
        return None
    return (f"Data simulated from the prior (one row each, {ref['n_simulated']} data sets with this "
            f"run's ratios and errors) move P(M0) from its prior by {ref['mean_abs_shift']:.2f} +- "
            f"{ref['mean_abs_shift_mc_error']:.2f} on average (sd of P(M0) {ref['p_magmatic_sd']:.2f}"
            f" +- {ref['p_magmatic_sd_mc_error']:.2f}; at most {ref['largest_possible_sd']:.2f} when "
            f"every data set decides): a row's shift far below this is the prior talking.")


def row_shift_ratio(shift, ref):
    """|shift| over the reference's mean |shift| (None without a reference)."""
    if shift is None or not ref or not ref.get("mean_abs_shift"):
        return None
    return float(abs(shift) / ref["mean_abs_shift"])
