"""Presentation rules for hazard.json: rounding to the Monte Carlo error, relative paths.

Rounding rule (stated in every hazard.json): a probability is given to the
decimal place of the first significant digit of its Monte Carlo error (0.013 ->
2 decimals, 0.004 -> 3 decimals), never fewer than 1 nor more than 4 decimals;
the error itself is given to that same place (at least one unit of it). A
probability without an error estimate gets 2 decimals. Quantiles of the
scrubbed fraction get 2 decimals (their own Monte Carlo error is about 0.01 at
the default settings). Reporting an estimate to the first significant digit of
its uncertainty is common practice, no source.
"""
import math
import os

ROUNDING_RULE = ("Probabilities are rounded to the decimal place of the first significant digit of "
                 "their Monte Carlo error (between 1 and 4 decimals; 2 decimals when no error is "
                 "estimated); the error is given to the same place; scrubbed-fraction quantiles "
                 "to 2 decimals; sulfur-budget fluxes and masses to 3 significant digits.")


def _finite(value):
    return value is not None and isinstance(value, (int, float)) and math.isfinite(value)


def decimals_for_error(error):
    """Number of decimals an estimate with this Monte Carlo error supports."""
    if not _finite(error) or error <= 0:
        return 2
    return int(min(4, max(1, -math.floor(math.log10(error)))))


def round_probability(value, error):
    """(value, error) rounded by the rule above; None stays None."""
    d = decimals_for_error(error)
    v = round(float(value), d) if _finite(value) else None
    e = max(round(float(error), d), 10.0 ** -d) if _finite(error) else None
    return v, e


def round_tonnes(value):
    """Fluxes and sulfur masses to 3 significant digits (their bands span tens of %)."""
    if not _finite(value):
        return None
    if value == 0:
        return 0.0
    return round(float(value), 2 - int(math.floor(math.log10(abs(value)))))


def round_fraction(value):
    return round(float(value), 2) if _finite(value) else None


def relative_path(path, run_dir):
    """path relative to the run folder (never an absolute machine path)."""
    if run_dir is None:
        return os.path.basename(str(path))
    return os.path.relpath(os.path.abspath(str(path)), os.path.abspath(run_dir))
