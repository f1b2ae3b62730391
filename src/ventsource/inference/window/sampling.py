"""Inversion of a window of measurements that share one magma source.

The shared parameters are sampled by the tempered SMC engine; per row, pressure and
the scrubbed fraction are integrated out (window.py), or only the scrubbed fraction
when the prior's [window] table makes pressure shared. Per row the answer is
P(M0 | every row of the window), the mean over the shared posterior of the row's
responsibility pi0 Z0_i / (pi0 Z0_i + (1 - pi0) Z1_i), its Monte Carlo error from
the spread over independent runs, and draws of (model, pressure, scrubbed fraction)
from their conditional posterior given each shared draw.

The shared-source assumption is checked twice, by Bayes factors of "one source" (the
window model) against (a) "each row its own source" (each row's evidence under the same
prior, the shared parameters integrated over their prior by Monte Carlo) and (b) "a
change of source within the window" (the rows before and after a change point each
their own source, the point at a quarter, half or three quarters of the window, by
small runs of the window model with every row's SO2 free, so that the amount of
scrubbing or release does not weigh in). A window that spans a change of magma (fresh
recharge) is flagged "mixed_sources" rather than read as scrubbing: (a) below 0 or (b)
below -2. Measured: (a) alone missed a change to twice the CO2 and half the S in an
8-row window (+0.42), which (b) puts at -15.8. A window of one row runs neither check
(with one row, (a) compares the row with itself: its value was Monte Carlo noise, once
-0.052, enough to flag it); a window of fewer than split_min_rows (4) rows runs no (b):
it says so (WindowResult.source_check "not_run", flag source_check_not_run).
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from ventsource.ascent import observables
from ventsource.inference.engines.run_rhat import between_run_rhat
from ventsource.ascent.scrubbing import scrub
from ventsource.inference.engines.smc_engine import SMCError, tempered_smc
from ventsource.inference.evidence.bridge import Transform, support_bounds
from ventsource.inference.likelihood import Likelihood
from ventsource.inference.hypotheses.model_choice import predictive_check
from ventsource.inference.row.smc_measurement import model_averaged_quantiles
from ventsource.inference.window.progress import WindowProgress, window_costs
from ventsource.inference.window.source_check import independent_log_z, persistence_summary, shared_source_log10_bf
from ventsource.inference.window.target import So2FreeWindowTarget, WindowTarget
from ventsource.chemistry.species import INDEX

_SO2, _CO2 = INDEX["SO2"], INDEX["CO2"]
SPLIT_FRACTIONS = (0.25, 0.5, 0.75)   # where in the window a change of source may lie
SPLIT_MIN_SIDE = 2                    # rows on each side of a split
# Forward solves per draw in the change-of-source check (48 in the window), 2 quadrature
# points per interval. Against 400 solves on near-posterior draws of two 8-row windows,
# the error of a window's log Z had an sd of 0.33-0.38 nats with 24, and 1.0-2.3 with 12.
SPLIT_SOLVES = 24

WINDOW_DEFAULTS = dict(n_particles=200, n_runs=4, ess_target=0.5, max_moves=30, move_rule="ridge", alpha=0.01,
                       n_source_check=2000, pi0=None, kind=None, dof=None, smc_rhat_max=1.02, max_error_p=0.05,
                       split_check=True, split_particles=100, split_runs=2, split_min_rows=2 * SPLIT_MIN_SIDE,
                       split_flag_below=-2.0, proposal_components=1, final_moves=60, split_max_moves=20)
_ENGINE_KEYS = ("ess_target", "max_moves", "move_rule", "proposal_components", "final_moves")  # tempered_smc's


class WindowError(ValueError):
    """The window cannot be inverted; one-line message."""


@dataclass
class RowResult:
    label: str
    p_magmatic: float
    p_magmatic_error: float
    scrubbed_model_averaged: tuple      # (q05, median, q95)
    scrubbed_if_scrubbed: tuple         # (q05, median, q95) of the M1 draws
    pressure_bar: tuple                 # (q05, median, q95), model-averaged
    predictive: dict                    # ratio -> (q05, median, q95)
    flags: list
    hypotheses: dict | None = None      # with a release prior: P(M0), P(M1), P(M2) and errors
    budget_draws: dict | None = None    # per draw: hypothesis, magmatic SO2/CO2, SO2 factor, pressure
    pressure_if_scrubbed: tuple = (np.nan,) * 3   # (q05, median, q95) of the M1 draws


@dataclass
class WindowResult:
    rows: list
    shared_names: tuple
    shared_draws: np.ndarray            # (runs, particles, shared)
    log_z: float
    log_z_error: float
    log10_bf_shared: float              # one source vs each row its own source
    flags: list
    diagnostics: dict = field(default_factory=dict)
    log10_bf_split: float = float("nan")        # one source vs a change of source mid-window
    log10_bf_split_error: float = float("nan")
    pi0: float | None = None            # prior P(M0) (with [hypotheses]: M0's three-way share)
    information: dict | None = None     # how much the data said about the shared parameters
    source_check: str = "run"           # the change-of-source check: run, not_run, failed

    def summary(self, model: str = "averaged"):
        """pandas DataFrame, one row per measurement: P(M0) and its error, the scrubbed
        fraction (model="averaged", the default: averaged over M0 and M1; "M1": if
        scrubbed) and the pressure (model-averaged), 5 % / median / 95 %, and the flags."""
        import pandas as pd
        key = {"averaged": "scrubbed_model_averaged", "M1": "scrubbed_if_scrubbed",
               "scrubbed": "scrubbed_if_scrubbed"}.get(model)
        if key is None:
            raise WindowError(f"window summary: unknown model {model!r}; known: averaged, M1")
        rows = []
        for r in self.rows:
            row = {"label": r.label, "p_magmatic": r.p_magmatic, "p_magmatic_error": r.p_magmatic_error}
            for name, q in (("scrubbed_so2", getattr(r, key)), ("pressure_bar", r.pressure_bar)):
                row.update({f"{name}_q05": q[0], f"{name}_median": q[1], f"{name}_q95": q[2]})
            rows.append(dict(row, flags=";".join(r.flags)))
        return pd.DataFrame(rows)

    def idata(self):
        """The shared posterior as ArviZ InferenceData (units in attributes)."""
        import arviz as az
        from ventsource.inference.row.result import CAUTION, PARAMETER_UNITS
        post = {n: self.shared_draws[:, :, j] for j, n in enumerate(self.shared_names)}
        idata = az.from_dict(posterior=post)
        for n in self.shared_names:
            idata.posterior[n].attrs["units"] = PARAMETER_UNITS.get(n, "")
        idata.posterior.attrs["model"] = "window: shared magma source"
        idata.posterior.attrs["caution"] = CAUTION
        idata.posterior.attrs["log10_bayes_factor_one_source"] = self.log10_bf_shared
        idata.posterior.attrs["log10_bayes_factor_one_source_vs_split"] = self.log10_bf_split
        rho = (self.diagnostics or {}).get("hypothesis_persistence")
        if rho is not None:   # integrated out in every draw, so a summary rather than draws
            idata.posterior.attrs["hypothesis_persistence"] = (
                f"mean {rho['mean']:.3f}, 5 % {rho['q05']:.3f}, median {rho['median']:.3f}, 95 % {rho['q95']:.3f}")
        return idata


def _likelihoods(measurements, forward, kind, dof):
    return [Likelihood(m, kind=kind, dof=dof, prediction_names=forward.ratio_names) for m in measurements]


def infer_window(measurements, prior, forward=None, seed=0, progress=None, **options):
    """progress: None, or report(fraction) called as the window advances (fraction in [0, 1],
    never decreasing; window/progress.py); the numbers do not depend on it."""
    unknown = sorted(set(options) - set(WINDOW_DEFAULTS))
    if unknown:
        raise WindowError(f"window: unknown option(s) {unknown}; known: {sorted(WINDOW_DEFAULTS)}")
    opt = dict(WINDOW_DEFAULTS, **options)
    if forward is None:
        from ventsource.forward.model import ForwardModel
        names = tuple(dict.fromkeys(n for m in measurements for n in m.ratio_names))
        forward = ForwardModel(prior, ratio_names=names)
    kind = opt["kind"] or prior.likelihood.get("kind", "normal")
    dof = opt["dof"] or prior.likelihood.get("dof", 4.0)
    pi0 = opt["pi0"] if opt["pi0"] is not None else prior.p_magmatic
    target_liks = _likelihoods(measurements, forward, kind, dof)
    target = WindowTarget(prior, forward, target_liks, pi0)
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(4)]
    split_ran = bool(opt["split_check"] and len(measurements) >= opt["split_min_rows"])
    bar = WindowProgress(progress or (lambda f: None),
                         window_costs(len(measurements), opt, check_run_rows(len(measurements), opt)))
    res = _run_smc(target, seeds[0], opt["n_particles"], opt["n_runs"], opt, bar.main_stage)
    rng = np.random.default_rng(seeds[1])
    rows = _row_results(target, res, measurements, rng, opt)
    log_z, log_z_err = res.log_z_mean_error
    bf = np.nan   # one row: "one source against each row its own" compares the row with itself
    if len(measurements) > 1:
        R, N = res.theta.shape[:2]
        lz = np.stack([res.aux[f"lz{k}"].reshape(R * N, -1) for k in range(target.n_hypotheses)], axis=1)
        log_z_check = independent_log_z(target, log_z, lz, np.full(R * N, -np.log(R * N)))
        bf = shared_source_log10_bf(target, log_z_check, np.random.default_rng(seeds[2]), opt["n_source_check"])
    bar.rows_done()
    split_bf, split_err, check_cpu = np.nan, np.nan, 0.0
    if split_ran:
        start = time.process_time()
        split_bf, split_err = _split_source_log10_bf(prior, forward, target_liks, seeds[3], opt,
                                                     bar.check_stage)
        check_cpu = time.process_time() - start
    rhat_max = between_run_rhat(res.theta)
    prior_p0 = float(np.exp(target.log_pis[0]))  # pi0, less the release share with [hypotheses]
    flags = _window_flags(res, rhat_max, bf, split_bf, opt, split_ran)
    diag = {"n_forward_evals": int(res.n_evals), "stages": res.n_stages.tolist(),
            "distinct_particles": res.distinct.tolist(), "kish_ess_last_stage": res.kish_ess_last.tolist(),
            "log_z_per_run": res.log_z.tolist(), "rhat_max": rhat_max,
            "n_solve_pressures": target.n_solve, "n_quadrature_pressures": target.p_quad.size,
            "per_row": list(target.per_row), "source_check_cpu_s": check_cpu,
            "moves": res.move_summary(), "hypothesis_persistence": persistence_summary(target, res)}
    out = WindowResult(rows, tuple(target.shared_prior.free_names), res.theta, log_z, log_z_err, bf,
                       flags, diag, split_bf, split_err, prior_p0,
                       _shared_information(target.shared_prior, res.theta, rows, prior_p0, seed),
                       source_check=_source_check_state(split_ran, split_bf))
    bar.finished()
    return out


def _source_check_state(split_ran, split_bf):
    """The change-of-source check: "run", "failed" (its SMC runs failed) or "not_run"
    (fewer rows than split_min_rows, or split_check off; flag source_check_not_run)."""
    return "not_run" if not split_ran else ("run" if np.isfinite(split_bf) else "failed")


def _shared_information(shared_prior, theta, rows, pi0, seed):
    """Information summary of the shared parameters (prior draws on their own stream, so
    the window's other numbers keep theirs); near_prior on each row whose P(M0) stayed
    within NEAR_PRIOR_SHIFT of pi0 (the scrubbed-fraction part of the rule is per row
    and not available from the shared draws)."""
    from ventsource.inference.information import NEAR_PRIOR_SHIFT, information_summary
    for r in rows:
        if np.isfinite(r.p_magmatic) and abs(r.p_magmatic - pi0) < NEAR_PRIOR_SHIFT:
            r.flags.append("near_prior")
    names = tuple(shared_prior.free_names)
    if not names:
        return None
    prior = np.asarray(shared_prior.sample(np.random.default_rng([int(seed), 0x1F0]), 4000), float)
    return information_summary(names, prior, np.asarray(theta, float).reshape(-1, len(names)))


def _run_smc(target, seed, n_particles, n_runs, opt, on_stage=None):
    sp = target.shared_prior
    try:
        return tempered_smc(sp.log_prob, target, sp.sample, Transform(support_bounds(sp)),
                            n_particles=n_particles, n_runs=n_runs, seed=seed,
                            on_stage=on_stage, **{k: opt[k] for k in _ENGINE_KEYS})
    except SMCError as exc:
        raise WindowError(f"window: {exc}") from None


def check_run_rows(n_rows, opt):
    """Rows of each SMC run of the change-of-source check, in the order they run ([] when
    the check does not run)."""
    if not (opt["split_check"] and n_rows >= opt["split_min_rows"]):
        return []
    return [n_rows] + [k for c in split_points(n_rows) for k in (c, n_rows - c)]


def expected_cost(n_rows, options=None):
    """Relative cost of a window of n_rows with these options (for progress bars only)."""
    opt = dict(WINDOW_DEFAULTS, **{k: v for k, v in (options or {}).items() if k in WINDOW_DEFAULTS})
    main, rows, checks = window_costs(n_rows, opt, check_run_rows(n_rows, opt))
    return main + rows + sum(checks)


def split_points(n_rows):
    """Row indices where the split check cuts a window of n_rows (time order)."""
    cuts = {int(round(f * n_rows)) for f in SPLIT_FRACTIONS}
    return sorted(c for c in cuts if SPLIT_MIN_SIDE <= c <= n_rows - SPLIT_MIN_SIDE)


def _log_evidence(prior, forward, liks, seed, opt, on_stage=None):
    """(log Z, error) of the window model with every row's SO2 free."""
    target = So2FreeWindowTarget(prior, forward, liks, n_solve=SPLIT_SOLVES)
    check = dict(opt, move_rule="acceptance", max_moves=opt["split_max_moves"])  # as its thresholds were measured
    return _run_smc(target, seed, opt["split_particles"], opt["split_runs"], check, on_stage).log_z_mean_error


def _split_source_log10_bf(prior, forward, liks, seed, opt, on_stage=None):
    """log10 [Z(one source) / Z(a change of source)] and its Monte Carlo error.

    The alternative: the rows before and after a change point each from their own
    source, the change point equally likely at a quarter, half or three quarters of
    the window (Z averaged over them: a change near either end is not missed, and
    looking in three places is paid for). Every evidence is of the window model with
    each row's SO2 free (So2FreeWindowTarget), so that only what scrubbing and release
    leave untouched speaks: with the scrubbing hypotheses in, a window whose second
    half is heavily scrubbed favoured an S-poor second source (log10 BF -4.0 for 10
    rows scrubbed 46-99 % after 10 rows of 0-37 %), since each near-total scrubbing
    pays the prior of its scrubbed fraction and a second source pays once. The runs
    are small: the evidences need a few tenths of a decade, far below the signal of
    a real change.

    The flag threshold is -2 (Jeffreys' scale: a factor 100 is "decisive"; Jeffreys
    1961, Theory of Probability, appendix B; from memory); measured values are in
    docs/running.md."""
    cuts = split_points(len(liks))
    seeds = [int(x) for x in np.random.SeedSequence(seed).generate_state(1 + 2 * len(cuts))]
    try:
        lz_one, err_one = _log_evidence(prior, forward, liks, seeds[0], opt, on_stage)
        parts = [[_log_evidence(prior, forward, side, sd, opt, on_stage) for side, sd in
                  zip((liks[:c], liks[c:]), seeds[1 + 2 * k:3 + 2 * k])] for k, c in enumerate(cuts)]
    except WindowError:   # the check failed, not the window: flagged, the rows stand
        return np.nan, np.nan
    return split_log10_bf(lz_one, err_one, parts)


def split_log10_bf(lz_one, err_one, parts):
    """(log10 BF one source vs a change at one of the cuts (uniform over them), its error)
    from the window's (log Z, error) and each cut's two sides' (log Z, error)."""
    lz_split = np.array([a[0] + b[0] for a, b in parts])
    var_split = np.array([np.nan_to_num(a[1]) ** 2 + np.nan_to_num(b[1]) ** 2 for a, b in parts])
    weight = np.exp(lz_split - special.logsumexp(lz_split))
    lz_change = special.logsumexp(lz_split) - np.log(len(parts))
    var = np.nan_to_num(err_one) ** 2 + float(np.sum(weight ** 2 * var_split))
    return float((lz_one - lz_change) / np.log(10.0)), float(np.sqrt(var) / np.log(10.0))


def _row_results(target, res, measurements, rng, opt):
    R, N, d = res.theta.shape
    psi = res.theta.reshape(R * N, d)
    gas, h2s, edges = target.gas_on_grid(psi)
    grid = (gas, h2s, edges, target.log_weights(psi, edges))   # shared by every row
    lz = [res.aux[f"lz{k}"].reshape(R * N, -1) for k in range(target.n_hypotheses)]
    resp = target.row_states(lz)
    out = []
    for i, meas in enumerate(measurements):
        p_runs = np.stack([np.nan_to_num(resp[:, i, k]).reshape(R, N).mean(axis=1)
                           for k in range(resp.shape[2])], axis=1)            # (R, H)
        # one row's (draws, K) likelihoods at a time: all rows at once held (hypotheses,
        # rows, draws, K) arrays, 0.4 GiB for 336 rows of 800 draws
        lls = [ll[0] for ll in target.row_log_likelihoods(gas, h2s, rows=[i])]
        draws = _row_draws(target, i, grid, lls, resp[:, i], rng, psi)
        row = _summarise_row(meas, target, i, p_runs, draws, rng, opt)
        row.flags += _calibration_flag(target, psi, draws["pressure"])
        out.append(row)
    return out


def _calibration_flag(target, psi, pressure):
    """`outside_calibration` of a window row, as for a single row (calibration_flag.py): the
    row's pressure draws with the shared temperature of the same shared draws."""
    from ventsource.inference.calibration_flag import FLAG, FLAG_SHARE, shares_outside
    names = tuple(target.shared_prior.parameter_names)
    temperature = target.shared_prior.full(psi)[:, names.index("temperature_c")]
    ok = np.isfinite(pressure)
    shares = shares_outside(target.prior, {"pressure_bar": pressure[ok], "temperature_c": temperature[ok]})
    return [FLAG] if any(v > FLAG_SHARE for v in shares.values()) else []


def _row_draws(target, i, grid, lls, resp, rng, psi):
    """One (model, pressure, s or r, predicted ratios) draw per shared draw."""
    gas, h2s, edges, log_w = grid
    n, K, _ = gas.shape
    resp = np.nan_to_num(resp)
    if resp.shape[1] == 2:   # the two-hypothesis draws, random stream as before
        model = np.where(rng.random(n) < resp[:, 0], 0, 1)
    else:
        cum = np.cumsum(resp, axis=1)
        model = np.minimum((cum < rng.random(n)[:, None] * cum[:, -1:]).sum(axis=1), 2)
    magmatic = model == 0
    logp = np.stack(lls)[model, np.arange(n)] + log_w
    logp = logp - special.logsumexp(logp, axis=1, keepdims=True)
    cdf = np.cumsum(np.exp(logp), axis=1)
    k = np.minimum((cdf < rng.random(n)[:, None]).sum(axis=1), K - 1)
    rows = np.arange(n)
    g = gas[rows, k]
    ok = np.isfinite(g).all(axis=1)
    g = np.where(ok[:, None], g, 1.0)
    pressure = target.row_pressures(psi, k, rng, edges)  # the draw's own when pressure is shared
    h = h2s[rows] if np.ndim(h2s) else h2s
    s = np.where(model == 1, target.marginals[i].sample(g, rng, h), 0.0)
    gas_out = scrub(g, s, target.forward.product, 0.0, h)
    factor = 1.0 - s
    if target.releases is not None:
        r = np.where(model == 2, target.releases[i].sample(g, rng), 0.0)
        gas_out[:, _SO2] *= 1.0 + r
        factor = np.where(model == 2, 1.0 + r, factor)
    pred = observables.ratios(gas_out, target.forward.ratio_names)
    pred[~ok] = np.nan
    with np.errstate(divide="ignore", invalid="ignore"):
        so2_co2 = np.where(ok, g[:, _SO2] / g[:, _CO2], np.nan)
    return {"magmatic": magmatic, "model": model, "pressure": pressure, "s": s, "pred": pred, "ok": ok,
            "budget": {"model": model, "so2_co2_magmatic": so2_co2, "so2_factor": factor, "pressure_bar": pressure}}


def _q(x):
    x = x[np.isfinite(x)]
    return tuple(float(v) for v in np.quantile(x, [0.05, 0.5, 0.95])) if x.size else (np.nan,) * 3


def _summarise_row(meas, target, i, p_runs, draws, rng, opt):
    lik = target.marginals[i].lik
    R = p_runs.shape[0]
    p_all = p_runs.mean(axis=0)
    err_all = p_runs.std(axis=0, ddof=1) / np.sqrt(R) if R > 1 else np.full(p_all.size, np.nan)
    p, err = float(p_all[0]), float(err_all[0])
    s1 = draws["s"][draws["model"] == 1]
    check = predictive_check(lik, draws["pred"][draws["ok"]], rng, opt["alpha"])
    y_rep = np.exp(lik.simulate_log(draws["pred"][draws["ok"]], rng))
    pp = {name: _q(y_rep[:, j]) for j, name in enumerate(lik.observed_names)}
    flags = [] if check.reproduces else ["unexplained"]
    if np.isfinite(err) and err > opt["max_error_p"]:
        flags.append("p_magmatic_error_large")
    hyp = None
    if target.releases is not None:
        averaged = tuple(model_averaged_quantiles(1.0 - float(p_all[1]), s1))  # s = 0 under M0, M2
        hyp = {"p": p_all.tolist(), "error": err_all.tolist()}
    else:
        averaged = tuple(model_averaged_quantiles(p, s1))
    return RowResult(meas.label, p, err, averaged, _q(s1), _q(draws["pressure"]), pp, flags,
                     hypotheses=hyp, budget_draws=draws["budget"],
                     pressure_if_scrubbed=_q(draws["pressure"][draws["model"] == 1]))


def _window_flags(res, rhat_max, bf, split_bf, opt, split_ran=False):
    flags = []
    if split_ran and not np.isfinite(split_bf):
        flags.append("source_check_failed")
    flags += [] if split_ran else ["source_check_not_run"]
    if bf < 0.0 or split_bf < opt["split_flag_below"]:
        flags.append("mixed_sources")
    if rhat_max > opt["smc_rhat_max"]:
        flags.append("rhat_high")
    if min(res.distinct) < 0.25 * res.theta.shape[1]:
        flags.append("few_distinct_particles")
    return flags
