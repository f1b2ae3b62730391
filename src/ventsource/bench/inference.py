"""`ventsource bench --only emcee`: the emcee engine, one full inversion against brute-force prior Monte Carlo.

One synthetic measurement (SO2/CO2, H2S/SO2, H2O/CO2 with 15 % relative 1-sigma) made
with the real forward model on the arc_basalt prior.  Reported side by side in the
same run:

* infer(): wall seconds, forward evaluations (sampling of M0 and M1, walker start and
  bridge proposals), minimum bulk ESS and maximum R-hat (ArviZ), P(M0) +- MC error;
* brute force: P(M0) from prior Monte Carlo evidences of M0 and M1 (n prior draws
  each).  A pilot of n_pilot draws per model gives the MC error of P(M0); since it
  scales as 1/sqrt(n) (plain Monte Carlo), the draws needed for the error of infer()
  are n_pilot * (pilot error / target error)^2, and the seconds follow from the pilot's
  measured cost per evaluation.

Targets of the issue: <= 3 s per measurement and >= 20x fewer forward evaluations than
brute force.  The numbers are printed as measured, never adjusted.
"""
import time

import numpy as np


def _synthetic_measurement(spec, forward, seed=2026):
    from ventsource.inference.likelihood import Measurement
    rng = np.random.default_rng(seed)
    j = spec.free_names.index("scrubbed_so2")
    while True:
        theta = spec.sample(rng, 1)[0]
        theta[j] = 0.5  # half of the SO2 scrubbed: neither model is obviously right
        pred = forward.ratios(spec.full(theta[None]))[0]
        if np.all(np.isfinite(pred)) and np.all(pred > 0):
            break
    values = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.size))
    return Measurement(forward.ratio_names, values, 0.15, label="bench"), theta


def bench_inference(quick=False):
    import warnings

    from ventsource.forward.model import ForwardModel
    from ventsource.inference.row.one_measurement import infer, prior_monte_carlo_evidence
    from ventsource.inference.hypotheses.model_choice import posterior_model_probability
    from ventsource.inference.priors import load_prior_file

    from ventsource.inference.priors.shipped import shipped_prior_path
    path = shipped_prior_path("arc_basalt")
    if path is None:
        print("[inference] skipped: shipped prior arc_basalt not found")
        return None
    spec = load_prior_file(path)
    forward = ForwardModel(spec, ratio_names=("SO2/CO2", "H2S/SO2", "H2O/CO2"))
    meas, theta = _synthetic_measurement(spec, forward)
    forward.ratios(spec.full(spec.sample(np.random.default_rng(0), 64)))  # compile / warm up
    print(f"[inference] synthetic measurement {_plain(meas.ratio_names, meas.values, 4)} "
          f"(15 % errors) from {_plain(spec.free_names, theta, 3)}")

    options = {"target_ess": 300.0, "max_steps": 1000} if quick else {}
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = infer(meas, spec, forward=forward, seed=1, engine="emcee", **options)
    seconds = time.perf_counter() - start
    evals = 0
    for run in res.runs.values():
        if run.sample is not None:
            evals += run.sample.stats["n_forward_evals"] + run.sample.stats.get("n_forward_evals_bridge", 0)
    table = res.summary("M1")
    ess_min = float(table["ess_bulk"].min())
    rhat_max = float(table["r_hat"].max())
    print(f"[inference] infer(): {seconds:.1f} s, {evals:,} forward evaluations, min bulk ESS {ess_min:.0f}, "
          f"max R-hat {rhat_max:.3f}, P(M0) = {res.p_magmatic:.3f} +- {res.p_magmatic_error:.3f}, "
          f"flags {res.flags or 'none'}" + (" (quick: target ESS 300)" if quick else ""))
    print(f"[inference] targets: <= 3 s, ESS >= 1000, R-hat <= 1.01, P(M0) error <= 0.02 -> "
          f"{'met' if seconds <= 3 and ess_min >= 1000 and rhat_max <= 1.01 and res.p_magmatic_error <= 0.02 else 'NOT met'}")

    n_pilot = 20_000 if quick else 200_000
    start = time.perf_counter()
    z1 = prior_monte_carlo_evidence(meas, spec, forward, n=n_pilot, seed=11)
    z0 = prior_monte_carlo_evidence(meas, spec.with_fixed("scrubbed_so2", 0.0), forward, n=n_pilot, seed=12)
    pilot_seconds = time.perf_counter() - start
    p_bf, err_bf = posterior_model_probability(z0[0], z0[1], z1[0], z1[1], res.pi0)
    target = max(float(res.p_magmatic_error), 1e-6)
    n_needed = 2 * n_pilot * (err_bf / target) ** 2
    s_needed = pilot_seconds / (2 * n_pilot) * n_needed
    print(f"[inference] brute-force prior Monte Carlo pilot: {2 * n_pilot:,} evaluations in {pilot_seconds:.1f} s, "
          f"P(M0) = {p_bf:.3f} +- {err_bf:.3f}")
    print(f"[inference] brute force for error {target:.3f}: {n_needed:,.0f} evaluations, ~{s_needed:.1f} s "
          f"-> ratio brute force / infer(): {n_needed / max(evals, 1):.2f} in evaluations, "
          f"{s_needed / seconds:.2f} in seconds (target >= 20)")
    return {"seconds": seconds, "evals": evals, "ess_min": ess_min, "rhat_max": rhat_max,
            "p_magmatic": res.p_magmatic, "p_magmatic_error": res.p_magmatic_error,
            "brute_force_evals": n_needed, "brute_force_seconds": s_needed, "p_brute_force": p_bf}


def _plain(names, values, digits):
    """NAME=VALUE pairs as plain numbers (no NumPy scalar reprs)."""
    return ", ".join(f"{n}={float(v):.{digits}g}" for n, v in zip(names, np.ravel(values)))
