"""hazard.json of a series run: per-row probabilities with their provenance (input and
prior checksums, seeds, options in effect), rounded by hazard_format's rule, with the
meaning of every flag that occurs.
"""
from ventsource.common.caution import CAUTION
from ventsource.inference.priors.hypotheses import prior_model_probabilities
from ventsource.workflow.run_folder import file_sha256


def hazard_document(series, spec, prior_path, rows, seed, options, model_note=None, sigma=None,
                    out_dir=None, synthetic_data=False, window_per_row=None):
    """Plain dict for elicitation panels: per-row probability with provenance.

    window_per_row: the window model's per-row parameters (None: rows inverted one by one).

    Paths are relative to the run folder; numbers are rounded by hazard_format's rule."""
    from ventsource import __version__
    from ventsource.common.flag_glossary import glossary_for
    from ventsource.inference.row.one_measurement import _DEFAULTS
    from ventsource.workflow.hazard_format import ROUNDING_RULE, relative_path
    effective = dict(_DEFAULTS, epsilon=float(getattr(spec, "epsilon", 0.05)), **options)
    flag_lists = [[f for f in (r.get("flags") or "").split(";") if f] for r in rows]
    return {
        "what": "P(M0 | data): posterior probability that the gas is purely magmatic "
                "(no SO2 scrubbed), per measurement, under the model and prior below",
        "caution": CAUTION,
        "synthetic": bool(getattr(spec, "fictional", False) or synthetic_data),
        "package": "ventsource", "package_version": __version__,
        "input_file": relative_path(series.path, out_dir), "input_sha256": file_sha256(series.path),
        "run_seed": int(seed), "row_seed_rule": "sha256('RUNSEED:ID'), first 8 bytes little-endian mod 2^63-1",
        "priors": [{"file": relative_path(prior_path, out_dir), "sha256": file_sha256(prior_path),
                    "name": spec.name, "fictional": bool(getattr(spec, "fictional", False)),
                    "models": dict(spec.models), "p_magmatic_prior": prior_model_probabilities(spec)[0],
                    "prior_model_probabilities": list(prior_model_probabilities(spec)),
                    "epsilon": float(getattr(spec, "epsilon", 0.05)),
                    "likelihood": dict(spec.likelihood), "free_parameters": list(spec.free_names)}],
        "inference_options": options,
        "inference_options_in_effect": {k: v for k, v in effective.items() if not callable(v)},
        "default_relative_sigma": sigma if sigma is not None else getattr(series, "default_sigma", None),
        "window_per_row": window_per_row,
        "note": model_note or "",
        "rounding": ROUNDING_RULE,
        "flag_glossary": glossary_for(flag_lists),
        "rows": [_hazard_row(r, flags) for r, flags in zip(rows, flag_lists)],
    }


def _hazard_row(r, flags):
    from ventsource.workflow.hazard_format import round_fraction, round_probability
    p, p_err = round_probability(r.get("p_magmatic"), r.get("p_magmatic_error"))
    pb, pb_err = round_probability(r.get("p_scrubbed_below_epsilon"), r.get("p_scrubbed_below_epsilon_error"))
    return {"id": r["id"], "time": r["time"], "p_magmatic": p, "p_magmatic_error": p_err,
            "p_scrubbed_below_epsilon": pb, "p_scrubbed_below_epsilon_error": pb_err,
            "scrubbed_so2_model_averaged": {q: round_fraction(r.get(f"scrubbed_so2_avg_{q}"))
                                            for q in ("q05", "median", "q95")},
            "window": r.get("window"), "log10_bf_one_source": r.get("log10_bf_one_source"),
            "log10_bf_one_vs_split": r.get("log10_bf_one_vs_split"),
            "flags": flags, "seed": r.get("seed"),
            "p_magmatic_shift": _rounded(r.get("p_magmatic_shift")),
            "unresolved_direction": r.get("unresolved_direction")}


def _rounded(v):
    return None if v is None else round(float(v), 3)
