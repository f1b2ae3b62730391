"""Summary fields of the third hypothesis and of the sulfur budget for series runs.

Rows of a series carry, with a release prior ([hypotheses] in the prior file),
P(M1 scrubbed) and P(M2 released) beside P(M0) (p_magmatic), each with its Monte Carlo
error, and, when the measurement file has flux columns, the sulfur budget
(workflow.sulfur_budget). Without either, rows and columns are those of before.
"""
from __future__ import annotations

import numpy as np

from ventsource.workflow.hazard_format import round_probability, round_tonnes
from ventsource.workflow.sulfur_budget import BUDGET_COLUMNS, series_budget

HYPOTHESIS_COLUMNS = ["p_scrubbed", "p_scrubbed_error", "p_released", "p_released_error"]
DRAWS_KEY = "budget_draws"   # kept in rows/KEY.json for the budget (and --resume)
N_KEPT_DRAWS = 400
DEFAULT_MAX_GAP_DAYS = 30.0


def _num(v):
    return None if v is None or not np.isfinite(v) else float(v)


def hypothesis_fields(hypotheses):
    """{"p": [p0, p1, p2], "error": [...]} -> summary fields (empty without a release prior)."""
    if not hypotheses:
        return {}
    p, e = hypotheses["p"], hypotheses["error"]
    return {"p_scrubbed": _num(p[1]), "p_scrubbed_error": _num(e[1]),
            "p_released": _num(p[2]), "p_released_error": _num(e[2])}


def compact_draws(draws, seed):
    """At most N_KEPT_DRAWS budget draws as plain lists (6 significant digits) for JSON."""
    if draws is None:
        return None
    n = len(draws["model"])
    rng = np.random.default_rng([int(seed), 0xB0])
    pick = np.sort(rng.choice(n, size=min(n, N_KEPT_DRAWS), replace=False))
    out = {"model": [int(x) for x in np.asarray(draws["model"])[pick]]}
    for k in ("so2_co2_magmatic", "so2_factor"):
        out[k] = [float(f"{x:.6g}") if np.isfinite(x) else None for x in np.asarray(draws[k])[pick]]
    return out


def _from_json(d):
    if d is None:
        return None
    return {k: np.array([np.nan if x is None else x for x in v], dtype=float) for k, v in d.items()}


def extra_columns(spec, series):
    cols = list(HYPOTHESIS_COLUMNS) if getattr(spec, "release", None) is not None else []
    return cols + (list(BUDGET_COLUMNS) if getattr(series, "fluxes", None) is not None else [])


def add_budget(series, rows, seed, max_gap_days=None):
    """Budget fields added to the rows (in file order) when the file has flux columns."""
    if getattr(series, "fluxes", None) is None:
        return rows
    gap = DEFAULT_MAX_GAP_DAYS if max_gap_days is None else float(max_gap_days)
    # a window flagged mixed_sources has no one source to integrate: its rows stay out of
    # the running total, which restarts after them (sulfur_budget.cumulative)
    excluded = ["mixed_sources" in (r.get("flags") or "").split(";") for r in rows]
    budget = series_budget(series.times, [_from_json(r.get(DRAWS_KEY)) for r in rows],
                           series.fluxes, seed, gap, excluded)
    for row, b in zip(rows, budget):
        row.update(b)
    return rows


def extend_hazard(doc, rows, series, max_gap_days=None):
    """hazard.json: the three probabilities and the budget per row, when present."""
    if getattr(series, "fluxes", None) is not None:
        doc["sulfur_budget"] = {
            "units": "every budget mass as sulfur: t S/d for rates, t S for the running total; "
                     "magmatic_so2_flux_tpd is the SO2 equivalent of magmatic_s_tpd (t SO2/d, "
                     "twice the S mass)",
            "sign": "retained_s_tpd and cumulative_retained_s_t are net: a negative value is "
                    "sulfur released (budget_direction says which, from the 5-95 % band)",
            "restarts": "rows of a window flagged mixed_sources get no running total, and the "
                        "total restarts at zero after them (budget_restarted = 1)",
            "band_width": "the 5-95 % band of the running total widens with every interval, "
                          "quiet ones included: each row's rate is uncertain (flux errors, the "
                          "magmatic SO2/CO2 of its source) and these uncertainties add up",
            "integration": "trapezoid rule between measurement times, per Monte Carlo draw",
            "max_gap_days": DEFAULT_MAX_GAP_DAYS if max_gap_days is None else float(max_gap_days),
            "bands": "5 %, 50 %, 95 % quantiles",
            "limits": BUDGET_LIMITS}
    for out, row in zip(doc["rows"], rows):
        for k in HYPOTHESIS_COLUMNS + (BUDGET_COLUMNS if "sulfur_budget" in doc else []):
            if k in row:
                out[k] = row[k]
        _round_row(out)
    return doc


BUDGET_LIMITS = ("Scrubbing within the ratio errors (up to about 35 % of the SO2 with 15 % errors, "
                 "measured on synthetic series) reads as magmatic: it counts as nothing retained and "
                 "pulls the source's magmatic SO2/CO2 down, so the cumulative retained sulfur tends "
                 "to be low (docs/sulfur-budget.md).")


def _round_row(out):
    """The hazard rounding rule (hazard_format.py) for the hypotheses and the budget."""
    from ventsource.workflow.hazard_format import probability_text
    for name in ("p_scrubbed", "p_released"):
        if name in out:
            out[f"{name}_text"] = probability_text(out[name], out.get(f"{name}_error"))
            out[name], out[f"{name}_error"] = round_probability(out[name], out.get(f"{name}_error"))
    for k in BUDGET_COLUMNS[4:]:
        if k in out:
            out[k] = round_tonnes(out[k])
