"""The prior over segmentations of a series of n rows into consecutive segments.

A segmentation with k changes (k + 1 segments, each at least `min_rows` rows) has prior
P(k) / N_k(n), where N_k(n) = C(n - (k + 1) m + k, k) counts the segmentations with k
changes and segments of at least m rows (the compositions of n into k + 1 parts of at
least m; stars and bars, common practice, no source): given their number, every
placement of the changes is equally likely. P(k) is

* geometric (default): P(k) = (1 - q) q^k, q = 0.5 unless given (a change as likely as
  not, each further one half as likely again); its ratio P(k + 1) / P(k) = q does not
  depend on k, so a split of one stretch is judged the same whatever was found elsewhere;
* Poisson: P(k) = exp(-lam) lam^k / k!, lam the expected number of changes.

Both are truncated at the largest k that n rows allow; the truncation changes every
segmentation's prior by the same factor and so no comparison.
"""
from __future__ import annotations

import math
import re

from ventsource.common.errors import InputError

DEFAULT_CHANGE_PRIOR = ("geometric", 0.5)
DEFAULT_MIN_ROWS = 4


def parse_change_prior(text):
    """'geometric' / 'geometric:0.3' / 'poisson' / 'poisson:1.5' -> (kind, value)."""
    if isinstance(text, (tuple, list)) and len(text) == 2:
        text = f"{text[0]}:{text[1]}"
    s = str(text).strip().lower()
    m = re.fullmatch(r"(geometric|poisson)(?::\s*([0-9.eE+-]+))?", s)
    if not m:
        raise InputError(f"--change-prior '{text}': give geometric[:q] (0 < q < 1, default 0.5) or "
                         f"poisson[:mean] (mean > 0, default 1)")
    kind = m.group(1)
    try:
        value = float(m.group(2)) if m.group(2) else (0.5 if kind == "geometric" else 1.0)
    except ValueError:
        value = float("nan")
    if not math.isfinite(value) or (kind == "geometric" and not 0.0 < value < 1.0) \
            or (kind == "poisson" and value <= 0.0):
        raise InputError(f"--change-prior '{text}': geometric needs 0 < q < 1, poisson a mean > 0")
    return kind, value


def check_min_rows(value):
    if isinstance(value, bool) or not isinstance(value, int) or value < 2:
        raise InputError(f"--min-segment-rows {value!r}: give a whole number >= 2 (the change-of-source "
                         f"model needs at least 2 rows on each side)")
    return value


def log_count_prior(k, kind, value):
    """log P(k changes)."""
    if kind == "geometric":
        return math.log1p(-value) + k * math.log(value)
    return -value + k * math.log(value) - math.lgamma(k + 1)


def log_n_segmentations(n, k, min_rows):
    """log N_k(n): the number of ways to cut n rows into k + 1 segments of >= min_rows."""
    free = n - (k + 1) * min_rows
    if free < 0:
        return -math.inf
    return math.lgamma(free + k + 1) - math.lgamma(k + 1) - math.lgamma(free + 1)


def log_prior(n, k, kind, value, min_rows):
    """log prior of one segmentation with k changes of n rows."""
    count = log_n_segmentations(n, k, min_rows)
    return -math.inf if count == -math.inf else log_count_prior(k, kind, value) - count


def log_prior_odds_one_more(n, k, kind, value, min_rows):
    """log [prior of one given segmentation with k + 1 changes / one with k]."""
    return log_prior(n, k + 1, kind, value, min_rows) - log_prior(n, k, kind, value, min_rows)
