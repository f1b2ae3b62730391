"""Simulation-based calibration of the window model (Talts et al. 2018, arXiv:1804.06788,
Algorithm 1), shared by tests/test_window_sbc.py and its background measurement.

One replicate: a window of rows drawn from the window model's own prior, exactly as
inference/window/target.py and pooled_pressure.py state it:

* the shared parameters psi (the magma's free parameters and, with pooled pressures, the
  copula's centre c and spread s) from the target's shared prior;
* each row's normal score z_i = sqrt(1 - s^2) c + s e_i, e_i ~ Normal(0, 1), and its
  pressure P_i = F^-1(Phi(z_i)), F the prior file's pressure distribution (pooled_pressure.py);
  with independent pressures P_i from F directly;
* each row's hypothesis: M0 (scrubbed fraction exactly 0) with probability pi0, else M1
  with its scrubbed fraction from the prior file's scrubbed_so2 distribution; with
  persistent hypotheses (the default) a row keeps the previous row's hypothesis with
  probability rho (uniform on [0, 1], drawn per window; the model integrates it out,
  hypothesis_persistence.py), else draws afresh;
* the rows' ratios from the package's forward model, with the likelihood's own noise
  model (Likelihood.simulate_log: log-normal with sigma_ln = ln(1 + r)).

A window in which some row has no gas is drawn again as a whole: the model's likelihood
is zero there, so its posterior is that of the prior restricted to windows with gas,
which is what the accepted draws follow (redrawing one row alone would not be).

Recorded per window: the rank of each shared truth among N_RANK posterior draws picked
at random (thinned) from the window's shared draws, whether each truth lies inside the
posterior's 90 % band, and each row's P(M0) with the row's true hypothesis (reliability
of P(M0): Dawid 1982, J. Am. Stat. Assoc. 77:605). Every random step is seeded from the
run's seed and the window's index, so a window's numbers do not depend on which other
windows ran.

Results are model- and prior-dependent: they say the sampler inverts this model
honestly, not that the model is right for any volcano.
"""
from __future__ import annotations

import json
import time
import warnings
from pathlib import Path

import numpy as np
from scipy import special, stats

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors import load_prior_file
from ventsource.inference.window.sampling import infer_window
from ventsource.inference.window.target import WindowTarget

ROOT = Path(__file__).resolve().parent
PRIOR = ROOT / "data" / "window_sbc.toml"
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
N_ROWS = 8
N_RANK = 49       # posterior draws each truth is ranked among (ranks 0..49)
N_BINS = 10       # rank histogram bins of 5 ranks
# Window settings of the calibration (the change-of-source check is off: it does not
# touch the posterior; 100 prior draws for the one-source Bayes factor, which is not
# calibrated here).
OPTIONS = dict(n_particles=200, n_runs=2, split_check=False, n_source_check=100)


def setup(prior_path=PRIOR):
    spec = load_prior_file(prior_path)
    forward = ForwardModel(spec, ratio_names=NAMES)
    rel = float(spec.likelihood.get("relative_sigma", 0.15))
    dummy = [Likelihood(Measurement(NAMES, np.ones(len(NAMES)), rel), prediction_names=NAMES)]
    target = WindowTarget(spec, forward, dummy, spec.p_magmatic)
    return spec, forward, target


def row_pressures(target, dist_p, psi, rng, n_rows):
    """Each row's pressure given the shared draw psi: through the pooled copula (centre and
    spread the last two entries of psi), or independently from the prior file's F."""
    if not target.pooled:
        return np.asarray(dist_p.sample(rng, n_rows), float)
    c, s = psi[-2], psi[-1]
    z = np.sqrt(1.0 - s * s) * c + s * rng.standard_normal(n_rows)
    return np.asarray(dist_p.ppf(special.ndtr(z)), float)


def row_hypotheses(target, psi, rng, n_rows, pi0):
    """Each row's hypothesis (0: M0, 1: M1): with prior odds pi0 on its own, or with
    persistent hypotheses (hypothesis_persistence.py) a Markov chain: the first row
    fresh, each next row keeps the previous row's with probability rho (uniform on
    [0, 1], one per window), else is fresh."""
    model = (rng.random(n_rows) >= pi0).astype(int)
    if not target.persistent:
        return model
    keep = rng.random(n_rows) < rng.random()   # rho uniform on [0, 1], integrated out by the model
    for i in range(1, n_rows):
        model[i] = model[i - 1] if keep[i] else model[i]
    return model


def draw_window(spec, forward, target, rng, n_rows=N_ROWS):
    """(psi (shared free values), pressures, scrubbed fractions, hypotheses (0/1), measurements)."""
    sp = target.shared_prior
    names = list(spec.parameter_names)
    j_p, j_s = names.index("pressure_bar"), names.index("scrubbed_so2")
    dist_p, dist_s = spec.distributions["pressure_bar"], spec.distributions["scrubbed_so2"]
    rel = float(spec.likelihood.get("relative_sigma", 0.15))
    pi0 = float(np.exp(target.log_pis[0]))
    while True:
        psi = sp.sample(rng, 1)[0]
        pressure = row_pressures(target, dist_p, psi, rng, n_rows)
        model = row_hypotheses(target, psi, rng, n_rows, pi0)  # 1: scrubbed (M1)
        scrubbed = np.where(model == 1, dist_s.sample(rng, n_rows), 0.0)
        full = np.repeat(sp.full(psi[None, :]), n_rows, axis=0)
        full[:, j_p], full[:, j_s] = pressure, scrubbed
        pred = forward.ratios(full)
        if np.all(np.isfinite(pred)) and np.all(pred > 0):
            break
    meas = []
    for i in range(n_rows):
        lik = Likelihood(Measurement(NAMES, pred[i], rel), prediction_names=NAMES)
        y = np.exp(lik.simulate_log(pred[i:i + 1], rng)[0])
        meas.append(Measurement(NAMES, y, rel, label=f"r{i}"))
    return psi, pressure, scrubbed, model, meas


def rank_and_cover(draws, truth, rng, n_rank=N_RANK):
    """Rank of each truth among n_rank draws picked at random, and truth inside the 90 % band."""
    pick = draws[rng.choice(draws.shape[0], n_rank, replace=False)]
    ranks = (pick < truth[None, :]).sum(axis=0)
    lo, hi = np.quantile(draws, [0.05, 0.95], axis=0)
    return ranks, (truth >= lo) & (truth <= hi)


def one_window(setup_tuple, seed, k, options=None, keep_draws=False):
    """One SBC replicate (window k of the run seeded `seed`) as a JSON-able dict (with
    keep_draws also the shared posterior draws, key "_draws", for tests that re-rank them)."""
    spec, forward, target = setup_tuple
    rng = np.random.default_rng([int(seed), int(k)])
    psi, pressure, scrubbed, model, meas = draw_window(spec, forward, target, rng)
    start = time.process_time()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = infer_window(meas, spec, forward=forward, seed=int(rng.integers(2 ** 31)),
                           **dict(OPTIONS, **(options or {})))
    cpu = time.process_time() - start
    draws = np.asarray(res.shared_draws, float).reshape(-1, len(res.shared_names))
    ranks, cover = rank_and_cover(draws, psi, rng)
    return {"seed": int(seed), "window": int(k), "names": list(res.shared_names),
            "truth": psi.tolist(), "ranks": ranks.tolist(), "cover90": cover.astype(int).tolist(),
            "row_model": model.tolist(), "row_pressure_bar": pressure.tolist(),
            "row_scrubbed_so2": scrubbed.tolist(),
            "p_magmatic": [r.p_magmatic for r in res.rows], "cpu_s": cpu,
            "rhat_max": float(res.diagnostics["rhat_max"]), "flags": list(res.flags),
            "stages": res.diagnostics["stages"], **({"_draws": draws} if keep_draws else {})}


# ---- the three criteria -------------------------------------------------------------------

def rank_p_values(ranks, n_rank=N_RANK, n_bins=N_BINS):
    """Chi-square p-value (scipy.stats.chisquare) of uniform ranks in 0..n_rank, per column."""
    return np.array([stats.chisquare(np.histogram(col, bins=n_bins, range=(0, n_rank + 1))[0]).pvalue
                     for col in np.asarray(ranks).T])


def reliability_table(p_m0, came_from_m0, n_bins=5, groups=None):
    """Per bin of P(M0): (lo, hi, n, mean P(M0), share from M0, 2 sigma of the share).

    groups None: the binomial 2 sigma (rows independent). groups (one label per row, the
    row's window): the cluster-robust 2 sigma, 2 sqrt(sum_g (sum_i in g (y_i - p_i))^2) / n
    over the bin's rows (Liang and Zeger 1986, Biometrika 73:13, from memory): rows of one window
    share a posterior and, with persistent hypotheses, often one true state, so a window
    weighs as one draw rather than as many rows."""
    p_m0, came = np.asarray(p_m0, float), np.asarray(came_from_m0, bool)
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    which = np.clip(np.digitize(p_m0, edges) - 1, 0, n_bins - 1)
    rows = []
    for b in range(n_bins):
        sel = which == b
        n = int(sel.sum())
        if n == 0:
            continue
        p_bar = float(p_m0[sel].mean())
        if groups is None:
            band = 2.0 * np.sqrt(p_bar * (1.0 - p_bar) / n)
        else:
            resid = came[sel].astype(float) - p_m0[sel]
            labels = np.asarray(groups)[sel]
            sums = np.array([resid[labels == g].sum() for g in np.unique(labels)])
            band = 2.0 * np.sqrt(np.sum(sums ** 2)) / n
        rows.append((float(edges[b]), float(edges[b + 1]), n, p_bar, float(came[sel].mean()), float(band)))
    return rows


def criteria(records):
    """(rank p-values per shared parameter, 90 % coverage share, reliability table, names)."""
    ranks = np.array([r["ranks"] for r in records])
    cover = np.array([r["cover90"] for r in records])
    p_m0 = np.concatenate([r["p_magmatic"] for r in records])
    came = np.concatenate([np.asarray(r["row_model"]) == 0 for r in records])
    groups = np.concatenate([np.full(len(r["p_magmatic"]), k) for k, r in enumerate(records)])
    return (rank_p_values(ranks), float(cover.mean()), reliability_table(p_m0, came, groups=groups),
            records[0]["names"])


def reliability_ok(table, min_n=10):
    """Every bin with at least min_n rows: share from M0 within 2 sigma of its mean P(M0)
    (fewer rows: the normal band means little)."""
    return all(abs(share - p_bar) <= band for _, _, n, p_bar, share, band in table if n >= min_n)


def report(records):
    p, cover, table, names = criteria(records)
    cpu = np.array([r["cpu_s"] for r in records])
    lines = [f"{len(records)} windows of {N_ROWS} rows; CPU-s per window median {np.median(cpu):.1f}, "
             f"total {cpu.sum():.0f}",
             "rank chi-square p: " + ", ".join(f"{n} {v:.3f}" for n, v in zip(names, p)),
             "90 % coverage per parameter: " + ", ".join(
                 f"{n} {v:.2f}" for n, v in zip(names, np.array([r['cover90'] for r in records]).mean(axis=0))),
             f"90 % coverage overall {cover:.3f}",
             "P(M0) reliability: bin, n, mean P(M0), share from M0, 2 sigma with windows as clusters "
             "(asserted) and binomial (rows independent)"]
    p_m0 = np.concatenate([r["p_magmatic"] for r in records])
    came = np.concatenate([np.asarray(r["row_model"]) == 0 for r in records])
    binomial = reliability_table(p_m0, came)
    lines += [f"  [{lo:.1f}, {hi:.1f}) n={n:4d} mean P={pb:.3f} share={sh:.3f} +-{band:.3f} (+-{b[5]:.3f})"
              for (lo, hi, n, pb, sh, band), b in zip(table, binomial)]
    lines.append("(model- and prior-dependent: calibration of the sampler for this model, not of the "
                 "model against nature)")
    return "\n".join(lines)


def run(out_path, seed, n_windows, start=0):
    """Append one JSON line per window to out_path (windows already there are skipped)."""
    out = Path(out_path)
    done = set()
    if out.exists():
        done = {json.loads(line)["window"] for line in out.read_text().splitlines() if line.strip()}
    st = setup()
    for k in range(start, start + n_windows):
        if k in done:
            continue
        rec = one_window(st, seed, k)
        with out.open("a") as fh:
            fh.write(json.dumps(rec) + "\n")
            fh.flush()


if __name__ == "__main__":
    import argparse
    ap = argparse.ArgumentParser(description="window-model SBC, one JSON line per window")
    ap.add_argument("out")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("-n", type=int, default=100)
    ap.add_argument("--start", type=int, default=0)
    ap.add_argument("--report", action="store_true")
    a = ap.parse_args()
    if a.report:
        print(report([json.loads(x) for x in Path(a.out).read_text().splitlines() if x.strip()]))
    else:
        run(a.out, a.seed, a.n, a.start)
