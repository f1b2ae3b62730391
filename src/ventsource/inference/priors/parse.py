"""parse_prior: validate a prior read into a dict, one function per table.

The tables are read in a fixed order (top level, metadata, models,
parameters, melt, likelihood, magmatic, hypotheses, window) so the first problem reported for a
file does not depend on how it was split: models come before parameters
because some parameters depend on the model choices.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

from ventsource.inference.priors.distributions import Distribution
from ventsource.inference.priors.fields import (
    PriorFileError, fmt_number, key_error, read_boolean, read_number, read_string, read_table,
    reject_unknown_keys, type_name,
)
from ventsource.inference.priors.parameter_table import check_physical_range, parse_distribution
from ventsource.inference.priors.schema import (
    DEFAULT_DOF, DEFAULT_EPSILON, DEFAULT_P_MAGMATIC, DEFAULT_RELATIVE_SIGMA, LIKELIHOOD_KINDS,
    MAX_RELATIVE_SIGMA, METADATA_KEYS, MODEL_CHOICES, MODEL_CITATIONS, OPTIONAL_MODEL_DEFAULTS,
    OPTIONAL_OXIDES, OPTIONAL_PARAMETERS,
    OXIDE_TOTAL_RANGE, POWER_LAW_KEYS, REQUIRED_OXIDES, REQUIRED_PARAMETERS, SCHEMA_VERSION,
    SULFIDE_CAPACITY_KEYS, TOP_KEYS, canonical_model_choice,
)
from ventsource.inference.priors.hypotheses import parse_hypotheses
from ventsource.inference.priors.spec import PriorSpec
from ventsource.inference.priors.window_table import parse_window


def parse_prior(data: Mapping, file: str = "<prior>") -> PriorSpec:
    """Validate a prior already read into a dict (e.g. from ``tomllib``) and build a PriorSpec.

    ``file`` is used only in error messages and as ``spec.path``.
    """
    file = str(file)
    _check_top_level(file, data)
    metadata = _parse_metadata(file, data)
    models = _parse_models(file, data)
    dists, sources, descriptions = _parse_parameters(file, data, models)
    melt, melt_source = _parse_melt(file, data)
    likelihood = _parse_likelihood(file, data)
    p_mag, eps, mag_source = _parse_magmatic(file, data)
    release = parse_hypotheses(file, data)
    window = parse_window(file, data, dists)
    return PriorSpec(
        path=file,
        metadata=metadata,
        distributions=dists,
        sources=sources,
        descriptions=descriptions,
        melt_oxides_wt=melt,
        melt_source=melt_source,
        models=models,
        likelihood=likelihood,
        p_magmatic=p_mag,
        epsilon=eps,
        magmatic_source=mag_source,
        release=release,
        window=window,
    )


def _check_top_level(file: str, data: Mapping) -> None:
    """A table of known tables, and a schema version this package reads."""
    if not isinstance(data, Mapping):
        raise PriorFileError(f"{file}: key '(top level)': must be a table, got {type_name(data)}")
    reject_unknown_keys(file, data, TOP_KEYS, "")
    if "schema_version" in data:
        ver = data["schema_version"]
        if isinstance(ver, bool) or not isinstance(ver, int):
            raise key_error(file, "schema_version", f"must be an integer, got {type_name(ver)} {ver!r}")
        if ver != SCHEMA_VERSION:
            raise key_error(file, "schema_version",
                            f"unsupported version {ver} (this package reads {SCHEMA_VERSION})")


def _parse_metadata(file: str, data: Mapping) -> dict:
    """[metadata]: name, description, citation (required), fictional, notes."""
    meta_t = read_table(file, data, "metadata", "metadata", True)
    reject_unknown_keys(file, meta_t, tuple(METADATA_KEYS), "metadata")
    metadata = {}
    for key, req in METADATA_KEYS.items():
        if key == "fictional":
            metadata[key] = read_boolean(file, meta_t, key, f"metadata.{key}", False)
        else:
            val = read_string(file, meta_t, key, f"metadata.{key}", req)
            if val is not None:
                metadata[key] = val
    return metadata


def _parse_models(file: str, data: Mapping) -> dict:
    """[models]: one choice per model, plus the constants some choices need."""
    models_t = read_table(file, data, "models", "models", True)
    reject_unknown_keys(file, models_t, tuple(MODEL_CHOICES) + POWER_LAW_KEYS + SULFIDE_CAPACITY_KEYS,
                        "models")
    models = {}
    for key, choices in MODEL_CHOICES.items():
        text = read_string(file, models_t, key, f"models.{key}", key not in OPTIONAL_MODEL_DEFAULTS,
                           OPTIONAL_MODEL_DEFAULTS.get(key))
        val = canonical_model_choice(key, text)
        if val is None:
            cited = MODEL_CITATIONS.get(key, {})
            allowed = ", ".join(f"{c} ({cited[c]!r})" if c in cited else c for c in choices)
            raise key_error(file, f"models.{key}", f"unknown model {text!r} (allowed: {allowed})")
        models[key] = val
    # power-law H2O solubility, wt% = k * fH2O^n: its constants live beside the choice
    for key in POWER_LAW_KEYS:
        if models["h2o_solubility"] == "power_law":
            val = read_number(file, models_t, key, f"models.{key}", True)
            if not (val > 0 and math.isfinite(val)) or (key.endswith("exponent") and val > 1.5):
                raise key_error(file, f"models.{key}", f"must be positive (exponent at most 1.5), got {val}")
            models[key] = float(val)
        elif key in models_t:
            raise key_error(file, f"models.{key}", "only allowed with h2o_solubility = \"power_law\"")
    # sulfide capacity, ln C_S = A + B/T(K), C_S in wt% S per (fS2/fO2)^0.5
    for key in SULFIDE_CAPACITY_KEYS:
        if models["sulfur"] == "sulfide_capacity":
            val = read_number(file, models_t, key, f"models.{key}", True)
            models[key] = float(val)
        elif key in models_t:
            raise key_error(file, f"models.{key}", "only allowed with sulfur = \"sulfide_capacity\"")
    return models


def _parse_parameters(file: str, data: Mapping, models: Mapping) -> tuple[dict, dict, dict]:
    """[parameters.<name>]: (distributions, sources, descriptions) by parameter name."""
    params_t = read_table(file, data, "parameters", "parameters", True)
    allowed_params = REQUIRED_PARAMETERS + OPTIONAL_PARAMETERS
    dists: dict[str, Distribution] = {}
    sources: dict[str, str] = {}
    descriptions: dict[str, str] = {}
    for name, table in params_t.items():
        if name not in allowed_params:
            raise key_error(file, f"parameters.{name}",
                            f"unknown parameter (allowed: {', '.join(allowed_params)})")
        if not isinstance(table, dict):
            raise key_error(file, f"parameters.{name}", f"must be a table, got {type_name(table)}")
        dist, source, description = parse_distribution(file, name, table)
        check_physical_range(file, name, dist)
        dists[name] = dist
        sources[name] = source
        if description is not None:
            descriptions[name] = description
    for name in REQUIRED_PARAMETERS:
        if name not in dists:
            raise key_error(file, f"parameters.{name}", "missing required parameter")
    _check_parameters_match_models(file, dists, models)
    return dists, sources, descriptions


def _check_parameters_match_models(file: str, dists: Mapping, models: Mapping) -> None:
    """s_partition only with the partition sulfur model, h2s_return only with H2S made."""
    if models["sulfur"] == "partition" and "s_partition" not in dists:
        raise key_error(file, "parameters.s_partition",
                        "missing: required when models.sulfur = 'partition'")
    if models["sulfur"] != "partition" and "s_partition" in dists:
        raise key_error(file, "parameters.s_partition",
                        f"only used when models.sulfur = 'partition', not {models['sulfur']!r}")
    if models["scrubbing_product"] == "loss" and "h2s_return" in dists:
        raise key_error(file, "parameters.h2s_return",
                        "only used when models.scrubbing_product makes H2S ('h2s_sulfate'), not 'loss'")
    if models["scrubbing_product"] == "sulfur_sulfate" and "h2s_return" in dists:
        raise key_error(file, "parameters.h2s_return",
                        "only used when models.scrubbing_product makes H2S ('h2s_sulfate'), "
                        "not 'sulfur_sulfate'")


def _parse_melt(file: str, data: Mapping) -> tuple[dict[str, float], str]:
    """[melt]: oxide wt% (required and optional oxides) and their source."""
    melt_t = read_table(file, data, "melt", "melt", True)
    reject_unknown_keys(file, melt_t, REQUIRED_OXIDES + OPTIONAL_OXIDES + ("source",), "melt")
    melt_source = read_string(file, melt_t, "source", "melt.source", True)
    melt: dict[str, float] = {}
    for ox in REQUIRED_OXIDES + OPTIONAL_OXIDES:
        val = read_number(file, melt_t, ox, f"melt.{ox}", ox in REQUIRED_OXIDES)
        if val is None:
            continue
        if val < 0.0 or val > 100.0:
            raise key_error(file, f"melt.{ox}", f"{fmt_number(val)} wt% is outside [0, 100]")
        melt[ox] = val
    if not melt["SiO2"] > 0.0:
        raise key_error(file, "melt.SiO2", "must be > 0")
    total = sum(melt.values())
    if not OXIDE_TOTAL_RANGE[0] <= total <= OXIDE_TOTAL_RANGE[1]:
        raise key_error(file, "melt", f"oxide total {total:.2f} wt% is outside "
                                      f"[{fmt_number(OXIDE_TOTAL_RANGE[0])}, {fmt_number(OXIDE_TOTAL_RANGE[1])}]")
    return melt, melt_source


def _parse_likelihood(file: str, data: Mapping) -> dict[str, Any]:
    """[likelihood] (optional table, defaults documented): kind, relative_sigma, dof."""
    lik_t = read_table(file, data, "likelihood", "likelihood", False) or {}
    reject_unknown_keys(file, lik_t, ("kind", "relative_sigma", "dof", "source"), "likelihood")
    kind = read_string(file, lik_t, "kind", "likelihood.kind", False, "normal")
    if kind not in LIKELIHOOD_KINDS:
        raise key_error(file, "likelihood.kind",
                        f"unknown likelihood {kind!r} (allowed: {', '.join(LIKELIHOOD_KINDS)})")
    sigma = read_number(file, lik_t, "relative_sigma", "likelihood.relative_sigma", False,
                        DEFAULT_RELATIVE_SIGMA)
    if not 0.0 < sigma <= MAX_RELATIVE_SIGMA:
        raise key_error(file, "likelihood.relative_sigma",
                        f"{fmt_number(sigma)} is outside (0, {fmt_number(MAX_RELATIVE_SIGMA)}]")
    likelihood: dict[str, Any] = {"kind": kind, "relative_sigma": sigma}
    if kind == "student_t":
        dof = read_number(file, lik_t, "dof", "likelihood.dof", False, DEFAULT_DOF)
        if not dof > 0.0:
            raise key_error(file, "likelihood.dof", f"must be > 0, got {fmt_number(dof)}")
        likelihood["dof"] = dof
    elif "dof" in lik_t:
        raise key_error(file, "likelihood.dof", "only used when likelihood.kind = 'student_t'")
    lik_source = read_string(file, lik_t, "source", "likelihood.source", False)
    if lik_source is not None:
        likelihood["source"] = lik_source
    return likelihood


def _parse_magmatic(file: str, data: Mapping) -> tuple[float, float, str | None]:
    """[magmatic] (optional table, defaults documented): (p_magmatic, epsilon, source)."""
    mag_t = read_table(file, data, "magmatic", "magmatic", False) or {}
    reject_unknown_keys(file, mag_t, ("p_magmatic", "epsilon", "source"), "magmatic")
    p_mag = read_number(file, mag_t, "p_magmatic", "magmatic.p_magmatic", False, DEFAULT_P_MAGMATIC)
    if not 0.0 < p_mag < 1.0:
        raise key_error(file, "magmatic.p_magmatic",
                        f"must be strictly between 0 and 1, got {fmt_number(p_mag)}")
    eps = read_number(file, mag_t, "epsilon", "magmatic.epsilon", False, DEFAULT_EPSILON)
    if not 0.0 < eps < 1.0:
        raise key_error(file, "magmatic.epsilon", f"must be strictly between 0 and 1, got {fmt_number(eps)}")
    mag_source = read_string(file, mag_t, "source", "magmatic.source", False)
    return p_mag, eps, mag_source
