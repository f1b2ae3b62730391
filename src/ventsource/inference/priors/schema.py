"""What a prior file may hold: parameter names and their physical limits,
oxides, model choices, distributions and the documented defaults."""
import math

SCHEMA_VERSION = 1

REQUIRED_PARAMETERS = (
    "pressure_bar", "temperature_c", "dfmq", "scrubbed_so2", "h2o_wt", "co2_ppm", "s_ppm",
)
OPTIONAL_PARAMETERS = ("s_partition", "scrubbed_h2s", "h2s_return", "exsolved_gas_wt",
                       "quench_temperature_c", "quench_pressure_bar", "h2_retained_log10")

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
    # the quench state: where the NASA-7 data and the gas-only model hold (no condensed
    # water or sulfur above ~400 C at 1 bar; common practice, no source)
    "quench_temperature_c": (400.0, 1300.0, False, False),
    "quench_pressure_bar": (1.0, 5000.0, False, False),
    "h2_retained_log10": (-8.0, 0.0, False, False),
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
    "sulfur": ("capacity", "partition", "sulfide_capacity"),
    "degassing": ("closed", "open"),
    "scrubbing_product": ("loss", "h2s_sulfate", "sulfur_sulfate"),
    "eos": ("real", "ideal"),
    "quench": ("gas_buffered", "rock_buffered", "none"),
    "redox": ("evolving", "buffered"),
}
# Model choices a prior file may leave out, with the value then used: "none" (the gas
# reaches the vent as it left the magma, the behaviour before the quench stage) and
# "buffered" (a file written before redox evolved keeps its numbers; the shipped files
# say redox = "evolving").
MODEL_DEFAULTS: dict[str, str] = {"quench": "none", "redox": "buffered"}

# Model choices may also be written as the literature cites the law ("Moore et al. 1998",
# "Shishkina et al., 2014"): case, spaces, punctuation and "et al." are ignored, so a
# citation reduces to the key (author + year). docs/models.md lists the laws.
MODEL_CITATIONS: dict[str, dict[str, str]] = {
    "h2o_solubility": {"moore1998": "Moore et al. 1998", "liu2005": "Liu et al. 2005",
                       "power_law": "power law"},
    "co2_solubility": {"shishkina2014": "Shishkina et al. 2014", "liu2005": "Liu et al. 2005"},
}


def _reduce_model_name(text: str) -> str:
    import re
    t = re.sub(r"[^a-z0-9]", "", text.lower())
    return t.replace("etal", "")


def canonical_model_choice(key: str, text: str):
    """The MODEL_CHOICES entry that text names (the key itself or its citation), or None."""
    if not isinstance(text, str):
        return None
    if text in MODEL_CHOICES.get(key, ()):
        return text
    wanted = _reduce_model_name(text)
    for choice in MODEL_CHOICES.get(key, ()):
        if wanted and wanted == _reduce_model_name(choice):
            return choice
    return None


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

TOP_KEYS = ("schema_version", "metadata", "parameters", "melt", "models", "likelihood", "magmatic", "hypotheses",
            "window")
METADATA_KEYS = {"name": True, "description": True, "citation": True, "fictional": False, "notes": False}
