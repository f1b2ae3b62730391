"""`ventsource bench`: speeds as ratios to a reference measured in the same run.

Reference: Cantera's `equilibrate('TP')` on an ideal gas of the same ten
species from its bundled NASA Glenn data, started from our equilibrium
composition (the most favourable start for Cantera: it only has to confirm
the minimum). Both sides are timed as the best of three runs in CPU time of
this process (`time.process_time`), so other jobs on a shared machine slow
neither side's clock; absolute times still vary between machines, the ratios
are what to compare between runs.
"""
import time
from pathlib import Path

import numpy as np

from ventsource.chemistry.buffers import log10_fo2_from_dfmq
from ventsource.chemistry.species import SPECIES
from ventsource.chemistry.speciation import speciate


def box_states(n, seed=42):
    """n random states over the supported box: (T K, P bar, dFMQ, C/H, S/H)."""
    rng = np.random.default_rng(seed)
    t_k = rng.uniform(600, 1300, n) + 273.15
    p = 10 ** rng.uniform(0, np.log10(5000), n)
    dfmq = rng.uniform(-4, 4, n)
    c_h = 10 ** rng.uniform(-4, 1, n)
    s_h = 10 ** rng.uniform(-5, 0, n)
    return t_k, p, dfmq, c_h, s_h


def cantera_reference_gas():
    """Cantera ideal gas of SPECIES from its bundled NASA Glenn data, rebuilt with
    the 1 bar reference pressure of McBride et al. (2002) (Cantera stores 1 atm)."""
    import cantera as ct
    species = []
    for s in ct.Species.list_from_file("nasa_gas.yaml"):
        if s.name in SPECIES:
            d = s.thermo.input_data
            t_low, t_mid, t_high = d["temperature-ranges"]
            low, high = d["data"]
            s.thermo = ct.NasaPoly2(t_low, t_high, 1e5, np.concatenate([[t_mid], high, low]))
            species.append(s)
    return ct.Solution(thermo="ideal-gas", species=species)


def _cantera_seconds_per_state(t_k, p, x):
    try:
        gas = cantera_reference_gas()
    except ImportError:
        return None
    starts = [dict(zip(SPECIES, row)) for row in x]

    def run():
        for j in range(t_k.size):
            gas.TPX = t_k[j], p[j] * 1e5, starts[j]
            gas.equilibrate("TP")

    return _best_of(run) / t_k.size


def _best_of(fn, repeats=3):
    """Best of `repeats` runs, in CPU seconds of this process."""
    best = np.inf
    for _ in range(repeats):
        start = time.process_time()
        fn()
        best = min(best, time.process_time() - start)
    return best


def bench_speciation(n=100_000, n_cantera=2000):
    t_k, p, dfmq, c_h, s_h = box_states(n)
    lf = log10_fo2_from_dfmq(dfmq, t_k, p)
    speciate(t_k[:10], p[:10], lf[:10], 1.0, c_h[:10], s_h[:10], eos="ideal")  # compile/load
    seconds = _best_of(lambda: speciate(t_k, p, lf, 1.0, c_h, s_h, eos="ideal"))
    res = speciate(t_k, p, lf, 1.0, c_h, s_h, eos="ideal")
    per_state = seconds / n
    cantera = _cantera_seconds_per_state(t_k[:n_cantera], p[:n_cantera], res.mole_fractions[:n_cantera])
    print(f"[speciation] {n} states (ideal gas, whole box): {n / seconds:,.0f} states/s "
          f"({per_state * 1e6:.2f} us/state), {int((res.status != 0).sum())} not converged")
    if cantera is not None:
        print(f"[speciation] Cantera equilibrate('TP'), first {n_cantera} of the same states: "
              f"{cantera * 1e6:.1f} us/state -> ventsource is {cantera / per_state:.1f}x faster "
              "(target >= 30x)")
    return per_state, cantera


def bench_forward(cantera_per_state, quick=False):
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    from ventsource.inference.priors.shipped import shipped_prior_path
    prior = shipped_prior_path("arc_basalt")
    if prior is None:
        print("[forward] skipped: shipped prior arc_basalt not found")
        return
    spec = load_prior_file(prior)
    model = ForwardModel(spec)
    big = 2_000 if quick else 10_000
    theta = spec.full(spec.sample(np.random.default_rng(7), big))
    ref_spec = partition_buffered_spec(prior)
    ref_model = ForwardModel(ref_spec)
    ref_theta = ref_spec.full(ref_spec.sample(np.random.default_rng(7), big))
    model.ratios(theta[:8])
    ref_model.ratios(ref_theta[:8])
    for batch in (big, 32):
        per_state = _per_state(model, theta, big, batch)
        ref = _per_state(ref_model, ref_theta, big, batch)
        line = (f"[forward] batch {batch}: {1 / per_state:,.0f} evaluations/s "
                f"({per_state * 1e6:.2f} us/evaluation, closed-system degassing + speciation + scrubbing; "
                f"{per_state / ref:.2f}x the partition + buffered-redox model, target <= 2x)")
        if cantera_per_state:
            target = 10 if batch >= 1000 else 2
            line += (f" -> {cantera_per_state / per_state:.1f}x Cantera's per-state time "
                     f"(target >= {target}x)")
        print(line)
    bench_sweep(model, spec, theta[:100 if quick else 400])
    from ventsource.bench.quench import bench_quench
    bench_quench(spec, theta, _best_of, batches=(32, big))
    bench_open_style(model, spec, theta[:300 if quick else 2000])


def _per_state(model, theta, big, batch):
    chunks = [theta[i:i + batch] for i in range(0, min(big, 200 * batch), batch)]
    n_states = sum(c.shape[0] for c in chunks)
    return _best_of(lambda: [model.ratios(c) for c in chunks]) / n_states


def partition_buffered_spec(prior_path):
    """The prior with the models shipped before sulfur = "capacity" and evolving redox
    (partition, D_S log-uniform 10-500, fO2 buffered): the in-process cost reference."""
    import tomllib
    from ventsource.inference.priors import parse_prior
    with open(prior_path, "rb") as fh:
        data = tomllib.load(fh)
    data["models"].update(sulfur="partition", redox="buffered")
    data["parameters"]["s_partition"] = {"distribution": "loguniform", "min": 10.0, "max": 500.0,
                                         "source": "the earlier shipped range"}
    return parse_prior(data, file=str(prior_path))


def bench_sweep(model, spec, draws, n_pressures=48):
    """A window-style pressure sweep (48 pressures per draw, log-spaced over one decade,
    as the window model solves each draw) against the same states in shuffled order,
    where every state starts cold: the saving of starting from the neighbour's solution."""
    j_p = list(spec.parameter_names).index("pressure_bar")
    rep = np.repeat(draws, n_pressures, axis=0)
    lo = np.log(draws[:, j_p] / 3.0)
    rep[:, j_p] = np.exp((lo[:, None] + np.linspace(0.0, np.log(10.0), n_pressures)).ravel())
    shuffled = rep[np.random.default_rng(3).permutation(rep.shape[0])]
    sweep = _best_of(lambda: model.ratios(rep)) / rep.shape[0]
    cold = _best_of(lambda: model.ratios(shuffled)) / rep.shape[0]
    print(f"[forward] pressure sweep, {draws.shape[0]} draws x {n_pressures} pressures: "
          f"{sweep * 1e6:.2f} us/evaluation against {cold * 1e6:.2f} for the same states each "
          f"started cold ({cold / sweep:.2f}x)")


def bench_open_style(model, spec, theta):
    """Open-style degassing of the same prior draws: the saturation-pressure search
    plus the stepped path (or the start at the search cap), its costliest mode."""
    from ventsource.magma import degassing
    col = {name: theta[:, i] for i, name in enumerate(spec.parameter_names)}

    def run():
        return degassing.degas(col["temperature_c"], col["pressure_bar"], col["dfmq"], col["h2o_wt"],
                               col["co2_ppm"], col["s_ppm"],
                               col.get("s_partition", np.full(theta.shape[0], np.nan)), model.h2o_law,
                               model.co2_law, style="open", eos=model.eos, open_steps=model.open_steps,
                               sulfide_capacity=model.sulfide_capacity,
                               sulfur_caps=model.sulfur_caps, redox=model.redox)

    res = run()
    seconds = _best_of(run)
    print(f"[forward] open-style degassing, {theta.shape[0]} draws: {seconds / theta.shape[0] * 1e6:.1f} "
          f"us/state (saturation search + {model.open_steps}-step path), "
          f"{100 * res.closed_above_cap.mean():.1f} % started at the {degassing.P_SAT_CAP_BAR:g} bar cap, "
          f"{int((res.status == degassing.STATUS_FAILED).sum())} failed")


SECTIONS = ("speciation", "forward", "inference", "window", "watch", "emcee", "series", "ratios", "reader")


def _prior_path(name):
    from ventsource.inference.priors.shipped import shipped_prior_path
    return shipped_prior_path(name)


def run_benchmarks(quick=False, only=None):
    from ventsource.common.threads import limit_blas_threads
    limit_blas_threads()  # idle BLAS threads spin and would be counted as CPU seconds
    sections = only or list(SECTIONS)
    cantera = None
    if "speciation" in sections or "forward" in sections:
        _, cantera = bench_speciation(n=20_000 if quick else 100_000, n_cantera=300 if quick else 2000)
    if "forward" in sections:
        bench_forward(cantera, quick=quick)
    if "inference" in sections:
        from ventsource.bench.smc import bench_smc
        from ventsource.inference.priors import load_prior_file
        bench_smc(load_prior_file(_prior_path("arc_basalt")), quick=quick)
    if "window" in sections:
        from ventsource.bench.window import bench_window
        from ventsource.inference.priors import load_prior_file
        bench_window(load_prior_file(_prior_path("arc_basalt")), quick=quick)
        from ventsource.bench.segments import bench_segments  # --window auto
        bench_segments(load_prior_file(_prior_path("arc_basalt")), quick=quick)
    if "watch" in sections:
        from ventsource.bench.watch import bench_watch
        from ventsource.inference.priors import load_prior_file
        bench_watch(load_prior_file(_prior_path("arc_basalt")), quick=quick)
    if "emcee" in sections:
        from ventsource.bench.inference import bench_inference
        bench_inference(quick=quick)
    if "series" in sections:
        from ventsource.bench.series import bench_series
        bench_series(quick=quick)
    if "ratios" in sections:
        from ventsource.bench.ratios import bench_ratios
        bench_ratios(quick=quick)
    if "reader" in sections:
        from ventsource.bench.reader import bench_reader
        bench_reader(quick=quick)
