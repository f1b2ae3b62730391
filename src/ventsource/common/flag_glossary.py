"""Plain-language meaning of every flag a summary row can carry.

One dictionary, read by hazard.json and by the figures; docs/flags.md holds the
longer table (with what to do) and tests/test_readable.py checks that both
list the same codes.
"""

FLAG_GLOSSARY = {
    "unexplained": "Neither the purely magmatic model nor the scrubbing model reproduces "
                   "this measurement; read no probability from this row.",
    "m0_not_reproducing": "The purely magmatic model alone does not reproduce this measurement.",
    "m1_not_reproducing": "The scrubbing model alone does not reproduce this measurement.",
    "m2_not_reproducing": "The released-sulfur model alone does not reproduce this measurement.",
    "p_magmatic_error_large": "The Monte Carlo error of P(M0) is above 0.05; rerun with more "
                              "particles before quoting the number.",
    "rhat_high": "Independent sampler runs disagree (R-hat above its limit); rerun with more "
                 "particles or runs.",
    "few_distinct_particles": "Fewer than a quarter of the final samples are distinct; rerun "
                              "with more particles.",
    "many_failed_states": "More than half of the model evaluations released no gas or failed; "
                          "the prior may be too wide.",
    "sulfide_saturated": "Most posterior states hold a sulfide liquid: the melt's sulfur sits at "
                         "its sulfide saturation limit, so the bulk sulfur content is poorly "
                         "constrained by this gas.",
    "anhydrite_saturated": "Most posterior states hold anhydrite: the melt's sulfur sits at its "
                           "anhydrite saturation limit (a provisional law), so the bulk sulfur "
                           "content is poorly constrained by this gas.",
    "mixed_sources": "The rows of this window are better explained each by its own source, or "
                     "by one source before and another after a change inside the window, than "
                     "by one shared source: the window may span a change of magma.",
    "near_prior": "The data barely moved P(M0) from its prior, or the scrubbed fraction from its "
                  "prior spread: the row's numbers are mostly the prior's.",
    "source_check_failed": "The change-of-source check of this window could not be computed "
                           "(its SMC runs failed); the window's own results stand unchecked.",
    "source_check_not_run": "This window has too few rows (fewer than 4) for the check of a "
                            "change of source inside it, which was not run; with one row neither "
                            "source check applies. A change of magma inside the window would go "
                            "unnoticed.",
    "m1_not_converged": "The scrubbing model's MCMC chains did not reach their target.",
    "m0_not_converged": "The purely magmatic model's MCMC chains did not reach their target.",
    "m1_rhat_high": "The scrubbing model's MCMC chains disagree (R-hat above its limit).",
    "m1_bridge_not_converged": "The evidence estimate of the scrubbing model did not converge.",
    "m0_bridge_not_converged": "The evidence estimate of the purely magmatic model did not converge.",
    "m1_many_failed_states": "More than half of the scrubbing model's evaluations released no gas.",
    "m0_many_failed_states": "More than half of the purely magmatic model's evaluations released "
                             "no gas.",
    "m0_no_valid_state": "No state of the purely magmatic model released gas at these conditions.",
    "m2_not_converged": "The released-sulfur model's MCMC chains did not reach their target.",
    "m2_bridge_not_converged": "The evidence estimate of the released-sulfur model did not converge.",
    "m2_many_failed_states": "More than half of the released-sulfur model's evaluations released "
                             "no gas.",
    "m2_no_valid_state": "No state of the released-sulfur model released gas at these conditions.",
    "outside_calibration": "More than 10 % of this row's posterior lies outside the pressure or "
                           "temperature range a solubility law of the prior was calibrated for; "
                           "there the law extrapolates.",
}


def glossary_for(flag_lists):
    """{code: meaning} for every flag code used in flag_lists (unknown codes say so)."""
    used = sorted({f for flags in flag_lists for f in flags})
    return {f: FLAG_GLOSSARY.get(f, "No description recorded for this flag.") for f in used}
