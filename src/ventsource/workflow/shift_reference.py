"""How far data usually move P(M0): the reference for a row's own shift.

A row's shift P(M0 | data) - pi0 says little alone: 0.05 is a lot when data simulated
from the prior barely move P(M0) at all, and nothing when they usually move it by 0.4.
The reference is the spread of P(M0 | D) over data sets D simulated from the prior
predictive (truths from the prior, M0 with probability pi0, measured with the run's
ratios and median errors, each inverted like a row; the machinery of `ventsource plan`).
By the martingale property of posterior probabilities its mean is pi0 (up to Monte
Carlo error), so its spread is the natural yardstick (preposterior analysis; Raiffa
and Schlaifer 1961, Applied Statistical Decision Theory, ch. 4; from memory). Its
largest possible value, reached when every data set decides, is sqrt(pi0 (1 - pi0)).

A run computes it once, at the end (`--shift-reference N`), and keeps it in the
folder as shift_reference.json with the settings it was made with, so a resumed run
reuses it only when they agree.
"""
from __future__ import annotations

import json
import os

import numpy as np

from ventsource.workflow.shift_words import reference_words

REFERENCE_NAME = "shift_reference.json"
DEFAULT_PARTICLES = 150


def prior_predictive_shift(spec, ratio_names, rel_sigma, n_sim=16, seed=0, n_particles=DEFAULT_PARTICLES,
                           pi0=None):
    """Spread of P(M0 | D) and mean |P(M0 | D) - pi0| over n_sim prior-predictive data
    sets, each with its Monte Carlo error (sd / sqrt(n)); plain floats."""
    from ventsource.inference.likelihood import sigma_ln
    from ventsource.workflow.plan import _invert_one, _observed, simulate_truths
    pi0 = float(getattr(spec, "p_magmatic", 0.5) if pi0 is None else pi0)
    names = tuple(ratio_names)
    rel = np.broadcast_to(np.asarray(rel_sigma, dtype=float), (len(names),)).copy()
    _, is_m0, true = simulate_truths(spec, names, int(n_sim), pi0, seed)
    z = np.random.default_rng([int(seed), 0x5F1]).standard_normal(true.shape)
    inv_seeds = np.random.SeedSequence([int(seed), 0x5F2]).generate_state(int(n_sim))
    opts = {"n_particles": int(n_particles), "n_runs": 2, "pi0": pi0}
    p = np.full(int(n_sim), np.nan)
    for i in range(int(n_sim)):
        res = _invert_one(spec, names, _observed(np.log(true[i]), z[i], sigma_ln(rel), 1), rel,
                          int(inv_seeds[i]), opts)
        if res is not None and res.p_magmatic is not None:
            p[i] = float(res.p_magmatic)
    return _spread(p[np.isfinite(p)], pi0, is_m0[np.isfinite(p)])


def _spread(p, pi0, is_m0):
    n = int(p.size)
    if n < 2:
        return {"n_simulated": n, "pi0": pi0}
    shift = np.abs(p - pi0)
    sd = float(p.std(ddof=1))
    # the sd's own error from the delta method on the variance (normal-theory, common practice)
    return {"n_simulated": n, "pi0": pi0,
            "p_magmatic_mean": float(p.mean()), "p_magmatic_mean_mc_error": float(sd / np.sqrt(n)),
            "p_magmatic_sd": sd, "p_magmatic_sd_mc_error": float(sd / np.sqrt(2 * (n - 1))),
            "mean_abs_shift": float(shift.mean()),
            "mean_abs_shift_mc_error": float(shift.std(ddof=1) / np.sqrt(n)),
            "largest_possible_sd": float(np.sqrt(pi0 * (1 - pi0))),
            "brier_mean": float(np.mean((p - is_m0) ** 2))}


def checked_count(n, name="shift_reference"):
    """n as an int: 0 (not run) or 2 to 1000 data sets; else one InputError line."""
    from ventsource.common.errors import InputError
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or not (n == 0 or 2 <= n <= 1000):
        raise InputError(f"{name} {n!r}: give 0 (not run) or a whole number of data sets from 2 to 1000")
    return int(n)


def run_reference(out_dir, spec, series, settings, n_sim):
    """The run's reference (None when n_sim is 0): read from the folder when it was made
    with these settings, else computed and written atomically."""
    if not n_sim:
        return None
    sig = np.nanmedian(np.asarray(series.measurements.sigmas, dtype=float), axis=0)
    key = {"prior_sha256": settings.get("prior_sha256"), "seed": int(settings["seed"]),
           "ratios": list(series.ratio_names), "relative_sigma": [round(float(s), 6) for s in sig],
           "pi0": (settings.get("options") or {}).get("pi0"), "n_simulated": int(n_sim),
           "n_particles": DEFAULT_PARTICLES}
    path = os.path.join(out_dir, REFERENCE_NAME)
    if os.path.exists(path):
        with open(path) as fh:
            old = json.load(fh)
        if old.get("settings") == key:
            return old["reference"]
    ref = prior_predictive_shift(spec, series.ratio_names, sig, n_sim=n_sim, seed=settings["seed"],
                                 pi0=key["pi0"])
    from ventsource.workflow.run_folder import write_text_json
    write_text_json(path, {"settings": key, "reference": ref})
    return ref


def reference_entry(ref):
    """The hazard.json entry: the numbers (rounded as the probabilities there) or a note."""
    if not ref or "p_magmatic_sd" not in ref:
        return {"note": "not run: add --shift-reference 16 (ventsource run) to learn how far data "
                        "simulated from the prior move P(M0)"}
    from ventsource.workflow.hazard_format import round_probability
    out = {"n_simulated": ref["n_simulated"], "pi0": ref["pi0"]}
    for k in ("p_magmatic_mean", "p_magmatic_sd", "mean_abs_shift"):  # hazard_format's rule
        out[k], out[f"{k}_mc_error"] = round_probability(ref[k], ref[f"{k}_mc_error"])
    out["largest_possible_sd"] = round(ref["largest_possible_sd"], 3)
    out["meaning"] = reference_words(ref)
    return out
