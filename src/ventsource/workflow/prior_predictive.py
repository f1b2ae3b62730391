"""Prior predictive draws of the gas ratios, with and without scrubbing."""
import os

import numpy as np
import pandas as pd

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError
from ventsource.forward.model import ForwardModel


def prior_predictive_table(spec, n, seed=0, ratio_names=None):
    """DataFrame of n prior draws under M1 (with scrubbing, fraction from the prior) and n under M0
    (no scrubbing); with a [hypotheses] table also n under M2 (the M0 gas with its SO2 x (1 + r),
    r from the release prior, drawn after the others so their draws stay as they were)."""
    rng = np.random.default_rng(seed)
    ratio_names = tuple(ratio_names or ("SO2/CO2", "H2S/SO2", "H2O/CO2", "CO2/ST"))
    model = ForwardModel(spec, ratio_names)
    theta = spec.full(spec.sample(rng, n))
    frames = []
    for label, th in (("M1 with scrubbing", theta), ("M0 purely magmatic", _no_scrub(spec, theta))):
        state = model.state(th, saturation=False)
        frames.append(_frame(spec, label, th, state["status"], state["ratios"], ratio_names))
    release = getattr(spec, "release", None)
    if release is not None:
        from ventsource.ascent import observables
        from ventsource.inference.hypotheses.release_marginal import released_gas
        r = release.distribution.sample(rng, n)
        gas = released_gas(state["gas"], r)  # state: the M0 draws (no scrubbing)
        gas = gas / gas.sum(axis=1, keepdims=True)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratios = observables.ratios(gas, ratio_names)
        df = _frame(spec, M2_LABEL, th, state["status"], ratios, ratio_names)
        df["released_so2"] = r
        frames.append(df)
    return pd.concat(frames, ignore_index=True)


def excluded_note(table):
    """One line: prior draws given zero prior mass (status 3: sulfur = "partition" with
    D_S x S >= 1, a first gas holding more than all the sulfur)."""
    m1 = table[table["model"] == "M1 with scrubbing"]
    n_ex = int((m1["status"] == 3).sum())
    return (f"{n_ex} of {len(m1)} draws ({100.0 * n_ex / max(len(m1), 1):.1f} %) given zero prior "
            "mass: D_S x S >= 1 (status 3)")


M2_LABEL = "M2 stored sulfur released"


def _frame(spec, label, theta, status, ratios, ratio_names):
    df = pd.DataFrame(theta, columns=spec.parameter_names)
    df.insert(0, "model", label)
    df["status"] = status
    for k, name in enumerate(ratio_names):
        df[name] = ratios[:, k]
    return df


def _no_scrub(spec, theta):
    th = theta.copy()
    th[:, list(spec.parameter_names).index("scrubbed_so2")] = 0.0
    return th


def run_prior_predictive(spec, n, out_csv, plot_path=None, data_path=None, x_ratio="H2S/SO2",
                         y_ratio="SO2/CO2", seed=0):
    names = ("SO2/CO2", "H2S/SO2", "H2O/CO2", "CO2/ST")
    names = tuple(dict.fromkeys(names + (x_ratio, y_ratio)))
    data = _read_overlay(data_path, x_ratio, y_ratio) if data_path else None  # checked before writing
    table = prior_predictive_table(spec, n, seed=seed, ratio_names=names)
    table.to_csv(f"{out_csv}.part", index=False)
    os.replace(f"{out_csv}.part", out_csv)
    from ventsource.workflow.table_notes import write_table_sidecar
    write_table_sidecar(out_csv, f"prior-predictive draws of prior '{spec.name}': one row per draw and "
                        "model (M0 purely magmatic, M1 with scrubbing, and M2 stored sulfur released with a "
                        "[hypotheses] table), parameters, status (0 = gas, 1 = no gas, 2 = failed, 3 = zero "
                        "prior mass: D_S x S >= 1) and gas ratios in mol/mol; " + excluded_note(table),
                        synthetic=bool(getattr(spec, "fictional", False)))
    if plot_path:
        plot_ratio_plane(table, x_ratio, y_ratio, plot_path, data=data, title=spec.name)
    return table


def _read_overlay(path, x_ratio, y_ratio):
    from ventsource.workflow.measurements import read_measurements
    return overlay_points(read_measurements(path), x_ratio, y_ratio)


def overlay_points(series, x_ratio, y_ratio):
    """DataFrame x, y, time, cens_x, cens_y (-1 below a detection limit, 1 above range, 0 exact)
    of the rows carrying both ratios; censored cells are placed at their limit."""
    rows = []
    for t, m in zip(series.times, series.measurements):
        names = list(m.ratio_names)
        if x_ratio in names and y_ratio in names:
            i, j = names.index(x_ratio), names.index(y_ratio)
            if np.isfinite(m.values[i]) and np.isfinite(m.values[j]):
                rows.append((m.values[i], m.values[j], pd.Timestamp(str(t)), int(m.censoring[i]),
                             int(m.censoring[j])))
    return pd.DataFrame(rows, columns=["x", "y", "time", "cens_x", "cens_y"])


LEVELS = (0.5, 0.9, 0.99)  # shares of prior-predictive draws inside each contour
PANELS = (("M0 purely magmatic", "no scrubbing (purely magmatic gas)"),
          ("M1 with scrubbing", "with scrubbing (scrubbed fraction drawn from the prior)"),
          ("M2 stored sulfur released", "with stored sulfur released (SO2 x (1 + r), r from the prior)"))
COLOURS = ("#3b5b92", "#c07a2c", "#6a3d7a")


def _log_draws(table, label, x_ratio, y_ratio):
    sub = table[(table["model"] == label) & (table["status"] == 0)]
    x, y = sub[x_ratio].to_numpy(float), sub[y_ratio].to_numpy(float)
    ok = np.isfinite(x) & np.isfinite(y) & (x > 0) & (y > 0)
    return np.log10(x[ok]), np.log10(y[ok])


def _limits(draws, data, col):
    """Log10 axis limits: 1-99 % of the prior-predictive draws, widened to hold the data."""
    vals = np.concatenate([d[col] for d in draws if d[col].size])
    lo, hi = np.quantile(vals, [0.01, 0.99]) if vals.size else (-1.0, 1.0)
    if data is not None and len(data):
        v = np.log10(data["x" if col == 0 else "y"].to_numpy(float))
        lo, hi = min(lo, v.min()), max(hi, v.max())
    pad = 0.05 * max(hi - lo, 0.2)
    return lo - pad, hi + pad


def _density_contours(ax, lx, ly, xlim, ylim, colour):
    """Filled contours of the smoothed 2-D histogram enclosing LEVELS of the draws."""
    from scipy.ndimage import gaussian_filter
    if lx.size < 10:
        ax.scatter(10 ** lx, 10 ** ly, s=4, color=colour)
        return
    h, xe, ye = np.histogram2d(lx, ly, bins=60, range=[xlim, ylim])
    h = gaussian_filter(h, 1.6).T
    flat = np.sort(h.ravel())[::-1]
    cum = np.cumsum(flat) / max(flat.sum(), 1e-300)
    thresholds = sorted({float(flat[min(np.searchsorted(cum, q), flat.size - 1)]) for q in LEVELS})
    xc, yc = 10 ** (0.5 * (xe[1:] + xe[:-1])), 10 ** (0.5 * (ye[1:] + ye[:-1]))
    if len(thresholds) >= 1 and thresholds[-1] > 0:
        levels = thresholds + [float(h.max()) * 1.0001]
        ax.contourf(xc, yc, h, levels=levels, colors=[colour], alpha=0.18)
        ax.contour(xc, yc, h, levels=thresholds, colors=[colour], linewidths=0.8)


# (x censoring, y censoring) -> arrow marker pointing where the true value may lie;
# a row censored in both ratios is drawn with its x arrow
CENSOR_MARKERS = {(-1, 0): "<", (1, 0): ">", (0, -1): "v", (0, 1): "^"}


def _plot_data(ax, data):
    """Measurements coloured by time; censored ones as arrows pointing where the value may be."""
    if data is None or not len(data):
        return None
    import matplotlib.dates as mdates
    tnum = mdates.date2num(pd.to_datetime(data["time"]))
    style = dict(cmap="viridis", vmin=tnum.min(), vmax=tnum.max() + 1e-9, edgecolor="black", zorder=5)
    exact = ((data["cens_x"] == 0) & (data["cens_y"] == 0)).to_numpy()
    sc = ax.scatter(data["x"][exact], data["y"][exact], c=tnum[exact], s=30, marker="D", linewidths=0.6,
                    label="measurement (colour: time)", **style)
    words = {"<": "below detection limit in x", ">": "above range in x", "v": "below detection limit in y",
             "^": "above range in y"}
    for (cx, cy), marker in CENSOR_MARKERS.items():
        sel = ((np.sign(data["cens_x"]) == cx) & (np.sign(data["cens_y"]) == cy)).to_numpy()
        both = ((data["cens_x"] != 0) & (data["cens_y"] != 0)).to_numpy()
        sel = sel | (both & (np.sign(data["cens_x"]).to_numpy() == cx) & (cy == 0))
        if sel.any():
            ax.scatter(data["x"][sel], data["y"][sel], c=tnum[sel], s=70, marker=marker, linewidths=0.8,
                       label=f"censored: {words[marker]} (drawn at the limit)", **style)
    return sc


def plot_ratio_plane(table, x_ratio, y_ratio, path, data=None, title=""):
    """Side-by-side prior-predictive density contours (no scrubbing | with scrubbing) with
    the measurements coloured by time; saves path and returns it."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig = ratio_plane_figure(table, x_ratio, y_ratio, data=data, title=title)
    fig.savefig(path, dpi=130)
    plt.close(fig)
    return path


def ratio_plane_figure(table, x_ratio, y_ratio, data=None, title=""):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.dates as mdates
    import matplotlib.pyplot as plt
    from matplotlib.patches import Patch
    from ventsource.workflow.log_axes import plain_log_axis
    if data is not None and not isinstance(data, pd.DataFrame):  # plain (k, 2) array of exact values
        data = pd.DataFrame({"x": data[:, 0], "y": data[:, 1], "time": pd.Timestamp("2000-01-01"),
                             "cens_x": 0, "cens_y": 0}) if len(data) else None
    panels = [p for p in PANELS if (table["model"] == p[0]).any()]  # M2 only with a release prior
    draws = [_log_draws(table, label, x_ratio, y_ratio) for label, _ in panels]
    xlim, ylim = _limits(draws, data, 0), _limits(draws, data, 1)
    fig, axes = plt.subplots(1, len(panels), figsize=(5.5 * len(panels), 6.0), sharex=True, sharey=True)
    sc = None
    for ax, (label, words), (lx, ly), colour in zip(axes, panels, draws, COLOURS):
        _density_contours(ax, lx, ly, xlim, ylim, colour)
        sc = _plot_data(ax, data) or sc
        ax.set_xlim(10 ** xlim[0], 10 ** xlim[1])
        ax.set_ylim(10 ** ylim[0], 10 ** ylim[1])
        plain_log_axis(ax, "x")
        plain_log_axis(ax, "y")
        ax.set_title(f"Model prediction {words}".replace(" (", "\n("), fontsize=9)
        ax.set_xlabel(f"{x_ratio} (mol/mol)")
    shares = ", ".join(f"{100 * q:g}" for q in LEVELS)
    patches = [Patch(color=c, alpha=0.4, label=f"model draws {w.split(' (')[0]}: contours hold {shares} %")
               for (_, w), c in zip(panels, COLOURS)]
    handles, _ = axes[0].get_legend_handles_labels()
    fig.legend(handles=patches + handles, fontsize=7, frameon=False, loc="lower center", ncol=2,
               bbox_to_anchor=(0.45, 0.035))
    axes[0].set_ylabel(f"{y_ratio} (mol/mol)")
    if sc is not None:
        cb = fig.colorbar(sc, cax=fig.add_axes([0.85, 0.24, 0.015, 0.62]))
        cb.set_label("measurement time")
        times = pd.to_datetime(data["time"])
        short = (times.max() - times.min()) < pd.Timedelta(days=3)
        cb.ax.yaxis.set_major_locator(mdates.AutoDateLocator(maxticks=6))
        cb.ax.yaxis.set_major_formatter(mdates.DateFormatter("%Y-%m-%d\n%H:%M" if short else "%Y-%m-%d"))
    fig.suptitle(f"What the prior allows, and the measurements: prior {title}", fontsize=10)
    fig.text(0.01, 0.01, "Caution: " + CAUTION, fontsize=7, color="#444444")
    fig.subplots_adjust(left=0.08, right=0.83, bottom=0.24, top=0.86, wspace=0.08)
    return fig


__all__ = ["prior_predictive_table", "run_prior_predictive", "plot_ratio_plane", "ratio_plane_figure",
           "overlay_points", "InputError"]
