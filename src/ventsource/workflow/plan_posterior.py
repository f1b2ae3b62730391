"""Truths for `ventsource plan --data`: drawn from what the data already say.

With a measurement file the planning question is "given what we measured, what would
sharpen the answer next?", so the simulated truths come from the current posterior,
not from the prior (preposterior analysis at the current state of knowledge; Raiffa
and Schlaifer 1961, Applied Statistical Decision Theory, ch. 4; from memory). Up to
MAX_ROWS rows spread over the file are inverted as they were measured; each simulated
truth picks one of those rows (in turn), its hypothesis with the row's P(M0) (M0 or
the scrubbing model M1; a release hypothesis M2 is not simulated) and one posterior
draw of that hypothesis. The truths then go through the same candidates, noise and
inversions as prior truths do (workflow/plan.py).
"""
from __future__ import annotations

import numpy as np

from ventsource.common.errors import InputError

MAX_ROWS = 8


def rows_to_invert(n_rows, n_sim):
    """Indices of the rows inverted: at most MAX_ROWS (and n_sim), spread evenly."""
    k = int(min(n_rows, n_sim, MAX_ROWS))
    return sorted(set(np.linspace(0, n_rows - 1, k).round().astype(int).tolist()))


def _joint_draws(result, spec, model):
    """(n, len(free_names)) posterior draws of one hypothesis ("M0" or "M1"), the
    parameters M0 fixes (the scrubbed fraction) at their fixed value."""
    idata = result.idata if model == "M1" else result.idata_m0
    if idata is None:
        return np.zeros((0, len(spec.free_names)))
    post = idata.posterior
    n = post.sizes["chain"] * post.sizes["draw"]
    cols = [post[v].values.reshape(-1) if v in post.data_vars else np.zeros(n) for v in spec.free_names]
    x = np.column_stack(cols)
    return x[np.isfinite(x).all(axis=1)]


def posterior_truths(spec, series, ratio_names, n, seed, n_particles=300, progress=None):
    """(theta_full (n, p), is_m0 (n,), true ratios (n, m)) drawn from the posteriors of
    the file's rows (see the module note); every random step seeded from seed."""
    from ventsource.forward.model import ForwardModel
    from ventsource.workflow.plan import _invert_row_measurement
    rows = rows_to_invert(len(series), n)
    seeds = np.random.SeedSequence([int(seed), 0x9D5]).generate_state(len(rows))
    fitted = []
    for k, i in enumerate(rows):
        res = _invert_row_measurement(spec, series.measurements[i], int(seeds[k]), n_particles)
        if res is not None and res.p_magmatic is not None and np.isfinite(res.p_magmatic):
            fitted.append((res, _joint_draws(res, spec, "M0"), _joint_draws(res, spec, "M1")))
        if progress is not None:
            progress("inverting the data", k)
    if not fitted:
        raise InputError(f"plan: {series.path}: no row could be inverted to draw truths from")
    rng = np.random.default_rng([int(seed), 0x9D6])
    fm = ForwardModel(spec, ratio_names)
    thetas, m0s, ratios = [], [], []
    for attempt in range(50 * n):
        res, d0, d1 = fitted[attempt % len(fitted)]
        is_m0 = bool(rng.random() < res.p_magmatic and len(d0)) or not len(d1)
        pool = d0 if is_m0 else d1
        theta = spec.full(pool[rng.integers(len(pool))][None, :])
        r, status = fm.ratios_and_status(theta)
        if status[0] == 0 and np.all(np.isfinite(r) & (r > 0)):
            thetas.append(theta[0]), m0s.append(is_m0), ratios.append(r[0])
        if len(thetas) == n:
            return np.array(thetas), np.array(m0s), np.array(ratios)
    raise InputError(f"plan: {series.path}: too few posterior draws give gas with every candidate's ratios")
