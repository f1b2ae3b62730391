"""Prior predictive draws of the gas ratios, with and without scrubbing."""
import numpy as np
import pandas as pd

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.forward.model import ForwardModel


def prior_predictive_table(spec, n, seed=0, ratio_names=None):
    """DataFrame of n prior draws under M1 (scrubbing free) and n under M0 (none)."""
    rng = np.random.default_rng(seed)
    ratio_names = tuple(ratio_names or ("SO2/CO2", "H2S/SO2", "H2O/CO2", "CO2/ST"))
    model = ForwardModel(spec, ratio_names)
    theta = spec.full(spec.sample(rng, n))
    frames = []
    for label, th in (("M1 scrubbing free", theta), ("M0 purely magmatic", _no_scrub(spec, theta))):
        state = model.state(th, saturation=False)
        df = pd.DataFrame(th, columns=spec.parameter_names)
        df.insert(0, "model", label)
        df["status"] = state["status"]
        for k, r in enumerate(ratio_names):
            df[r] = state["ratios"][:, k]
        frames.append(df)
    return pd.concat(frames, ignore_index=True)


def _no_scrub(spec, theta):
    th = theta.copy()
    th[:, list(spec.parameter_names).index("scrubbed_so2")] = 0.0
    return th


def run_prior_predictive(spec, n, out_csv, plot_path=None, data_path=None, x_ratio="H2S/SO2",
                         y_ratio="SO2/CO2", seed=0):
    names = ("SO2/CO2", "H2S/SO2", "H2O/CO2", "CO2/ST")
    names = tuple(dict.fromkeys(names + (x_ratio, y_ratio)))
    table = prior_predictive_table(spec, n, seed=seed, ratio_names=names)
    table.to_csv(out_csv, index=False)
    if plot_path:
        data = _read_overlay(data_path, x_ratio, y_ratio) if data_path else None
        plot_ratio_plane(table, x_ratio, y_ratio, plot_path, data=data, title=spec.name)
    return table


def _read_overlay(path, x_ratio, y_ratio):
    from ventsource.workflow.measurements import read_measurements
    ms = read_measurements(path)
    return ms.values_for(x_ratio, y_ratio)


def plot_ratio_plane(table, x_ratio, y_ratio, path, data=None, title=""):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7.0, 5.6))
    styles = {"M0 purely magmatic": dict(color="#3b5b92", label="prior predictive, no scrubbing"),
              "M1 scrubbing free": dict(color="#c07a2c", label="prior predictive, scrubbing free")}
    for label in ("M1 scrubbing free", "M0 purely magmatic"):
        sub = table[(table["model"] == label) & (table["status"] == 0)]
        ok = np.isfinite(sub[x_ratio]) & np.isfinite(sub[y_ratio]) & (sub[x_ratio] > 0) & (sub[y_ratio] > 0)
        ax.scatter(sub[x_ratio][ok], sub[y_ratio][ok], s=3, alpha=0.25, linewidths=0, **styles[label])
    if data is not None and len(data):
        ax.scatter(data[:, 0], data[:, 1], s=28, marker="D", facecolor="white",
                   edgecolor="black", linewidths=1.0, label="measurements", zorder=5)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(f"{x_ratio} (molar)")
    ax.set_ylabel(f"{y_ratio} (molar)")
    ax.set_title(f"Prior predictive gas ratios: {title}")
    leg = ax.legend(loc="best", markerscale=3, frameon=False)
    for h in leg.legend_handles:
        h.set_alpha(1.0)
    fig.text(0.01, 0.01, CAUTION, fontsize=7, color="#444444", wrap=True)
    fig.tight_layout(rect=(0, 0.04, 1, 1))
    fig.savefig(path, dpi=130)
    plt.close(fig)
    return path


__all__ = ["prior_predictive_table", "run_prior_predictive", "plot_ratio_plane", "InputError"]
