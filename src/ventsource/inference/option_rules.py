"""Type and range of every option of `infer`, in one table, checked before any work.

One line per option: (kind, allowed). kind is "int", "float", "bool", "text" or
"choice"; allowed is (low, high, low_open, high_open) for numbers, a tuple of
values for "choice", None otherwise. An option whose default is None may also be
None ("use the default rule"). `check_options` returns the values converted to
their kind (so 20 and 20.0 compare equal in a run's record) or raises
OptionError with one line naming the option. A new option is one line here.
"""
import math
import numbers

import numpy as np

INF = math.inf

OPTION_RULES = {
    "kind": ("choice", ("normal", "student_t")),
    "dof": ("float", (0.0, INF, True, True)),
    "epsilon": ("float", (0.0, 1.0, True, True)),        # a scrubbed fraction
    "pi0": ("float", (0.0, 1.0, True, True)),            # a prior probability of M0
    "n_walkers": ("int", (2, 100_000, False, False)),
    "target_ess": ("float", (0.0, 1e9, True, False)),
    "max_steps": ("int", (1, 10_000_000, False, False)),
    "alpha": ("float", (0.0, 0.5, True, True)),
    "n_prior_draws": ("int", (1, 10_000_000, False, False)),
    "scrub_name": ("text", None),
    "n_proposal": ("int", (10, 10_000_000, False, False)),
    "model_choice": ("bool", None),
    "space": ("choice", ("unbounded", "prior")),
    "burn_factor": ("float", (0.0, 1e6, False, False)),
    "min_tau_factor": ("float", (0.0, 1e6, False, False)),
    "chunk": ("int", (1, 10_000_000, False, False)),
    "max_error_p": ("float", (0.0, 1.0, True, False)),
    "rhat_max": ("float", (1.0, INF, True, True)),
    "moves": ("choice", ("de", "stretch", "kde")),       # or an emcee moves list (Python API)
    "init": ("choice", ("importance", "prior")),
    "n_init_draws": ("int", (1, 10_000_000, False, False)),
    "rhat_target": ("float", (1.0, INF, True, True)),
    "bridge_proposal": ("choice", ("mixture", "normal")),
    "engine": ("choice", ("smc", "emcee")),
    "n_particles": ("int", (20, 1_000_000, False, False)),
    "n_runs": ("int", (2, 64, False, False)),              # the between-run spread needs two at least
    "ess_target": ("float", (0.0, 1.0, True, True)),
    "max_moves": ("int", (1, 1000, False, False)),
    "smc_rhat_max": ("float", (1.0, INF, True, True)),
}
# options that may also be given as Python objects the table cannot describe
PYTHON_OBJECT_OK = {"moves": list}


class OptionError(ValueError):
    """An option of the wrong type or outside its range; the message is one line."""


def _range_text(allowed):
    lo, hi, lo_open, hi_open = allowed
    return f"{'(' if lo_open else '['}{lo:g}, {hi:g}{')' if hi_open else ']'}"


def check_option(name, value, defaults=None):
    """One option -> its value converted to its kind; OptionError if wrong."""
    if name not in OPTION_RULES:
        if defaults is not None and name in defaults:
            return value  # known to the caller, no rule yet (tests/test_option_rules.py flags it)
        raise OptionError(f"unknown option '{name}' (known: {', '.join(sorted(OPTION_RULES))})")
    kind, allowed = OPTION_RULES[name]
    if value is None and defaults is not None and defaults.get(name) is None:
        return None
    if name in PYTHON_OBJECT_OK and isinstance(value, PYTHON_OBJECT_OK[name]):
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise OptionError(f"option {name}={value!r}: must be true or false")
        return value
    if kind in ("text", "choice"):
        if not isinstance(value, str) or not value:
            raise OptionError(f"option {name}={value!r}: must be a text value")
        if kind == "choice" and value not in allowed:
            raise OptionError(f"option {name}={value!r}: must be one of {', '.join(allowed)}")
        return value
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):  # numpy numbers too
        raise OptionError(f"option {name}={value!r}: must be a number")
    if kind == "int":
        if not float(value).is_integer():
            raise OptionError(f"option {name}={value!r}: must be a whole number")
        value = int(value)
    else:
        value = float(value)
    lo, hi, lo_open, hi_open = allowed
    if not (math.isfinite(value) or (value == hi == INF and not hi_open)) or value < lo or value > hi \
            or (lo_open and value == lo) or (hi_open and value == hi):
        raise OptionError(f"option {name}={value!r}: outside the allowed range {_range_text(allowed)}")
    return value


def check_options(options, defaults=None):
    """Every option checked and converted; the first problem raises OptionError."""
    return {name: check_option(name, value, defaults) for name, value in dict(options).items()}
