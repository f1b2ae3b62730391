"""Prior files: load, validate and use the TOML prior of one volcano or magma type.

A prior file holds, for one volcano or magma type, the prior distribution of
every forward-model parameter (each range with a ``source`` saying where it
comes from), the melt composition, the model choices, the prior probability
that a measurement is purely magmatic, and the likelihood settings. The format
is documented field by field in the README (section "Prior files").

    spec = load_prior_file("priors/arc_basalt.toml")
    theta = spec.sample(np.random.default_rng(1), 1000)    # (n, len(free_names))
    lp = spec.log_prob(theta)                              # (n,)
    full = spec.full(theta)                                # (n, len(parameter_names))
    m0 = spec.with_fixed("scrubbed_so2", 0.0)              # no-scrubbing model

Every problem in a file raises :class:`PriorFileError` with a one-line message
``"FILE: key 'table.key': what is wrong"``; a TOML syntax error names the line
and column instead of a key, a missing file says so.
"""
from __future__ import annotations

import copy
import math
import os
import re
import tomllib
from typing import Any, Mapping

import numpy as np

from ventsource.inference.priors.distributions import Beta, Distribution, Fixed, LogUniform, TruncNormal, Uniform

__all__ = [
    "PriorFileError",
    "PriorSpec",
    "load_prior_file",
    "parse_prior",
    "REQUIRED_PARAMETERS",
    "OPTIONAL_PARAMETERS",
    "PHYSICAL_LIMITS",
    "REQUIRED_OXIDES",
    "OPTIONAL_OXIDES",
    "MODEL_CHOICES",
    "DISTRIBUTIONS",
]

SCHEMA_VERSION = 1

REQUIRED_PARAMETERS = (
    "pressure_bar", "temperature_c", "dfmq", "scrubbed_so2", "h2o_wt", "co2_ppm", "s_ppm",
)
OPTIONAL_PARAMETERS = ("s_partition", "scrubbed_h2s", "h2s_return", "exsolved_gas_wt")

# Physical limits: (lower, upper, lower_open, upper_open). A prior's whole
# support must lie inside. Pressure, temperature and dFMQ limits are the
# package's validity box (what the forward model is built for); fractions are
# fractions; contents are positive and below 100 wt% / 1e6 ppm.
PHYSICAL_LIMITS: dict[str, tuple[float, float, bool, bool]] = {
    "pressure_bar": (1.0, 5000.0, False, False),
    "temperature_c": (600.0, 1300.0, False, False),
    "dfmq": (-4.0, 4.0, False, False),
    "scrubbed_so2": (0.0, 1.0, False, False),
    "h2o_wt": (0.0, 100.0, True, True),
    "co2_ppm": (0.0, 1.0e6, True, True),
    "s_ppm": (0.0, 1.0e6, True, True),
    "s_partition": (0.0, math.inf, True, True),
    "scrubbed_h2s": (0.0, 1.0, False, False),
    "h2s_return": (0.0, 1.0, False, False),
    "exsolved_gas_wt": (0.0, 100.0, False, True),
}

REQUIRED_OXIDES = ("SiO2", "TiO2", "Al2O3", "FeOt", "MgO", "CaO", "Na2O", "K2O")
OPTIONAL_OXIDES = ("MnO", "P2O5", "Cr2O3", "NiO")
# Anhydrous oxide total accepted (wt%); analyses usually close near 100
# (common practice, no source); outside this window the composition is
# probably mistyped.
OXIDE_TOTAL_RANGE = (95.0, 102.0)

MODEL_CHOICES: dict[str, tuple[str, ...]] = {
    "h2o_solubility": ("power_law", "liu2005", "moore1998"),
    "co2_solubility": ("shishkina2014", "liu2005"),
    "sulfur": ("partition", "sulfide_capacity"),
    "degassing": ("closed", "open"),
    "scrubbing_product": ("loss", "h2s_sulfate", "sulfur_sulfate"),
    "eos": ("real", "ideal"),
}

POWER_LAW_KEYS = ("h2o_power_coefficient", "h2o_power_exponent")
SULFIDE_CAPACITY_KEYS = ("sulfide_capacity_ln_a", "sulfide_capacity_b_k")

# distribution -> (required keys, optional keys) besides "distribution"/"source"/"description"
DISTRIBUTIONS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "uniform": (("min", "max"), ()),
    "loguniform": (("min", "max"), ()),
    "normal": (("mean", "sd"), ("min", "max")),
    "truncnormal": (("mean", "sd", "min", "max"), ()),
    "beta": (("a", "b"), ("min", "max")),
    "fixed": (("value",), ()),
}

DEFAULT_P_MAGMATIC = 0.5
DEFAULT_EPSILON = 0.05
# In-plume sensor ratios carry roughly 10-20 % relative uncertainty
# (common practice, no source); 0.15 is the middle of that band.
DEFAULT_RELATIVE_SIGMA = 0.15
DEFAULT_DOF = 4.0  # heavy but finite-variance tails (common practice, no source)
LIKELIHOOD_KINDS = ("normal", "student_t")
MAX_RELATIVE_SIGMA = 5.0

_TOP_KEYS = ("schema_version", "metadata", "parameters", "melt", "models", "likelihood", "magmatic")
_METADATA_KEYS = {"name": True, "description": True, "citation": True, "fictional": False, "notes": False}


class PriorFileError(Exception):
    """A prior file could not be read or is invalid. The message is one line."""


# --------------------------------------------------------------------------- helpers

def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _err(file: str, key: str, what: str) -> PriorFileError:
    return PriorFileError(_one_line(f"{file}: key '{key}': {what}"))


def _type_name(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, (int, float)):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, dict):
        return "table"
    if isinstance(value, list):
        return "array"
    return type(value).__name__


def _table(file: str, data: Mapping, key: str, keypath: str, required: bool) -> dict | None:
    if key not in data:
        if required:
            raise _err(file, keypath, "missing required table")
        return None
    value = data[key]
    if not isinstance(value, dict):
        raise _err(file, keypath, f"must be a table, got {_type_name(value)}")
    return value


def _number(file: str, table: Mapping, key: str, keypath: str, required: bool,
            default: float | None = None) -> float | None:
    if key not in table:
        if required:
            raise _err(file, keypath, "missing required key")
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _err(file, keypath, f"must be a number, got {_type_name(value)} {value!r}")
    try:
        value = float(value)
    except OverflowError:  # an integer beyond the float range (about 1.8e308)
        raise _err(file, keypath, f"number too large ({value.bit_length()}-bit integer)") from None
    if not math.isfinite(value):
        raise _err(file, keypath, f"must be finite, got {value}")
    return value


def _string(file: str, table: Mapping, key: str, keypath: str, required: bool,
            default: str | None = None) -> str | None:
    if key not in table:
        if required:
            raise _err(file, keypath, "missing required key")
        return default
    value = table[key]
    if not isinstance(value, str):
        raise _err(file, keypath, f"must be a string, got {_type_name(value)} {value!r}")
    if not value.strip():
        raise _err(file, keypath, "must not be empty")
    return value


def _boolean(file: str, table: Mapping, key: str, keypath: str, default: bool) -> bool:
    if key not in table:
        return default
    value = table[key]
    if not isinstance(value, bool):
        raise _err(file, keypath, f"must be true or false, got {_type_name(value)} {value!r}")
    return value


def _no_unknown(file: str, table: Mapping, allowed, prefix: str, what: str = "") -> None:
    for key in table:
        if key not in allowed:
            where = f"{prefix}.{key}" if prefix else str(key)
            extra = f" {what}" if what else ""
            raise _err(file, where, f"unknown key{extra} (allowed: {', '.join(allowed)})")


def _fmt(x: float) -> str:
    return f"{x:g}"


# --------------------------------------------------------------------------- parsing

def _parse_distribution(file: str, name: str, table: Mapping) -> tuple[Distribution, str, str | None]:
    prefix = f"parameters.{name}"
    kind = _string(file, table, "distribution", f"{prefix}.distribution", True)
    if kind not in DISTRIBUTIONS:
        raise _err(file, f"{prefix}.distribution",
                   f"unknown distribution {kind!r} (allowed: {', '.join(DISTRIBUTIONS)})")
    required, optional = DISTRIBUTIONS[kind]
    allowed = ("distribution", "source", "description") + required + optional
    _no_unknown(file, table, allowed, prefix, f"for distribution {kind!r}")
    source = _string(file, table, "source", f"{prefix}.source", True)
    description = _string(file, table, "description", f"{prefix}.description", False)
    v = {k: _number(file, table, k, f"{prefix}.{k}", k in required) for k in required + optional}

    if kind == "fixed":
        return Fixed(v["value"]), source, description
    if "min" in v and "max" in v and v["min"] is not None and v["max"] is not None:
        if not v["min"] < v["max"]:
            raise _err(file, f"{prefix}.min",
                       f"min ({_fmt(v['min'])}) must be less than max ({_fmt(v['max'])})")
    if kind == "uniform":
        dist = Uniform(v["min"], v["max"])
    elif kind == "loguniform":
        if not v["min"] > 0.0:
            raise _err(file, f"{prefix}.min", f"loguniform needs min > 0, got {_fmt(v['min'])}")
        dist = LogUniform(v["min"], v["max"])
    elif kind in ("normal", "truncnormal"):
        if not v["sd"] > 0.0:
            raise _err(file, f"{prefix}.sd", f"sd must be > 0, got {_fmt(v['sd'])}")
        lo = -math.inf if v.get("min") is None else v["min"]
        hi = math.inf if v.get("max") is None else v["max"]
        dist = TruncNormal(v["mean"], v["sd"], lo, hi, kind=kind) if _mass_ok(v["mean"], v["sd"], lo, hi) \
            else None
        if dist is None:
            raise _err(file, f"{prefix}.mean",
                       f"mean {_fmt(v['mean'])} with sd {_fmt(v['sd'])} leaves almost no probability "
                       f"between min and max (< 1e-9)")
    else:  # beta
        for k in ("a", "b"):
            if not v[k] > 0.0:
                raise _err(file, f"{prefix}.{k}", f"beta shape {k} must be > 0, got {_fmt(v[k])}")
        if (v["min"] is None) != (v["max"] is None):
            missing = "max" if v["max"] is None else "min"
            raise _err(file, f"{prefix}.{missing}", "beta needs both min and max, or neither (then [0, 1])")
        lo = 0.0 if v["min"] is None else v["min"]
        hi = 1.0 if v["max"] is None else v["max"]
        dist = Beta(v["a"], v["b"], lo, hi)
    return dist, source, description


def _mass_ok(mean, sd, lo, hi) -> bool:
    try:
        return TruncNormal(mean, sd, lo, hi).mass > 1e-9
    except ValueError:
        return False


def _check_physical(file: str, name: str, dist: Distribution) -> None:
    lo, hi, lo_open, hi_open = PHYSICAL_LIMITS[name]
    prefix = f"parameters.{name}"
    rng_txt = f"{'(' if lo_open else '['}{_fmt(lo)}, {_fmt(hi)}{')' if hi_open else ']'}"
    if isinstance(dist, Fixed):
        x = dist.value
        bad = (x <= lo if lo_open else x < lo) or (x >= hi if hi_open else x > hi)
        if bad:
            raise _err(file, f"{prefix}.value", f"{_fmt(x)} is outside the physical range {rng_txt}")
        return
    if dist.lower <= lo if lo_open else dist.lower < lo:
        if not math.isfinite(dist.lower):
            raise _err(file, f"{prefix}.min",
                       f"missing: the distribution is unbounded below; give min inside the physical range {rng_txt}")
        raise _err(file, f"{prefix}.min", f"{_fmt(dist.lower)} is outside the physical range {rng_txt}")
    if dist.upper >= hi if hi_open else dist.upper > hi:
        if not math.isfinite(dist.upper) and not math.isfinite(hi):
            return
        if not math.isfinite(dist.upper):
            raise _err(file, f"{prefix}.max",
                       f"missing: the distribution is unbounded above; give max inside the physical range {rng_txt}")
        raise _err(file, f"{prefix}.max", f"{_fmt(dist.upper)} is outside the physical range {rng_txt}")


def parse_prior(data: Mapping, file: str = "<prior>") -> "PriorSpec":
    """Validate a prior already read into a dict (e.g. from ``tomllib``) and build a PriorSpec.

    ``file`` is used only in error messages and as ``spec.path``.
    """
    file = str(file)
    if not isinstance(data, Mapping):
        raise PriorFileError(f"{file}: key '(top level)': must be a table, got {_type_name(data)}")
    _no_unknown(file, data, _TOP_KEYS, "")
    if "schema_version" in data:
        ver = data["schema_version"]
        if isinstance(ver, bool) or not isinstance(ver, int):
            raise _err(file, "schema_version", f"must be an integer, got {_type_name(ver)} {ver!r}")
        if ver != SCHEMA_VERSION:
            raise _err(file, "schema_version", f"unsupported version {ver} (this package reads {SCHEMA_VERSION})")

    # [metadata]
    meta_t = _table(file, data, "metadata", "metadata", True)
    _no_unknown(file, meta_t, tuple(_METADATA_KEYS), "metadata")
    metadata = {}
    for key, req in _METADATA_KEYS.items():
        if key == "fictional":
            metadata[key] = _boolean(file, meta_t, key, f"metadata.{key}", False)
        else:
            val = _string(file, meta_t, key, f"metadata.{key}", req)
            if val is not None:
                metadata[key] = val

    # [models] (read before parameters: some parameters depend on the choices)
    models_t = _table(file, data, "models", "models", True)
    _no_unknown(file, models_t, tuple(MODEL_CHOICES) + POWER_LAW_KEYS + SULFIDE_CAPACITY_KEYS,
                "models")
    models = {}
    for key, choices in MODEL_CHOICES.items():
        val = _string(file, models_t, key, f"models.{key}", True)
        if val not in choices:
            raise _err(file, f"models.{key}", f"unknown model {val!r} (allowed: {', '.join(choices)})")
        models[key] = val
    # power-law H2O solubility, wt% = k * fH2O^n: its constants live beside the choice
    for key in POWER_LAW_KEYS:
        if models["h2o_solubility"] == "power_law":
            val = _number(file, models_t, key, f"models.{key}", True)
            if not (val > 0 and math.isfinite(val)) or (key.endswith("exponent") and val > 1.5):
                raise _err(file, f"models.{key}", f"must be positive (exponent at most 1.5), got {val}")
            models[key] = float(val)
        elif key in models_t:
            raise _err(file, f"models.{key}", "only allowed with h2o_solubility = \"power_law\"")
    # sulfide capacity, ln C_S = A + B/T(K), C_S in wt% S per (fS2/fO2)^0.5
    for key in SULFIDE_CAPACITY_KEYS:
        if models["sulfur"] == "sulfide_capacity":
            val = _number(file, models_t, key, f"models.{key}", True)
            models[key] = float(val)
        elif key in models_t:
            raise _err(file, f"models.{key}", "only allowed with sulfur = \"sulfide_capacity\"")

    # [parameters.<name>]
    params_t = _table(file, data, "parameters", "parameters", True)
    allowed_params = REQUIRED_PARAMETERS + OPTIONAL_PARAMETERS
    dists: dict[str, Distribution] = {}
    sources: dict[str, str] = {}
    descriptions: dict[str, str] = {}
    for name, table in params_t.items():
        if name not in allowed_params:
            raise _err(file, f"parameters.{name}",
                       f"unknown parameter (allowed: {', '.join(allowed_params)})")
        if not isinstance(table, dict):
            raise _err(file, f"parameters.{name}", f"must be a table, got {_type_name(table)}")
        dist, source, description = _parse_distribution(file, name, table)
        _check_physical(file, name, dist)
        dists[name] = dist
        sources[name] = source
        if description is not None:
            descriptions[name] = description
    for name in REQUIRED_PARAMETERS:
        if name not in dists:
            raise _err(file, f"parameters.{name}", "missing required parameter")
    if models["sulfur"] == "partition" and "s_partition" not in dists:
        raise _err(file, "parameters.s_partition",
                   "missing: required when models.sulfur = 'partition'")
    if models["sulfur"] != "partition" and "s_partition" in dists:
        raise _err(file, "parameters.s_partition",
                   f"only used when models.sulfur = 'partition', not {models['sulfur']!r}")
    if models["scrubbing_product"] == "loss" and "h2s_return" in dists:
        raise _err(file, "parameters.h2s_return",
                   "only used when models.scrubbing_product makes H2S ('h2s_sulfate'), not 'loss'")
    if models["scrubbing_product"] == "sulfur_sulfate" and "h2s_return" in dists:
        raise _err(file, "parameters.h2s_return",
                   "only used when models.scrubbing_product makes H2S ('h2s_sulfate'), not 'sulfur_sulfate'")

    # [melt]
    melt_t = _table(file, data, "melt", "melt", True)
    _no_unknown(file, melt_t, REQUIRED_OXIDES + OPTIONAL_OXIDES + ("source",), "melt")
    melt_source = _string(file, melt_t, "source", "melt.source", True)
    melt: dict[str, float] = {}
    for ox in REQUIRED_OXIDES + OPTIONAL_OXIDES:
        val = _number(file, melt_t, ox, f"melt.{ox}", ox in REQUIRED_OXIDES)
        if val is None:
            continue
        if val < 0.0 or val > 100.0:
            raise _err(file, f"melt.{ox}", f"{_fmt(val)} wt% is outside [0, 100]")
        melt[ox] = val
    if not melt["SiO2"] > 0.0:
        raise _err(file, "melt.SiO2", "must be > 0")
    total = sum(melt.values())
    if not OXIDE_TOTAL_RANGE[0] <= total <= OXIDE_TOTAL_RANGE[1]:
        raise _err(file, "melt", f"oxide total {total:.2f} wt% is outside "
                                 f"[{_fmt(OXIDE_TOTAL_RANGE[0])}, {_fmt(OXIDE_TOTAL_RANGE[1])}]")

    # [likelihood] (optional table, defaults documented)
    lik_t = _table(file, data, "likelihood", "likelihood", False) or {}
    _no_unknown(file, lik_t, ("kind", "relative_sigma", "dof", "source"), "likelihood")
    kind = _string(file, lik_t, "kind", "likelihood.kind", False, "normal")
    if kind not in LIKELIHOOD_KINDS:
        raise _err(file, "likelihood.kind", f"unknown likelihood {kind!r} (allowed: {', '.join(LIKELIHOOD_KINDS)})")
    sigma = _number(file, lik_t, "relative_sigma", "likelihood.relative_sigma", False, DEFAULT_RELATIVE_SIGMA)
    if not 0.0 < sigma <= MAX_RELATIVE_SIGMA:
        raise _err(file, "likelihood.relative_sigma", f"{_fmt(sigma)} is outside (0, {_fmt(MAX_RELATIVE_SIGMA)}]")
    likelihood: dict[str, Any] = {"kind": kind, "relative_sigma": sigma}
    if kind == "student_t":
        dof = _number(file, lik_t, "dof", "likelihood.dof", False, DEFAULT_DOF)
        if not dof > 0.0:
            raise _err(file, "likelihood.dof", f"must be > 0, got {_fmt(dof)}")
        likelihood["dof"] = dof
    elif "dof" in lik_t:
        raise _err(file, "likelihood.dof", "only used when likelihood.kind = 'student_t'")
    lik_source = _string(file, lik_t, "source", "likelihood.source", False)
    if lik_source is not None:
        likelihood["source"] = lik_source

    # [magmatic] (optional table, defaults documented)
    mag_t = _table(file, data, "magmatic", "magmatic", False) or {}
    _no_unknown(file, mag_t, ("p_magmatic", "epsilon", "source"), "magmatic")
    p_mag = _number(file, mag_t, "p_magmatic", "magmatic.p_magmatic", False, DEFAULT_P_MAGMATIC)
    if not 0.0 < p_mag < 1.0:
        raise _err(file, "magmatic.p_magmatic", f"must be strictly between 0 and 1, got {_fmt(p_mag)}")
    eps = _number(file, mag_t, "epsilon", "magmatic.epsilon", False, DEFAULT_EPSILON)
    if not 0.0 < eps < 1.0:
        raise _err(file, "magmatic.epsilon", f"must be strictly between 0 and 1, got {_fmt(eps)}")
    mag_source = _string(file, mag_t, "source", "magmatic.source", False)

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
    )


_TOML_POS = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)\s*$")
_TOML_EOF = re.compile(r"^(?P<msg>.*?)\s*\(at end of document\)\s*$")


def load_prior_file(path: str | os.PathLike) -> "PriorSpec":
    """Read, validate and return the prior in the TOML file at ``path`` (or the shipped prior
    of that name, e.g. "arc_basalt", when no such file exists)."""
    from ventsource.inference.priors.shipped import resolve_prior
    file = resolve_prior(os.fspath(path))
    try:
        with open(file, "rb") as fh:
            raw = fh.read()
        text = raw[3:].decode("utf-8") if raw.startswith(b"\xef\xbb\xbf") else raw.decode("utf-8")  # BOM
        _check_nesting(file, text)  # before tomllib, whose time and memory grow fast with depth
        data = tomllib.loads(text)
    except RecursionError:
        raise PriorFileError(f"{file}: arrays or inline tables nested too deep to read") from None
    except FileNotFoundError:
        raise PriorFileError(f"{file}: file not found") from None
    except IsADirectoryError:
        raise PriorFileError(f"{file}: is a directory, not a prior file") from None
    except PermissionError:
        raise PriorFileError(f"{file}: permission denied") from None
    except UnicodeDecodeError as exc:
        raise PriorFileError(_one_line(f"{file}: not UTF-8 text ({exc.reason} at byte {exc.start})")) from None
    except tomllib.TOMLDecodeError as exc:
        text = _one_line(str(exc))
        m = _TOML_POS.match(text)
        if m:
            msg = f"{file}: line {m['line']}, column {m['col']}: TOML syntax error: {m['msg']}"
        else:
            m = _TOML_EOF.match(text)
            msg = f"{file}: end of file: TOML syntax error: {m['msg'] if m else text}"
        raise PriorFileError(msg) from None
    except ValueError as exc:  # e.g. an integer of more than 4300 digits
        raise PriorFileError(_one_line(f"{file}: not readable as TOML ({str(exc)[:80]})")) from None
    return parse_prior(data, file)


MAX_NESTING = 32  # a prior file needs 3 levels; far deeper is an error, not a prior
_TOML_STRINGS = re.compile(r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:\\.|[^"\\\n])*"|\'[^\'\n]*\'|#[^\n]*')


def _check_nesting(file: str, text: str) -> None:
    """Refuse keys, tables, arrays or inline tables nested deeper than MAX_NESTING, naming the line."""
    bare = _TOML_STRINGS.sub(lambda m: "s" + "\n" * m.group().count("\n"), text)
    depth = 0
    for number, line in enumerate(bare.split("\n"), start=1):
        key = line.split("=", 1)[0] if "=" in line else (line if line.lstrip().startswith("[") else "")
        deepest = key.count(".")
        for ch in line:
            if ch in "[{":
                depth += 1
                deepest = max(deepest, depth)
            elif ch in "]}":
                depth -= 1
        if deepest > MAX_NESTING:
            raise PriorFileError(f"{file}: line {number}, column 1: nested more than {MAX_NESTING} "
                                 "levels deep (keys, tables or arrays)")


# --------------------------------------------------------------------------- the prior object

class PriorSpec:
    """A validated prior. Build with :func:`load_prior_file` or :func:`parse_prior`.

    Array conventions: ``theta_free`` is (n, len(free_names)); a single 1-D
    vector (len(free_names),) is also accepted and then ``log_prob`` returns a
    float and ``full``/``prior_transform`` return 1-D arrays (the call shapes
    of emcee without vectorisation and of dynesty).
    """

    def __init__(self, *, path, metadata, distributions, sources, descriptions, melt_oxides_wt,
                 melt_source, models, likelihood, p_magmatic, epsilon, magmatic_source=None):
        self.path = path
        self.metadata = dict(metadata)
        self.name: str = metadata["name"]
        self.description: str = metadata["description"]
        self.citation: str = metadata["citation"]
        self.fictional: bool = bool(metadata.get("fictional", False))
        self.distributions: dict[str, Distribution] = dict(distributions)
        self.sources: dict[str, str] = dict(sources)
        self.descriptions: dict[str, str] = dict(descriptions)
        self.melt_oxides_wt: dict[str, float] = dict(melt_oxides_wt)
        self.melt_source: str = melt_source
        self.models: dict[str, str] = dict(models)
        self.likelihood: dict[str, Any] = dict(likelihood)
        self.p_magmatic: float = float(p_magmatic)
        self.epsilon: float = float(epsilon)
        self.magmatic_source = magmatic_source
        self.parameter_names: tuple[str, ...] = tuple(self.distributions)
        self.free_names: tuple[str, ...] = tuple(
            n for n, d in self.distributions.items() if not isinstance(d, Fixed))
        self.fixed_values: dict[str, float] = {
            n: d.value for n, d in self.distributions.items() if isinstance(d, Fixed)}
        self._free_dists = [self.distributions[n] for n in self.free_names]
        self._free_index = np.array([self.parameter_names.index(n) for n in self.free_names], dtype=int)
        # uniform columns share one vector expression in log_prob (it runs once per sampler call)
        uni = [j for j, d in enumerate(self._free_dists) if type(d) is Uniform]
        self._uniform_cols = np.array(uni, dtype=int)
        self._uniform_lo = np.array([self._free_dists[j].lower for j in uni], dtype=float)
        self._uniform_hi = np.array([self._free_dists[j].upper for j in uni], dtype=float)
        self._uniform_log_density = -float(sum(math.log(self._free_dists[j].upper - self._free_dists[j].lower)
                                               for j in uni))
        self._other_cols = [j for j in range(len(self._free_dists)) if j not in uni]

    # ---- shapes
    @property
    def ndim(self) -> int:
        """Number of free (sampled) parameters."""
        return len(self.free_names)

    @property
    def free_bounds(self) -> np.ndarray:
        """(len(free_names), 2) array of support bounds [lower, upper] of the free parameters."""
        return np.array([[d.lower, d.upper] for d in self._free_dists], dtype=float).reshape(-1, 2)

    def _as_2d(self, theta, what: str) -> tuple[np.ndarray, bool]:
        arr = np.asarray(theta, dtype=float)
        single = arr.ndim == 1
        if single:
            arr = arr[None, :]
        if arr.ndim != 2 or arr.shape[1] != self.ndim:
            raise ValueError(f"{what}: expected shape (n, {self.ndim}) for free parameters "
                             f"{self.free_names}, got {np.shape(theta)}")
        return arr, single

    # ---- probability
    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """(n, len(free_names)) independent draws from the prior, using ``rng``."""
        if not isinstance(rng, np.random.Generator):
            raise TypeError("sample: rng must be a numpy.random.Generator (e.g. np.random.default_rng(seed))")
        n = int(n)
        out = np.empty((n, self.ndim))
        for j, d in enumerate(self._free_dists):
            out[:, j] = d.sample(rng, n)
        return out

    def log_prob(self, theta_free):
        """Log prior density of the free parameters: (n,) array, -inf outside the support."""
        arr, single = self._as_2d(theta_free, "log_prob")
        if self._uniform_cols.size:
            x = arr[:, self._uniform_cols]
            inside = np.all((x >= self._uniform_lo) & (x <= self._uniform_hi), axis=1)  # NaN: outside
            lp = np.where(inside, self._uniform_log_density, -np.inf)
        else:
            lp = np.zeros(arr.shape[0])
        for j in self._other_cols:
            lp = lp + self._free_dists[j].log_pdf(arr[:, j])
        lp = np.where(np.isnan(lp), -np.inf, lp)
        return float(lp[0]) if single else lp

    def prior_transform(self, u):
        """Map points of the unit cube to the prior (inverse CDF per parameter), for nested sampling."""
        arr, single = self._as_2d(u, "prior_transform")
        out = np.empty_like(arr)
        for j, d in enumerate(self._free_dists):
            out[:, j] = d.ppf(arr[:, j])
        return out[0] if single else out

    def full(self, theta_free) -> np.ndarray:
        """(n, len(parameter_names)) array: the free values with the fixed ones inserted."""
        arr, single = self._as_2d(theta_free, "full")
        out = np.empty((arr.shape[0], len(self.parameter_names)))
        for i, name in enumerate(self.parameter_names):
            if name in self.fixed_values:
                out[:, i] = self.fixed_values[name]
        out[:, self._free_index] = arr
        return out[0] if single else out

    # ---- variants
    def with_fixed(self, name: str, value: float) -> "PriorSpec":
        """A new PriorSpec with parameter ``name`` held at ``value`` (e.g. scrubbed_so2 = 0 for M0)."""
        if name not in self.distributions:
            raise ValueError(f"with_fixed: unknown parameter {name!r} (have: {', '.join(self.parameter_names)})")
        if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
            raise ValueError(f"with_fixed: value for {name!r} must be a number, got {value!r}")
        dist = Fixed(float(value))
        try:
            _check_physical(str(self.path), name, dist)
        except PriorFileError as exc:
            raise ValueError(f"with_fixed: {name} = {value!r} is outside the physical range "
                             f"({str(exc).split(': ', 2)[-1]})") from None
        dists = dict(self.distributions)
        dists[name] = dist
        sources = dict(self.sources)
        sources[name] = f"fixed at {float(value):g} by with_fixed (was: {self.sources[name]})"
        return PriorSpec(
            path=self.path, metadata=self.metadata, distributions=dists, sources=sources,
            descriptions=self.descriptions, melt_oxides_wt=self.melt_oxides_wt,
            melt_source=self.melt_source, models=self.models, likelihood=self.likelihood,
            p_magmatic=self.p_magmatic, epsilon=self.epsilon, magmatic_source=self.magmatic_source)

    # ---- provenance
    def to_dict(self) -> dict:
        """Plain nested dict (str/float/bool only), the same layout as the TOML file plus ``path``.

        Without its ``path`` entry the dict is valid input for :func:`parse_prior`,
        which rebuilds an equal prior.
        """
        params = {}
        for name, d in self.distributions.items():
            entry = d.to_dict()
            entry["source"] = self.sources[name]
            if name in self.descriptions:
                entry["description"] = self.descriptions[name]
            params[name] = entry
        melt = dict(self.melt_oxides_wt)
        melt["source"] = self.melt_source
        magmatic: dict[str, Any] = {"p_magmatic": self.p_magmatic, "epsilon": self.epsilon}
        if self.magmatic_source is not None:
            magmatic["source"] = self.magmatic_source
        return copy.deepcopy({
            "path": str(self.path),
            "schema_version": SCHEMA_VERSION,
            "metadata": self.metadata,
            "parameters": params,
            "melt": melt,
            "models": self.models,
            "likelihood": self.likelihood,
            "magmatic": magmatic,
        })

    def __repr__(self) -> str:
        fixed = ", ".join(f"{k}={v:g}" for k, v in self.fixed_values.items())
        return (f"PriorSpec(name={self.name!r}, free={self.free_names}"
                + (f", fixed: {fixed}" if fixed else "") + ")")
