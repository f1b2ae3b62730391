"""Worked example on the synthetic Mount Kerrow data (fictional volcano).

    python examples/worked_example.py [OUT_DIR]

1. read the measurement file (the same checks as `ventsource run`);
2. invert the first six rows on two worker processes, resumably;
3. read summary.csv and set the posterior beside the synthetic truth;
4. draw the time-series, ratio-plane and one corner figure.
Short chains (demo settings), so expect convergence flags; real runs use the defaults.
"""
import os
import sys

import pandas as pd

import ventsource as vs
from ventsource.common.caution import CAUTION
from ventsource.workflow.figures import run_figures

HERE = os.path.dirname(os.path.abspath(__file__))
out = sys.argv[1] if len(sys.argv) > 1 else "worked-example-output"

# 1. the first six rows of the synthetic series
rows = pd.read_csv(os.path.join(HERE, "mount_kerrow_synthetic.csv"), dtype=str).head(6)
os.makedirs(out, exist_ok=True)
data = os.path.join(out, "six_rows.csv")
rows.to_csv(data, index=False)
series = vs.read_measurements(data, default_sigma=0.15)

# 2. invert row by row (the file's window column would otherwise group them); a second
#    call with resume=True recomputes nothing; the fast demo prior
prior = vs.load_prior("demo_mount_kerrow_fast")
summary = vs.run(series, "demo_mount_kerrow_fast", os.path.join(out, "run"), seed=1, workers=2,
                 resume=True, window="rows")

# 3. posterior beside the truth
truth = pd.read_csv(os.path.join(HERE, "mount_kerrow_truth.csv"), dtype={"id": str})
both = summary.merge(truth[["id", "episode", "pressure_bar", "scrubbed_so2"]], on="id")
print(both[["id", "episode", "p_magmatic", "p_magmatic_error", "scrubbed_so2", "scrubbed_so2_avg_median",
            "scrubbed_so2_if_scrubbed_q05", "scrubbed_so2_if_scrubbed_median", "scrubbed_so2_if_scrubbed_q95",
            "pressure_bar", "pressure_bar_avg_median"]]
      .to_string(index=False, float_format=lambda v: f"{v:.3g}"))

# 4. figures
for path in run_figures(os.path.join(out, "run"), series, prior,
                        corner_ids=[series.ids[0]], n_prior=1000):
    print("figure:", path)
print("Caution:", CAUTION)
