"""`ventsource bench --only inference`: the SMC engine on three measurements.

The bench measurement (arc_basalt prior, half of the SO2 scrubbed) with 15 % errors
on SO2/CO2, H2S/SO2, H2O/CO2; the same truth with 5 % errors; and with 5 % errors on
five ratios (adding CO/CO2 and H2/H2O). For each, over several seeds and in CPU
seconds: cost per measurement, forward evaluations, P(M0) mean and SD, and the bias
against a reference from one long run (many more particles) made in the same
process; beside it, the prior Monte Carlo draws that brute force needs for the same
P(M0) error (from a pilot: its error scales as 1/sqrt(n)).
"""
import time
import warnings

import numpy as np

CASES = (("3 ratios, 15 %", ("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.15),
         ("3 ratios, 5 %", ("SO2/CO2", "H2S/SO2", "H2O/CO2"), 0.05),
         ("5 ratios, 5 %", ("SO2/CO2", "H2S/SO2", "H2O/CO2", "CO/CO2", "H2/H2O"), 0.05))
TARGETS = {"3 ratios, 15 %": (2.0, 0.02), "3 ratios, 5 %": (4.0, 0.025), "5 ratios, 5 %": (4.0, 0.025)}


def _measurement(spec, names, rel, seed=2026):
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.likelihood import Measurement
    forward = ForwardModel(spec, ratio_names=names)
    rng = np.random.default_rng(seed)
    j = spec.free_names.index("scrubbed_so2")
    while True:
        theta = spec.sample(rng, 1)[0]
        theta[j] = 0.5
        pred = forward.ratios(spec.full(theta[None]))[0]
        if np.all(np.isfinite(pred)) and np.all(pred > 0):
            break
    noise = np.random.default_rng(seed + 1).standard_normal(pred.size)
    return Measurement(names, pred * np.exp(np.log1p(rel) * noise), rel, label="bench"), forward


def _one_case(spec, label, names, rel, n_seeds, reference_particles):
    from ventsource.inference.row.one_measurement import infer
    meas, forward = _measurement(spec, names, rel)
    forward.ratios(spec.full(spec.sample(np.random.default_rng(0), 64)))  # warm up
    p, cpu, evals, flags = [], [], [], []
    for seed in range(n_seeds):
        t = time.process_time()
        res = infer(meas, spec, forward=forward, seed=100 + seed)
        cpu.append(time.process_time() - t)
        p.append(res.p_magmatic)
        evals.append(res.diagnostics["n_forward_evals"])
        flags += res.flags
    t = time.process_time()
    ref = infer(meas, spec, forward=forward, seed=7, n_particles=reference_particles)
    ref_cpu = time.process_time() - t
    return {"case": label, "cpu_s": float(np.median(cpu)), "evals": float(np.median(evals)),
            "p_mean": float(np.mean(p)), "p_sd": float(np.std(p, ddof=1)),
            "p_ref": ref.p_magmatic, "p_ref_error": ref.p_magmatic_error, "ref_cpu_s": ref_cpu,
            "bias": float(np.mean(p) - ref.p_magmatic), "flags": sorted(set(flags)),
            "meas": meas, "forward": forward}


# A pilot whose evidence has a relative error above 0.3 rests on about ten draws or
# fewer (relative error ~ 1 / sqrt(effective draws)); the error of P(M0) it implies can
# then be near zero by chance (once "0 evaluations" for the 5-ratio case).
PILOT_MAX_RELATIVE_ERROR = 0.3


def _brute_force_evals(spec, row, pilot):
    from ventsource.inference.evidence.bridge import prior_monte_carlo_evidence
    from ventsource.inference.hypotheses.model_choice import posterior_model_probability
    z1 = prior_monte_carlo_evidence(row["meas"], spec, row["forward"], n=pilot, seed=11)
    z0 = prior_monte_carlo_evidence(row["meas"], spec.with_fixed("scrubbed_so2", 0.0), row["forward"],
                                    n=pilot, seed=12)
    _, err = posterior_model_probability(z0[0], z0[1], z1[0], z1[1], spec.p_magmatic)
    if not (np.isfinite(z0[0]) and np.isfinite(z1[0]) and np.isfinite(err) and err > 0.0):
        return None  # no pilot draw reached the data: brute force needs more than the pilot
    if max(z0[1], z1[1]) > PILOT_MAX_RELATIVE_ERROR:
        return None  # a handful of draws carry the pilot: its error is itself unknown
    return 2 * pilot * (err / max(row["p_sd"], 1e-6)) ** 2


def bench_smc(spec, quick=False):
    n_seeds = 4 if quick else 10
    ref_particles = 4000 if quick else 20000
    pilot = 20_000 if quick else 200_000
    rows = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for label, names, rel in CASES:
            row = _one_case(spec, label, names, rel, n_seeds, ref_particles)
            row["brute_evals"] = _brute_force_evals(spec, row, pilot)
            row["brute_pilot"] = 2 * pilot
            rows.append(row)
            _print_row(row, n_seeds, ref_particles)
    growth = rows[2]["evals"] / rows[0]["evals"]
    print(f"[inference] evaluations grow {growth:.2f}x from the 15 % case to the 5 %/5-ratio case "
          f"(target <= 2.5): {'met' if growth <= 2.5 else 'NOT met'}")
    return rows


def _print_row(row, n_seeds, ref_particles):
    cpu_t, sd_t = TARGETS[row["case"]]
    ok = row["cpu_s"] <= cpu_t and row["p_sd"] <= sd_t and abs(row["bias"]) <= 0.02
    print(f"[inference] {row['case']}: {row['cpu_s']:.2f} CPU-s per measurement (median of {n_seeds}), "
          f"{row['evals']:,.0f} evaluations, P(M0) {row['p_mean']:.3f}, SD {row['p_sd']:.3f}, "
          f"reference {row['p_ref']:.3f} +- {row['p_ref_error']:.3f} ({ref_particles} particles x 4 runs, "
          f"{row['ref_cpu_s']:.0f} CPU-s), bias {row['bias']:+.3f}; {_brute_text(row)}; "
          f"flags {row['flags'] or 'none'}")
    print(f"[inference]   targets <= {cpu_t} CPU-s, SD <= {sd_t}, |bias| <= 0.02: {'met' if ok else 'NOT met'}")


def _brute_text(row):
    if row["brute_evals"] is None:
        return (f"brute force: the {row['brute_pilot']:,}-evaluation pilot reached the data with at most "
                "about ten draws (it needs more than that; ratio not measurable)")
    return (f"brute force needs {row['brute_evals']:,.0f} evaluations for the same SD "
            f"({row['brute_evals'] / max(row['evals'], 1):.1f}x)")
