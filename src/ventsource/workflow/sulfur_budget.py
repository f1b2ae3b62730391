"""Where the sulfur went: per-row retained sulfur and its running total over a series.

Per posterior draw of a row the inversion gives the hypothesis, the magmatic SO2/CO2
(mol/mol) and the factor f that the emitted SO2 bears to the magmatic SO2 (1 magmatic,
1 - s scrubbed, 1 + r released). With the measured fluxes (t/d):

* magmatic SO2 flux: from the CO2 flux whenever the row has one (CO2 is neither
  scrubbed nor released): F_CO2 x (SO2/CO2)_magmatic x M_SO2 / M_CO2; otherwise from
  an SO2 flux above detection: F_SO2 / f; with neither, undetermined (no budget);
* emitted SO2 flux: magmatic x f on the CO2 basis (the ratios fix f better than the
  quotient of two fluxes does), the measured SO2 flux on the SO2 basis;
* retained sulfur rate (t/d of S kept below the surface): (magmatic - emitted) SO2 x
  M_S / M_SO2; negative while stored sulfur is released.

Flux errors are log-normal with sigma_ln = ln(1 + relative sigma), as for the ratios; a
flux below detection `<x` is drawn uniformly on (0, x). The running total integrates
the rate between measurement times by the trapezoid rule, per Monte Carlo draw (draws
of different rows are independent); an interval longer than the gap limit, or next to a
row without a budget, is not bridged: it adds nothing and its later row is marked. Rows
of a window flagged mixed_sources (no one source shared by its rows) get their own rates
but no running total, and the total restarts at zero after them (budget_restarted 1): a
sum through a change of magma would add up rates of two sources as if they were one.
Every budget mass is given as S (t S, t S/d); the magmatic flux also as SO2 (t SO2/d),
twice the S mass. A negative retained rate or total means sulfur released.
Molar masses (g/mol): S 32.06, SO2 64.07, CO2 44.01 (IUPAC standard atomic weights,
common practice, no source).
"""
from __future__ import annotations

import numpy as np

M_S, M_SO2, M_CO2 = 32.06, 64.07, 44.01
S_PER_SO2 = M_S / M_SO2
SO2_PER_CO2_MASS = M_SO2 / M_CO2   # mass ratio = molar ratio x 64.07 / 44.01
N_BUDGET_DRAWS = 1000
QUANTILES = (0.05, 0.5, 0.95)


def flux_draws(value, censoring, rel_sigma, rng, n):
    """n draws of one flux (t/d); NaN for a missing cell."""
    if not np.isfinite(value):
        return np.full(n, np.nan)
    if censoring == -1:
        return rng.uniform(0.0, value, n)
    return value * np.exp(np.log1p(rel_sigma) * rng.standard_normal(n))


def _resample(draws, rng, n, index=None):
    """Budget draws of one row resampled to n: at the given draw indices (rows of one
    window share their source draw at equal index, keeping their joint posterior), or
    with replacement; a non-finite draw is replaced by a random finite one."""
    ratio = np.asarray(draws["so2_co2_magmatic"], float)
    factor = np.asarray(draws["so2_factor"], float)
    finite = np.isfinite(ratio) & np.isfinite(factor)
    ok = np.flatnonzero(finite)
    if ok.size == 0:
        return np.full(n, np.nan), np.full(n, np.nan)
    pick = rng.choice(ok, size=n, replace=True)
    if index is not None and ratio.size:
        idx = np.asarray(index) % ratio.size
        pick = np.where(finite[idx], idx, pick)
    return ratio[pick], factor[pick]


def row_rates(draws, fluxes, rng, n=N_BUDGET_DRAWS, index=None):
    """(magmatic SO2 t/d, retained S t/d, basis) for one row; rates are (n,) draws.

    fluxes: {"SO2 flux": (value, censoring, sigma), "CO2 flux": (...)} of this row."""
    ratio, factor = _resample(draws, rng, n, index)
    so2 = flux_draws(*fluxes.get("SO2 flux", (np.nan, 0, 0.0)), rng, n)
    co2 = flux_draws(*fluxes.get("CO2 flux", (np.nan, 0, 0.0)), rng, n)
    so2_exact = np.isfinite(fluxes.get("SO2 flux", (np.nan,))[0]) and fluxes["SO2 flux"][1] == 0
    if np.isfinite(co2).all():
        # emitted = magmatic x f: the ratios (15 %) fix f better than the quotient of two
        # fluxes (about 28 % for 20 % each), and flux noise does not pile up in the total
        basis, magmatic = "CO2 flux", co2 * ratio * SO2_PER_CO2_MASS
        emitted = magmatic * factor
    elif so2_exact:
        basis, magmatic, emitted = "SO2 flux", so2 / factor, so2
    else:
        return np.full(n, np.nan), np.full(n, np.nan), "none"
    return magmatic, (magmatic - emitted) * S_PER_SO2, basis


def cumulative(times_s, rates, max_gap_days, excluded=None):
    """Running total (t) per draw, (rows, n), a bridged flag and a restarted flag per row.

    Trapezoid rule between consecutive rows (sorted by time); an interval longer than
    max_gap_days or touching a row without rates adds nothing (bridged False). An
    excluded row (a window flagged mixed_sources) gets no total and resets it to zero;
    the first row after it is marked restarted."""
    order = np.argsort(times_s, kind="stable")
    total = np.zeros(rates.shape[1])
    out = np.full(rates.shape, np.nan)
    bridged = np.zeros(len(order), dtype=bool)
    restarted = np.zeros(len(order), dtype=bool)
    excluded = np.zeros(len(order), dtype=bool) if excluded is None else np.asarray(excluded, bool)
    prev, reset = None, False
    for i in order:
        if excluded[i]:
            total, prev, reset = np.zeros(rates.shape[1]), None, True
            continue
        if reset and np.isfinite(rates[i]).all():
            restarted[i], reset = True, False
        ok = np.isfinite(rates[i]).all()
        if prev is not None and ok:
            dt_days = (times_s[i] - times_s[prev]) / 86400.0
            if dt_days <= max_gap_days and np.isfinite(rates[prev]).all():
                total = total + 0.5 * (rates[prev] + rates[i]) * dt_days
                bridged[i] = True
        if ok:
            out[i] = total
            prev = i
        else:
            prev = None  # the next row starts a new piece: the gap is not bridged
    return out, bridged, restarted


def direction(q05, q95):
    """'retained', 'released' or 'not resolved' from the 5-95 % band of a net rate."""
    if q05 is None or q95 is None:
        return None
    return "retained" if q05 > 0 else "released" if q95 < 0 else "not resolved"


def quantiles(x):
    x = np.asarray(x, float)
    if not np.isfinite(x).all() or x.size == 0:
        return (None, None, None)
    return tuple(float(v) for v in np.quantile(x, QUANTILES))


def series_budget(times, row_draws, flux_series, seed, max_gap_days, excluded=None):
    """Per row: dict of budget numbers (quantiles 5/50/95 %), in row order.

    times: datetime64 per row; row_draws: budget draws per row (None: no budget);
    flux_series: workflow.flux_columns.FluxSeries; excluded: rows kept out of the running
    total (a window flagged mixed_sources)."""
    n_rows = len(times)
    rng = np.random.default_rng([int(seed), 0x5B])
    mag = np.full((n_rows, N_BUDGET_DRAWS), np.nan)
    ret = np.full((n_rows, N_BUDGET_DRAWS), np.nan)
    basis = []
    common = rng.integers(0, 2**31, N_BUDGET_DRAWS)  # one posterior draw index for every row
    for i in range(n_rows):
        cells = {c: (flux_series.values[c][i], flux_series.censoring[c][i], flux_series.sigma[c][i])
                 for c in flux_series.values}
        if row_draws[i] is None:
            basis.append("none")
            continue
        mag[i], ret[i], b = row_rates(row_draws[i], cells, rng, index=common)
        basis.append(b)
    t = np.array(times, dtype="datetime64[s]").astype(np.int64).astype(float)
    cum, bridged, restarted = cumulative(t, ret, max_gap_days, excluded)
    first = int(np.argmin(t))
    rows = []
    for i in range(n_rows):
        # 1: the interval before this row is not in the running total (gap or no budget)
        row = {"budget_basis": basis[i], "budget_gap_before": int(i != first and not bridged[i]),
               "budget_restarted": int(restarted[i])}
        for tag, x in (("magmatic_s_tpd", mag[i] * S_PER_SO2), ("magmatic_so2_flux_tpd", mag[i]),
                       ("retained_s_tpd", ret[i]), ("cumulative_retained_s_t", cum[i])):
            row[f"{tag}_q05"], row[f"{tag}_median"], row[f"{tag}_q95"] = quantiles(x)
        row["budget_direction"] = direction(row["retained_s_tpd_q05"], row["retained_s_tpd_q95"])
        rows.append(row)
    return rows


BUDGET_COLUMNS = ["budget_basis", "budget_gap_before", "budget_restarted", "budget_direction"] + [
    f"{tag}_{q}" for tag in ("magmatic_s_tpd", "magmatic_so2_flux_tpd", "retained_s_tpd",
                             "cumulative_retained_s_t")
    for q in ("q05", "median", "q95")]
