"""The model-averaged posterior of one row: M0's and M1's draws pooled with weights
P(M0) and 1 - P(M0) (Hoeting et al. 1999, Statistical Science 14:382, eq. 1), a
parameter fixed under M0 (the scrubbed fraction) taking its fixed value there."""
import numpy as np

QUANTILES = (0.05, 0.5, 0.95)


def weighted_quantiles(x, w, qs=QUANTILES):
    """Quantiles of draws x with weights w: the inverse of the weighted empirical CDF,
    interpolated between the midpoints of each draw's weight (with equal weights, the
    Hazen plotting position (i - 0.5) / n; common practice, no source)."""
    order = np.argsort(x, kind="stable")
    xs, ws = x[order], w[order]
    mid = (np.cumsum(ws) - 0.5 * ws) / ws.sum()
    return [float(np.interp(q, mid, xs)) for q in qs]


def _pooled(result):
    """{parameter: (draws, weights, units)} of the M0 + M1 mixture."""
    post1 = result.idata.posterior
    post0 = None if result.idata_m0 is None else result.idata_m0.posterior
    p0 = result.p_magmatic
    hyp = result.hypotheses
    if hyp is not None and p0 is not None:  # three hypotheses: M0 and M1, renormalised
        p = hyp.get("p") if isinstance(hyp, dict) else None
        if p is not None and len(p) >= 2 and (p[0] + p[1]) > 0:
            p0 = p[0] / (p[0] + p[1])
    if p0 is None or not np.isfinite(p0) or post0 is None:
        p0 = 0.0  # no model choice: the M1 posterior alone
    n0 = 0 if post0 is None else post0.sizes["chain"] * post0.sizes["draw"]
    out = {}
    for v in post1.data_vars:
        x1 = post1[v].values.reshape(-1)
        if n0 == 0 or p0 == 0.0:
            x0 = np.zeros(0)
        elif v in post0:
            x0 = post0[v].values.reshape(-1)
        else:  # fixed under M0
            x0 = np.full(n0, _fixed_value(result, v))
        x = np.concatenate([x0, x1])
        w = np.concatenate([np.full(x0.size, p0 / max(x0.size, 1)), np.full(x1.size, (1 - p0) / x1.size)])
        keep = np.isfinite(x) & (w > 0)
        out[v] = (x[keep], w[keep], post1[v].attrs.get("units", ""))
    return out


def _fixed_value(result, name):
    """Value of a parameter M0 fixes (0 for the scrubbed fraction)."""
    run0 = (result.runs or {}).get("M0")
    fixed = getattr(getattr(run0, "prior", None), "fixed_values", None) or {}
    return float(fixed.get(name, 0.0))


def averaged_summary(result):
    """pandas DataFrame: units, median, 5%, 95%, mean, sd of the model-averaged posterior."""
    import pandas as pd
    rows = []
    for v, (x, w, units) in _pooled(result).items():
        q05, q50, q95 = weighted_quantiles(x, w)
        mean = float(np.sum(w * x) / np.sum(w))
        sd = float(np.sqrt(np.sum(w * (x - mean) ** 2) / np.sum(w)))
        rows.append({"parameter": v, "units": units, "median": q50, "5%": q05, "95%": q95,
                     "mean": mean, "sd": sd})
    return pd.DataFrame(rows).set_index("parameter")
