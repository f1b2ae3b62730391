"""Presentation rules for hazard.json and the report: rounding to the Monte Carlo error,
probabilities never shown as exactly 0 or 1, relative paths.

Rounding rule (stated in every hazard.json; this module is its one home): the Monte
Carlo error is first rounded to one significant digit (0.00099 -> 0.001), and the
probability is given to that digit's decimal place (0.013 -> 2 decimals, 0.004 -> 3
decimals), never fewer than 1 nor more than 4 decimals; the error is given to the same
place. A probability without an error estimate gets 2 decimals. A probability whose
rounded value would be 0 or 1 is never shown as such: the number becomes the bound
10^-d (or 1 - 10^-d) and its text form says "< 0.001" (or "> 0.999"), since a Monte
Carlo estimate can only bound a probability that small. Full precision stays in the
machine table summary.csv, with the errors beside it. log10 Bayes factors get 1
decimal. Quantiles of the scrubbed fraction get 2 decimals (their own Monte Carlo error
is about 0.01 at the default settings). Reporting an estimate to the first significant
digit of its uncertainty is common practice, no source.
"""
import math
import os

ROUNDING_RULE = ("Probabilities are rounded to the decimal place of the first significant digit of "
                 "their Monte Carlo error (the error itself rounded to one significant digit first; "
                 "between 1 and 4 decimals; 2 decimals when no error is estimated); the error is "
                 "given to the same place. A probability is never given as exactly 0 or 1: when it "
                 "would round to 0 (or 1) the number is the bound 10^-d (or 1 - 10^-d) and the "
                 "'*_text' field says '< 0.001' (or '> 0.999'), meaning at most (at least) that. "
                 "log10 Bayes factors to 1 decimal; scrubbed-fraction quantiles to 2 decimals; "
                 "sulfur-budget fluxes and masses to 3 significant digits. Full precision is in "
                 "summary.csv.")


def _finite(value):
    return value is not None and isinstance(value, (int, float)) and math.isfinite(value)


def decimals_for_error(error):
    """Number of decimals an estimate with this Monte Carlo error supports (the error is
    rounded to one significant digit first, so 0.00099 supports 3 decimals, not 4)."""
    if not _finite(error) or error <= 0:
        return 2
    one_digit = float(f"{float(error):.0e}")
    return int(min(4, max(1, -math.floor(math.log10(one_digit)))))


def round_probability(value, error):
    """(value, error) rounded by the rule above, the value kept inside [10^-d, 1 - 10^-d];
    None stays None."""
    d = decimals_for_error(error)
    step = 10.0 ** -d
    v = None
    if _finite(value):
        v = min(max(round(float(value), d), step), round(1.0 - step, d))
    e = max(round(float(error), d), step) if _finite(error) else None
    return v, e


def probability_text(value, error):
    """The probability as a reader sees it: '0.83 ± 0.02', '< 0.001', '> 0.999', 'n/a'."""
    if not _finite(value):
        return "n/a"
    d = decimals_for_error(error)
    step = 10.0 ** -d
    if round(float(value), d) < step:
        return f"< {step:.{d}f}"
    if round(float(value), d) > 1.0 - step:
        return f"> {1.0 - step:.{d}f}"
    v, e = round_probability(value, error)
    return f"{v:.{d}f}" + (f" ± {e:.{d}f}" if e is not None else "")


def round_log10_bf(value):
    """A log10 Bayes factor to 1 decimal (its Monte Carlo error is tenths at best)."""
    return round(float(value), 1) if _finite(value) else None


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
