"""figures/segments.png of a `--window auto` run: where the data put the changes of source.

Top: the posterior probability of a change of magma source just before each row
(p_change_before, workflow/segments.py), with the chosen boundaries dashed. Bottom:
each row's P(M0) from the inversion of its own segment, coloured by segment. The
caution is the footnote, as on every figure.
"""
import os

import pandas as pd

from ventsource.common.caution import CAUTION

INK = "#1d3557"   # the series figure's ink (workflow/figures.py), not imported: figures calls us

_SEGMENT_COLOURS = ("#1d3557", "#b5651d", "#2a7f62", "#6a3d7a", "#8d6e00", "#a23b3b")


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _read_summary(summary_csv):
    s = pd.read_csv(summary_csv, dtype={"id": str, "window": str}, keep_default_na=False, na_values=[""])
    return s, pd.to_datetime(s["time"].str.rstrip("Z"))


def segments_figure(summary_csv, title=""):
    """The Figure (not saved, not closed), or None when the run has no p_change_before."""
    plt = _plt()
    s, times = _read_summary(summary_csv)
    if "p_change_before" not in s:
        return None
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(12, 5.2), sharex=True)
    p = pd.to_numeric(s["p_change_before"], errors="coerce")
    width = (times.diff().median() or pd.Timedelta(hours=1)) * 0.6
    gap = times.diff()
    between = times - gap.fillna(pd.Timedelta(0)) / 2   # a change before row i lies between i-1 and i
    top.bar(between, p.fillna(0.0), width=width, color=INK, label="P(change of source between two rows)")
    top.set_ylim(0, 1.02)
    top.set_ylabel("P(change)")
    labels = s["window"].astype("string").fillna("").tolist()
    starts = [i for i in range(len(labels)) if i == 0 or labels[i] != labels[i - 1]]
    for k, i in enumerate(starts):
        j = (starts[k + 1] if k + 1 < len(starts) else len(labels))
        colour = _SEGMENT_COLOURS[k % len(_SEGMENT_COLOURS)]
        bottom.plot(times.iloc[i:j], s["p_magmatic"].iloc[i:j], "o", ms=4, color=colour, label=labels[i])
        if i > 0:
            edge = times.iloc[i - 1] + (times.iloc[i] - times.iloc[i - 1]) / 2
            for ax in (top, bottom):
                ax.axvline(edge, color="#999999", lw=1.0, ls="--", zorder=0)
    bottom.set_ylim(-0.02, 1.02)
    bottom.set_ylabel("P(M0 | segment)")
    bottom.set_xlabel("time (UTC)")
    for ax in (top, bottom):
        ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    fig.suptitle((title + "\n" if title else "") + "segments chosen by the data (--window auto): dashed "
                 "lines are the changes of source found; P(M0) of each row from its own segment",
                 fontsize=9)
    fig.text(0.01, 0.005, "Caution: " + CAUTION, fontsize=7, color="#333333", ha="left", va="bottom")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    return fig


def plot_segments(out_dir, fig_dir, title=""):
    """figures/segments.png of a --window auto run; [] for other runs."""
    summary = os.path.join(out_dir, "summary.csv")
    if not os.path.exists(os.path.join(out_dir, "segments.csv")) or not os.path.exists(summary):
        return []
    fig = segments_figure(summary, title)
    if fig is None:
        return []
    path = os.path.join(fig_dir, "segments.png")
    fig.savefig(path, dpi=120)
    _plt().close(fig)
    return [path]

