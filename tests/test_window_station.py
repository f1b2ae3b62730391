"""A station-length window (slow): a week of 30-minute ratios from one station.

336 rows from one arc_basalt source (the shipped prior's package forward model: H2O
3.6 wt%, CO2 1800 ppm, S 2000 ppm, dFMQ 0.9, 1150 C), degassing pressures log-uniform
over 100-600 bar, a random half of the rows with 70 % of their SO2 scrubbed, 15 %
log-normal noise, seeded. Inverted as one window with the default (pooled) pressures:
the window must not be flagged for convergence (R-hat across the SMC runs, distinct
particles). Its CPU seconds and peak RSS are printed (resource.getrusage), never
asserted: speed is measured by `ventsource bench`.

Measured with the window defaults (move_rule "ridge", max_moves 30, final_moves 60; the
2-core machine running two such jobs at once): seed 1 R-hat 1.010, seed 2 1.011 (largest
over the 9 shared parameters), no flag, 495-496 CPU-s, peak RSS 0.32 GiB; magmatic rows
P(M0) mean 0.81, scrubbed rows max 0.000. This test on the final code (another slow test
on the other core): R-hat 1.010, no flag, 498 CPU-s, process peak RSS 0.35 GiB. Before, with the "jump" rule and 20 moves:
R-hat 1.080 at 438 CPU-s (flagged); "ridge" with 20 moves 1.036 / 1.021 (349-353
CPU-s), with 30 moves 1.013 / 1.023 (463-466), with 20 moves and 40 final 1.020
(DEVELOPERS.md, the ridge move).
On 0.5.0 (persistent hypotheses, the persistence integrated out on its grid): R-hat
1.015, no flag, 607 CPU-s alone on the 2-core machine (606-612 beside other jobs; over
the issue's 600, 495-498 on 0.4.2: not yet profiled), peak RSS 0.32-0.33 GiB; magmatic
rows P(M0) mean 0.793, scrubbed rows max 0.000 (the rows' states are a random half, so
the persistence is learned low: 0.01-0.23). The main run alone (the SMC, a separate
script, seeds 1 and 2 with the persistence sampled as a parameter, before it was
integrated out): R-hat 1.058 and 1.008; without persistence 1.010 (seed 1). The 90 %
band of H2O (3.9-5.8 wt%) misses the truth 3.6 with and without persistence (seed 1,
independent: 3.85-5.85); this test does not assert bands.
Profiled on 0.5.0 (seed 1, two jobs at once, 0.4.2 beside it on the same data): 611
CPU-s against 0.4.2's 592 (327,400 against 323,200 forward evaluations, 14 stages in
both), of which the main SMC 470, the change-of-source check 115, the rows 10: the
persistence was not the cost; the machine was slower than when 0.4.2 measured 495-498.
Four fifths of a likelihood call was the per-row evidence loop, half of it in log Phi.
On 0.5.1 (log Phi read from a table in that loop, below 1e-10 nats): 521 CPU-s alone on
the machine (520 beside 0.4.2's 586 on the same data), same R-hat 1.015 and row answers,
no flag, peak RSS 0.32 GiB. Other draws of the same story (0.5.1, seed 1, not asserted):
data seeds 4 and 5 gave R-hat 1.015 and 1.039 (flagged), the H2O band excluding the
truth in both (docs/models.md, the pool's limit); with the rows' pressures drawn
bell-shaped in the pool's scores instead, 1.026 (flagged) and 1.018, every band holding.
"""
import resource
import time
from pathlib import Path

import numpy as np
import pytest

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Measurement
from ventsource.inference.priors import load_prior_file
from ventsource.inference.window.sampling import infer_window

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
TRUTH = dict(temperature_c=1150.0, dfmq=0.9, h2o_wt=3.6, co2_ppm=1800.0, s_ppm=2000.0,
             quench_temperature_c=950.0, h2_retained_log10=-1.0)
CONVERGENCE_FLAGS = ("rhat_high", "few_distinct_particles")


def station_week(spec, forward, n_rows=336, seed=3):
    rng = np.random.default_rng(seed)
    names = list(spec.free_names)
    theta = np.zeros((n_rows, len(names)))
    for name, value in TRUTH.items():
        theta[:, names.index(name)] = value
    theta[:, names.index("pressure_bar")] = np.exp(rng.uniform(np.log(100.0), np.log(600.0), n_rows))
    scrubbed = np.zeros(n_rows)
    scrubbed[rng.permutation(n_rows)[:n_rows // 2]] = 0.7
    theta[:, names.index("scrubbed_so2")] = scrubbed
    pred = forward.ratios(spec.full(theta))
    assert np.all(np.isfinite(pred))
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    return [Measurement(NAMES, obs[i], 0.15, label=f"t{i}") for i in range(n_rows)], scrubbed


@pytest.mark.slow
def test_a_week_of_station_ratios_as_one_window_converges(capsys):
    spec = load_prior_file(ROOT / "priors" / "arc_basalt.toml")
    forward = ForwardModel(spec, ratio_names=NAMES)
    meas, scrubbed = station_week(spec, forward)
    start = time.process_time()
    res = infer_window(meas, spec, forward=forward, seed=1)
    cpu = time.process_time() - start
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 ** 2
    p = np.array([r.p_magmatic for r in res.rows])
    with capsys.disabled():
        print(f"\n336-row window: {cpu:.0f} CPU-s, process peak RSS {rss:.2f} GiB, R-hat "
              f"{res.diagnostics['rhat_max']:.3f}, stages {res.diagnostics['stages']}, flags {res.flags}; "
              f"P(M0) magmatic rows mean {p[scrubbed == 0].mean():.3f}, scrubbed rows max "
              f"{p[scrubbed > 0].max():.3f}")
    assert not set(CONVERGENCE_FLAGS) & set(res.flags), (res.flags, res.diagnostics["rhat_max"])
    assert not any(set(CONVERGENCE_FLAGS) & set(r.flags) for r in res.rows)
