"""hazard.json of a series run, readable top-down: what was asked, the hypotheses and their
labelled prior probabilities, the caution, the windows, the rows (probabilities rounded by
hazard_format's rule, each with its text form), then provenance (input and prior checksums,
seeds, options in effect), the meaning of every flag that occurs and of every field.
"""
from ventsource.common.caution import CAUTION
from ventsource.inference.priors.hypotheses import prior_model_probabilities
from ventsource.workflow.run_folder import file_sha256

# top-down order of hazard.json (keys not named here follow at the end)
KEY_ORDER = ("what", "caution", "synthetic", "hypotheses", "prior_model_probabilities", "pi0",
             "rounding", "prior_sensitivity", "window_setting", "p_magmatic_shift_reference", "windows",
             "rows", "sulfur_budget", "flag_glossary",
             "field_glossary", "note")


def hazard_document(series, spec, prior_path, rows, seed, options, model_note=None, sigma=None,
                    out_dir=None, synthetic_data=False, window_per_row=None, window="unset"):
    """Plain dict for elicitation panels: per-row probability with provenance.

    window_per_row: the window model's per-row parameters (None: rows inverted one by one);
    window: the run's window setting (None, "rows", "column" or a span in seconds).

    Paths are relative to the run folder; numbers are rounded by hazard_format's rule."""
    from ventsource import __version__
    from ventsource.common.flag_glossary import glossary_for
    from ventsource.inference.row.one_measurement import _DEFAULTS
    from ventsource.workflow.hazard_format import ROUNDING_RULE, relative_path
    from ventsource.workflow.hazard_text import hypotheses_for, labelled_prior_probabilities
    pi0 = (options or {}).get("pi0")
    pi0 = float(spec.p_magmatic) if pi0 is None else float(pi0)
    labelled = labelled_prior_probabilities(spec, pi0)
    effective = dict(_DEFAULTS, epsilon=float(getattr(spec, "epsilon", 0.05)), **options)
    effective["pi0"] = pi0  # the value used (option, else the prior's p_magmatic), never null
    flag_lists = [[f for f in (r.get("flags") or "").split(";") if f] for r in rows]
    return {
        "what": "For each measurement (and each window of measurements sharing one source): the "
                "probability of each hypothesis below given the data, under the model and prior "
                "below. P(M0) is the probability that the gas is purely magmatic.",
        "caution": CAUTION,
        "synthetic": bool(getattr(spec, "fictional", False) or synthetic_data),
        "hypotheses": hypotheses_for(spec),
        "prior_model_probabilities": labelled,
        "pi0": {"value": pi0, "source": "inference option pi0" if (options or {}).get("pi0") is not None
                else "prior file ([magmatic] p_magmatic)",
                "meaning": "prior probability of M0 relative to M1, M0 / (M0 + M1)"},
        "rounding": ROUNDING_RULE,
        "prior_sensitivity": {"note": "not run: 'ventsource compare' inverts the same data under "
                                      "other priors and shows how much each probability moves"},
        "window_setting": window_setting(window, getattr(series, "windows", None) is not None),
        "windows": window_spans(rows, flag_lists),
        "rows": [_hazard_row(r, flags) for r, flags in zip(rows, flag_lists)],
        "flag_glossary": glossary_for(flag_lists),
        "note": model_note or "",
        "package": "ventsource", "package_version": __version__,
        "input_file": relative_path(series.path, out_dir), "input_sha256": file_sha256(series.path),
        "run_seed": int(seed), "row_seed_rule": "sha256('RUNSEED:ID'), first 8 bytes little-endian mod 2^63-1",
        "priors": [{"file": relative_path(prior_path, out_dir), "sha256": file_sha256(prior_path),
                    "name": spec.name, "fictional": bool(getattr(spec, "fictional", False)),
                    "models": dict(spec.models), "p_magmatic_prior": labelled["M0"],
                    "prior_model_probabilities": list(prior_model_probabilities(spec)),
                    "epsilon": float(getattr(spec, "epsilon", 0.05)),
                    "likelihood": dict(spec.likelihood), "free_parameters": list(spec.free_names)}],
        "inference_options": options,
        "inference_options_in_effect": {k: v for k, v in effective.items() if not callable(v)},
        "default_relative_sigma": sigma if sigma is not None else getattr(series, "default_sigma", None),
        "window_per_row": window_per_row,
    }


_UNIT_S = (("w", 7 * 86400), ("d", 86400), ("h", 3600), ("min", 60), ("s", 1))
WINDOW_FLAGS = {"mixed_sources", "source_check_failed", "source_check_not_run"}


def window_setting(window, has_column):
    """How the run grouped its rows: the --window setting and, for a time span, its length."""
    if window == "unset":
        return None
    if window == "rows" or (window is None and not has_column):
        return {"option": "1", "mode": "row by row", "span_days": None}
    if window == "column" or window is None:
        return {"option": "column", "mode": "the measurement file's window column", "span_days": None}
    if window == "auto":
        return {"option": "auto", "mode": "segments the data choose (Bayesian change points)",
                "span_days": None}
    seconds = float(window)
    unit, size = next((u, n) for u, n in _UNIT_S if seconds % n == 0 or n == 1)
    return {"option": f"{seconds / size:g}{unit}", "mode": "consecutive time spans from the first row",
            "span_days": seconds / 86400.0}


def window_spans(rows, flag_lists):
    """One entry per window (first row order): first and last row time, time from first to
    last row (days), rows and their number, the change-of-source check's state, Bayes
    factors (1 decimal), window flags."""
    from ventsource.workflow.hazard_format import round_log10_bf
    spans = {}
    for r, flags in zip(rows, flag_lists):
        label = r.get("window")
        if label is None:
            continue
        w = spans.setdefault(label, {"window": label, "first_time": r["time"], "last_time": r["time"],
                                     "span_days": None, "n_rows": 0, "rows": [],
                                     "source_check": r.get("source_check"),
                                     "log10_bf_one_source": round_log10_bf(r.get("log10_bf_one_source")),
                                     "log10_bf_one_vs_split": round_log10_bf(r.get("log10_bf_one_vs_split")),
                                     "flags": []})
        w["rows"].append(r["id"])
        w["n_rows"] = len(w["rows"])
        w["first_time"], w["last_time"] = min(w["first_time"], r["time"]), max(w["last_time"], r["time"])
        w["span_days"] = _days_between(w["first_time"], w["last_time"])
        w["flags"] = sorted(set(w["flags"]) | (WINDOW_FLAGS & set(flags)))
    return list(spans.values())


def _days_between(first, last):
    import numpy as np
    t0, t1 = (np.datetime64(x.rstrip("Z"), "s") for x in (first, last))
    return round(float((t1 - t0).astype(np.int64)) / 86400.0, 6)


def _hazard_row(r, flags):
    from ventsource.workflow.hazard_format import probability_text, round_fraction, round_probability
    p, p_err = round_probability(r.get("p_magmatic"), r.get("p_magmatic_error"))
    pb, pb_err = round_probability(r.get("p_scrubbed_below_epsilon"), r.get("p_scrubbed_below_epsilon_error"))
    out = {"id": r["id"], "time": r["time"], "window": r.get("window"),
           "p_magmatic": p, "p_magmatic_error": p_err,
           "p_magmatic_text": probability_text(r.get("p_magmatic"), r.get("p_magmatic_error"))}
    if "p_scrubbed_below_epsilon" in r:  # row by row and window rows (workflow/window_if_scrubbed.py)
        out.update({"p_scrubbed_below_epsilon_if_scrubbed": pb,
                    "p_scrubbed_below_epsilon_if_scrubbed_error": pb_err})
    out["scrubbed_so2_model_averaged"] = {q: round_fraction(r.get(f"scrubbed_so2_avg_{q}"))
                                          for q in ("q05", "median", "q95")}
    out["scrubbed_so2_if_scrubbed"] = {q: round_fraction(r.get(f"scrubbed_so2_if_scrubbed_{q}"))
                                       for q in ("q05", "median", "q95")}
    out.update({"flags": flags, "seed": r.get("seed"),
                "p_magmatic_shift": _rounded(r.get("p_magmatic_shift")),  # how much the data said
                "unresolved_direction": r.get("unresolved_direction")})
    if "unexplained" in flags:  # the numbers above come from models that fail this row
        out["read_no_number"] = ("unexplained: no hypothesis reproduces this measurement; its "
                                 "probabilities and scrubbed fraction mean nothing")
    return out


def _rounded(v):
    return None if v in (None, "") else round(float(v), 3)


def ordered(doc):
    """doc with its keys in KEY_ORDER (then the rest) and the glossary of the fields it uses."""
    from ventsource.workflow.hazard_text import fields_used
    doc = dict(doc, field_glossary=fields_used(doc))
    head = [k for k in KEY_ORDER if k in doc]
    return {k: doc[k] for k in head + [k for k in doc if k not in head]}
