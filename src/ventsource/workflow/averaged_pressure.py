"""The degassing pressure averaged over the hypotheses, for rows inverted one by one.

A window run reports the model-averaged pressure; a row's own posterior summary is the
scrubbing model's (M1) alone. The series figure shows one quantity in both modes: the
mixture of the M0 and M1 posterior draws with weights P(M0) and 1 - P(M0) (Bayesian
model averaging, Hoeting et al. 1999, Statistical Science 14, 382-417, eq. 1).
"""
import numpy as np

QUANTILES = (0.05, 0.5, 0.95)


def mixture_quantiles(draws_m0, draws_m1, p_m0, q=QUANTILES):
    """Quantiles of the mixture p_m0 x (draws_m0) + (1 - p_m0) x (draws_m1).

    Each sample carries equal weight within its model; the quantile is the smallest draw
    whose cumulative weight reaches q (numpy's 'inverted_cdf' for equal weights)."""
    x0 = np.asarray(draws_m0, float).ravel()
    x1 = np.asarray(draws_m1, float).ravel()
    x0, x1 = x0[np.isfinite(x0)], x1[np.isfinite(x1)]
    if not np.isfinite(p_m0) or (x0.size == 0 and x1.size == 0):
        return (float("nan"),) * len(q)
    w0 = float(p_m0) if x1.size else 1.0
    w0 = w0 if x0.size else 0.0
    x = np.concatenate([x0, x1])
    w = np.concatenate([np.full(x0.size, w0 / max(x0.size, 1)), np.full(x1.size, (1.0 - w0) / max(x1.size, 1))])
    order = np.argsort(x, kind="stable")
    cum = np.cumsum(w[order])
    cum /= cum[-1]
    idx = [min(int(np.searchsorted(cum, qq - 1e-12, side="left")), x.size - 1) for qq in q]
    return tuple(float(x[order][i]) for i in idx)


def averaged_pressure_fields(result, name="pressure_bar"):
    """{pressure_bar_avg_q05/median/q95} of one row's result, or {} without the parameter."""
    m0, m1 = getattr(result, "idata_m0", None), getattr(result, "idata", None)
    if m0 is None or m1 is None or name not in m1.posterior or name not in m0.posterior:
        return {}
    q = mixture_quantiles(m0.posterior[name].values, m1.posterior[name].values, result.p_magmatic)
    return {f"{name}_avg_q05": q[0], f"{name}_avg_median": q[1], f"{name}_avg_q95": q[2]}
