"""Which added measurement would sharpen the answer most: a preposterior comparison.

For each candidate (add a ratio, tighten the errors, measure the same gas more often)
the same simulated truths are measured and inverted: truths are drawn from the prior
(the purely magmatic hypothesis M0 with probability pi0, the scrubbing model otherwise),
each gets one standard-normal noise draw per ratio shared by every candidate (common
random numbers: the differences between candidates carry less noise than the
candidates' own averages), and each candidate's data are inverted with `infer`.
Averaged over the truths (preposterior analysis; Raiffa and Schlaifer 1961, Applied
Statistical Decision Theory, ch. 4; from memory):

* the Brier score (P(M0 | data) - [truth is M0])^2 (Brier 1950, Monthly Weather
  Review 78, 1-3): lower is better;
* the 90 % width of the scrubbed fraction (model-averaged) and of the pressure;
* the shift |P(M0) - pi0| and the contraction of the scrubbed fraction;

each with its Monte Carlo error (sd / sqrt(n) over the simulated data sets) and the
paired difference from the baseline with its own error.

"k rows of the same gas" is k measurements of one unchanged gas (same source, same
scrubbing): their mean in log units has sigma_ln / sqrt(k), so it is inverted as one
measurement with that error. A real series changes between rows; this is an upper
bound on what more rows give. "k rows per window" measures the same gas k times with
independent noise and inverts the rows together with the window model, which lets
each row have its own pressure and scrubbing as it must for a real series: what more
rows give when the inversion cannot know the gas did not change (the first row's
numbers are scored).
"""
from __future__ import annotations

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError

DEFAULT_RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
METRICS = ("brier", "width90_scrubbed", "width90_pressure", "shift_p_magmatic",
           "contraction_scrubbed")


WINDOW_CANDIDATE = "{k} rows per window (window model)"   # opt-in: ~20 CPU-s per data set
MELT_INCLUSION_SD = {"s_ppm": 150.0, "dfmq": 0.15}  # as tests/data/arc_basalt_constrained.toml


def default_candidates(base_ratios, base_sigma, free_names=(), window_rows=0):
    """{name: (ratio names, relative sigma per ratio, repeats, {parameter: constraint sd})}:
    the baseline first; the melt-inclusion candidate when S and dFMQ are free; with
    window_rows k (2 to 8), k rows inverted by the window model (5th element "window")."""
    base = tuple(base_ratios)
    sig = dict(zip(base, np.broadcast_to(np.asarray(base_sigma, float), (len(base),))))
    out = {"baseline": (base, sig, 1)}
    adds = [("H2/H2O",), ("CO/CO2",), ("H2/H2O", "CO/CO2")]
    if not _sulfur_total_known(base):
        adds.append(("CO2/ST",))
    for add in adds:
        new = tuple(r for r in add if r not in base)
        if new:
            out["add " + " and ".join(new)] = (base + new, dict(sig, **{r: 0.15 for r in new}), 1, {})
    out["errors 15 % -> 5 %"] = (base, {r: min(s, 0.05) for r, s in sig.items()}, 1, {})
    out["3 rows of the same gas"] = (base, sig, 3, {})
    if window_rows:
        out[WINDOW_CANDIDATE.format(k=int(window_rows))] = (base, sig, int(window_rows), {}, "window")
    out["baseline"] = out["baseline"] + ({},)
    if all(n in free_names for n in MELT_INCLUSION_SD):
        out["melt inclusions: S +-150 ppm, dFMQ +-0.15"] = (base, sig, 1, dict(MELT_INCLUSION_SD))
    return out


def _sulfur_total_known(ratio_names):
    """True when the ratios already fix CO2/ST (= 1 / (SO2/CO2 + H2S/CO2)): CO2/ST itself,
    ST/CO2, or SO2/CO2 with H2S/SO2 or H2S/CO2. A ratio the others fix adds nothing."""
    have = set(ratio_names)
    if have & {"CO2/ST", "ST/CO2"}:
        return True
    return "SO2/CO2" in have and bool(have & {"H2S/SO2", "H2S/CO2", "SO2/H2S"})


def _invert_row_measurement(spec, measurement, seed, n_particles, n_runs=2):
    """One row of the user's data inverted (None when it cannot be)."""
    import warnings
    from ventsource.inference.row.one_measurement import InferenceError, infer
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=UserWarning)
        try:
            return infer(measurement, spec, seed=seed, n_particles=int(n_particles), n_runs=int(n_runs))
        except InferenceError:
            return None


def narrowed_prior(spec, constraints, truth_full, z):
    """The prior after a melt-inclusion measurement of each constrained parameter: its
    value (truth + sd z) with a normal error sd, times the prior; written as a normal
    truncated to the prior's bounds (exact for a uniform prior, an approximation for
    others). Returns a new PriorSpec; spec is unchanged."""
    from ventsource.inference.priors.distributions import TruncNormal
    from ventsource.inference.priors.spec import PriorSpec
    names = list(spec.parameter_names)
    dists = dict(spec.distributions)
    for k, (name, sd) in enumerate(sorted(constraints.items())):
        d = dists[name]
        centre = float(truth_full[names.index(name)] + sd * z[k])
        dists[name] = TruncNormal(centre, sd, d.lower, d.upper)
    return PriorSpec(path=spec.path, metadata=spec.metadata, distributions=dists, sources=spec.sources,
                     descriptions=spec.descriptions, melt_oxides_wt=spec.melt_oxides_wt,
                     melt_source=spec.melt_source, models=spec.models, likelihood=spec.likelihood,
                     p_magmatic=spec.p_magmatic, epsilon=spec.epsilon,
                     magmatic_source=spec.magmatic_source, release=spec.release, window=spec.window)


def simulate_truths(spec, ratio_names, n, pi0, seed):
    """(theta_full (n, p), is_m0 (n,), true ratios (n, m)) of n prior draws that release
    gas; M0 draws have no scrubbing. Draws without usable gas are replaced in order."""
    from ventsource.forward.model import ForwardModel
    rng = np.random.default_rng([int(seed), 0x91A])
    fm = ForwardModel(spec, ratio_names)
    names = list(spec.parameter_names)
    thetas, m0s, ratios = [], [], []
    for _ in range(50):
        th = spec.full(spec.sample(rng, 2 * n))
        is_m0 = rng.random(2 * n) < pi0
        if "scrubbed_so2" in names:
            th[is_m0, names.index("scrubbed_so2")] = 0.0
        r, status = fm.ratios_and_status(th)
        ok = (status == 0) & np.all(np.isfinite(r) & (r > 0), axis=1)
        thetas.append(th[ok]), m0s.append(is_m0[ok]), ratios.append(r[ok])
        if sum(len(t) for t in thetas) >= n:
            break
    else:
        raise InputError(f"plan: prior '{spec.name}' gives too few draws with gas")
    return (np.concatenate(thetas)[:n], np.concatenate(m0s)[:n], np.concatenate(ratios)[:n])


def _observed(true_log, z, sigma_ln, repeats):
    return np.exp(true_log + z * sigma_ln / np.sqrt(repeats))


def _invert_one(spec, ratio_names, values, rel_sigma, seed, opts):
    import warnings
    from ventsource.inference.row.one_measurement import InferenceError, infer
    from ventsource.inference.likelihood import Measurement
    m = Measurement(ratio_names, values, relative_sigma=rel_sigma)
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=UserWarning)
        try:
            return infer(m, spec, seed=seed, **opts)
        except InferenceError:
            return None


def _metrics(result, is_m0, pi0):
    if result is None or result.p_magmatic is None:
        return {k: np.nan for k in METRICS}
    p = float(result.p_magmatic)
    q = result.scrubbed_model_averaged or (np.nan, np.nan, np.nan)
    avg = result.summary()
    width_p = (float(avg.loc["pressure_bar", "95%"] - avg.loc["pressure_bar", "5%"])
               if "pressure_bar" in avg.index else np.nan)
    info = result.information or {"contraction": {}}
    return {"brier": (p - float(is_m0)) ** 2, "width90_scrubbed": float(q[2] - q[0]),
            "width90_pressure": width_p, "shift_p_magmatic": abs(p - pi0),
            "contraction_scrubbed": info["contraction"].get("scrubbed_so2", np.nan)}


def _simulated_metrics(spec, ratio_names, true_log, z, rel, repeats, window, seed, opts, is_m0, pi0):
    """One simulated data set of one candidate measured, inverted and scored."""
    from ventsource.inference.likelihood import sigma_ln
    if window:  # k rows of the gas (z: (k, m); row 0 with the shared noise), inverted together
        res = _invert_window_rows(spec, ratio_names, np.exp(true_log + z * sigma_ln(rel)), rel, seed, opts)
        return _window_metrics(res, is_m0, pi0)
    values = _observed(true_log, z, sigma_ln(rel), repeats)
    eff_rel = np.expm1(sigma_ln(rel) / np.sqrt(repeats))  # one measurement, same spread
    return _metrics(_invert_one(spec, ratio_names, values, eff_rel, seed, opts), is_m0, pi0)


def _invert_window_rows(spec, ratio_names, values, rel_sigma, seed, opts):
    """k rows (values (k, m)) inverted as one window (None when it cannot be)."""
    import warnings
    from ventsource.inference.likelihood import Measurement
    from ventsource.inference.window.sampling import WindowError, infer_window
    rows = [Measurement(ratio_names, v, relative_sigma=rel_sigma, label=f"row{j}")
            for j, v in enumerate(values)]
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=UserWarning)
        try:
            return infer_window(rows, spec, seed=seed, split_check=False, **opts)
        except WindowError:
            return None


def _window_metrics(result, is_m0, pi0):
    """The metrics of the window's first row (the one that shares its noise with the
    other candidates); the contraction is not computed for windows (NaN)."""
    if result is None:
        return {k: np.nan for k in METRICS}
    r = result.rows[0]
    p = float(r.p_magmatic)
    return {"brier": (p - float(is_m0)) ** 2,
            "width90_scrubbed": float(r.scrubbed_model_averaged[2] - r.scrubbed_model_averaged[0]),
            "width90_pressure": float(r.pressure_bar[2] - r.pressure_bar[0]),
            "shift_p_magmatic": abs(p - pi0), "contraction_scrubbed": np.nan}


def run_plan(spec, candidates, n_sim=20, seed=0, n_particles=300, n_runs=2, progress=None,
             truths=None):
    """Per simulated data set and candidate, the metrics (a DataFrame in long form:
    candidate, sim, is_m0 and METRICS). Same truths, noise and inversion seeds for every
    candidate; every random step seeded from `seed`. truths: None (drawn from the prior)
    or a function (ratio names, n, seed) -> (theta_full, is_m0, true ratios), e.g. the
    posterior of the user's data (workflow/plan_posterior.py)."""
    import pandas as pd
    from ventsource.inference.likelihood import sigma_ln
    pi0 = float(getattr(spec, "p_magmatic", 0.5))
    all_ratios = tuple(dict.fromkeys(r for c in candidates.values() for r in c[0]))
    truth, is_m0, true = (simulate_truths(spec, all_ratios, n_sim, pi0, seed) if truths is None
                          else truths(all_ratios, n_sim, seed))
    z = np.random.default_rng([int(seed), 0x2015E]).standard_normal(true.shape)
    z_mi = np.random.default_rng([int(seed), 0x3E1]).standard_normal((n_sim, len(MELT_INCLUSION_SD) + 4))
    inv_seeds = np.random.SeedSequence([int(seed), 0x1A7]).generate_state(n_sim)
    z_more = np.random.default_rng([int(seed), 0x3A7]).standard_normal((n_sim, 8) + true.shape[1:])
    opts = {"n_particles": int(n_particles), "n_runs": int(n_runs)}
    rows = []
    for name, (ratio_names, sig, repeats, *rest) in candidates.items():
        constraints = rest[0] if rest else {}
        window = len(rest) > 1 and rest[1] == "window"
        cols = [all_ratios.index(r) for r in ratio_names]
        rel = np.array([sig[r] for r in ratio_names], dtype=float)
        for i in range(n_sim):
            prior_i = narrowed_prior(spec, constraints, truth[i], z_mi[i]) if constraints else spec
            zs = np.vstack([z[i, cols], z_more[i, :repeats - 1][:, cols]]) if window else z[i, cols]
            metrics = _simulated_metrics(prior_i, ratio_names, np.log(true[i, cols]), zs, rel, repeats,
                                         window, int(inv_seeds[i]), opts, is_m0[i], pi0)
            rows.append({"candidate": name, "sim": i, "is_m0": bool(is_m0[i]), **metrics})
            if progress is not None:
                progress(name, i)
    return pd.DataFrame(rows)


def summarise_plan(long):
    """One row per candidate: mean and Monte Carlo error of every metric, the paired
    difference from the baseline and its error, ranked by expected Brier score."""
    import pandas as pd
    out = []
    base = long[long["candidate"] == "baseline"].set_index("sim")
    for name, g in long.groupby("candidate", sort=False):
        g = g.set_index("sim")
        row = {"candidate": name, "n_simulated": int(g["brier"].notna().sum())}
        for k in METRICS:
            x = g[k].to_numpy(float)
            x = x[np.isfinite(x)]
            row[f"{k}_mean"] = float(x.mean()) if x.size else np.nan
            row[f"{k}_mc_error"] = float(x.std(ddof=1) / np.sqrt(x.size)) if x.size > 1 else np.nan
            if len(base):
                d = (g[k] - base[k]).to_numpy(float)
                d = d[np.isfinite(d)]
                row[f"{k}_minus_baseline"] = float(d.mean()) if d.size else np.nan
                row[f"{k}_minus_baseline_error"] = (float(d.std(ddof=1) / np.sqrt(d.size))
                                                    if d.size > 1 else np.nan)
        out.append(row)
    table = pd.DataFrame(out).sort_values("brier_mean", kind="stable").reset_index(drop=True)
    table.insert(0, "rank", np.arange(1, len(table) + 1))
    return table


PLAN_NOTE = ("Preposterior comparison: for each candidate the same simulated truths (prior draws, or "
             "with --data posterior draws of the data's rows; column truths_from) "
             "are measured and inverted; means over the simulated data sets with their Monte Carlo "
             "errors (sd/sqrt(n)); *_minus_baseline: paired difference from the baseline. Ranked by "
             "expected Brier score of P(M0) (lower is better). Two candidates whose difference is "
             "within about two errors are not told apart; rerun with more data sets (-n).")


def write_plan(table, out_csv, synthetic=False, plot_path=None):
    """The table (CSV, written beside and renamed), its README sidecar with the caution,
    and optionally the bar chart."""
    import os
    table.to_csv(f"{out_csv}.part", index=False, float_format="%.6g")
    os.replace(f"{out_csv}.part", out_csv)
    from ventsource.workflow.table_notes import write_table_sidecar
    write_table_sidecar(out_csv, PLAN_NOTE, synthetic=synthetic)
    if plot_path:
        from ventsource.workflow.plan_figure import plot_plan
        plot_plan(table, plot_path)


def plan_text(table):
    """Plain-text table of the ranking for the terminal, with the caution."""
    lines = [f"{'rank':>4}  {'candidate':<42} {'Brier':>15} {'Brier - baseline':>17} "
             f"{'90% scrubbed':>13} {'90% pressure bar':>17}"]
    for _, r in table.iterrows():
        lines.append(f"{int(r['rank']):>4}  {r['candidate']:<42} "
                     f"{r['brier_mean']:7.3f} +- {r['brier_mc_error']:.3f} "
                     f"{r.get('brier_minus_baseline', np.nan):+8.3f} +- "
                     f"{r.get('brier_minus_baseline_error', np.nan):.3f} "
                     f"{r['width90_scrubbed_mean']:6.2f} +- {r['width90_scrubbed_mc_error']:.2f} "
                     f"{r['width90_pressure_mean']:8.0f} +- {r['width90_pressure_mc_error']:.0f}")
    if "truths_from" in table:
        lines += ["", f"Truths drawn from the {table['truths_from'].iloc[0]}."]
    lines += ["", PLAN_NOTE, "Caution: " + CAUTION]
    return "\n".join(lines)
