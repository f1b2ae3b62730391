"""Bar chart of `ventsource plan`: expected Brier score and 90 % widths per candidate,
with Monte Carlo error bars and the caution."""
import numpy as np

from ventsource.common.caution import CAUTION


def plan_figure(table):
    """matplotlib Figure: one panel per headline metric, candidates in rank order."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    panels = (("brier", "expected Brier score of P(M0)\n(lower is better)"),
              ("width90_scrubbed", "expected 90 % width,\nscrubbed fraction"),
              ("width90_pressure", "expected 90 % width,\npressure [bar]"))
    fig, axes = plt.subplots(1, 3, figsize=(12, 0.5 * len(table) + 2.2), sharey=True)
    y = np.arange(len(table))
    for ax, (key, label) in zip(axes, panels):
        ax.barh(y, table[f"{key}_mean"], xerr=2 * table[f"{key}_mc_error"], color="0.6",
                ecolor="k", capsize=3)
        ax.set_xlabel(label)
    axes[0].set_yticks(y, table["candidate"])
    axes[0].invert_yaxis()
    fig.text(0.01, 0.01, "bars: 2 Monte Carlo errors. " + CAUTION, fontsize=7, ha="left",
             va="bottom")
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    return fig


def plot_plan(table, path):
    import matplotlib.pyplot as plt
    fig = plan_figure(table)
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path
