"""Figures of a finished run: the time series, corner plots, the ratio-ratio plane.

Every figure carries the caution as a footnote. Palette: dark blue for
measurements and P(M0), copper for posterior-predictive bands, plum for the
scrubbed fraction; grey crosses for a synthetic truth when one is given.
"""
import os

import numpy as np
import pandas as pd

from ventsource.common.caution import CAUTION

INK = "#1d3557"
BAND = "#b5651d"
SCRUB = "#6a3d7a"


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _footnote(fig):
    fig.text(0.01, 0.005, "Caution: " + CAUTION, fontsize=7, color="#333333", ha="left", va="bottom")


def plot_time_series(summary_csv, path, series=None, truth_csv=None, title=""):
    """Measured ratios with posterior-predictive 5-95 % bands, P(M0), scrubbed fraction."""
    plt = _plt()
    s = pd.read_csv(summary_csv, dtype={"id": str}, keep_default_na=False, na_values=[""])
    times = pd.to_datetime(s["time"].str.rstrip("Z"))
    ratios = [c[3:-4] for c in s.columns if c.startswith("pp ") and c.endswith("_q05")]
    has_p = "pressure_bar_median" in s
    n = len(ratios) + 2 + int(has_p)
    fig, axes = plt.subplots(n, 1, figsize=(9, 1.9 * n + 1.0), sharex=True)
    truth = pd.read_csv(truth_csv) if truth_csv else None
    if has_p:
        _pressure_panel(axes[-3], s, times, truth)
    for ax, r in zip(axes, ratios):
        lo, med, hi = (s[f"pp {r}_{q}"].astype(float) for q in ("q05", "median", "q95"))
        ax.fill_between(times, lo, hi, color=BAND, alpha=0.25, lw=0, label="posterior predictive 5-95 %")
        ax.plot(times, med, color=BAND, lw=1.0)
        if series is not None and r in series.ratio_names:
            j = series.ratio_names.index(r)
            t = pd.to_datetime([str(x) for x in series.times])
            v = np.array([m.values[j] for m in series.measurements])
            c = np.array([m.censoring[j] for m in series.measurements])
            ok = np.isfinite(v)
            for sel, mk, lab in ((c == 0, "o", "measured"), (c < 0, "v", "below detection limit"),
                                 (c > 0, "^", "above range")):
                if np.any(ok & sel):
                    ax.plot(t[ok & sel], v[ok & sel], mk, ms=3.5 if mk == "o" else 5,
                            mfc=INK if mk == "o" else "none", color=INK, label=lab)
        if truth is not None and f"true {r}" in truth:
            ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth[f"true {r}"], "x",
                    ms=4, color="#777777", label="synthetic truth (noise-free)")
        ax.set_yscale("log")
        ax.set_ylabel(r, fontsize=9)
    axes[0].legend(fontsize=7, frameon=False, ncol=4, loc="lower left")
    ax = axes[-2]
    err = s["p_magmatic_error"].astype(float).fillna(0.0)
    ax.errorbar(times, s["p_magmatic"].astype(float), yerr=err, fmt="s", ms=3.5, color=INK,
                ecolor="#8da9c4", capsize=2)
    ax.axhline(0.5, color="#999999", lw=0.8, ls=":", label="even prior odds (0.5)")
    ax.legend(fontsize=7, frameon=False, loc="lower left")
    ax.set_ylim(-0.03, 1.03)
    ax.set_ylabel("P(M0)\npurely magmatic", fontsize=9)
    ax = axes[-1]
    _scrubbed_panel(ax, s, times, truth)
    if title:
        fig.suptitle(title, fontsize=11)
    _footnote(fig)
    fig.tight_layout(rect=(0, 0.025, 1, 1))
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def _scrubbed_panel(ax, s, times, truth):
    """Model-averaged scrubbed fraction (point mass at 0 with weight P(M0)) where present,
    else the posterior if scrubbed, labelled so."""
    avg = "scrubbed_so2_avg_median" in s and s["scrubbed_so2_avg_median"].notna().any()
    tag, label = (("scrubbed_so2_avg", "model-averaged") if avg else
                  ("scrubbed_so2", "if scrubbed (model M1 only)"))
    if f"{tag}_median" not in s:
        return
    ax.fill_between(times, s[f"{tag}_q05"].astype(float), s[f"{tag}_q95"].astype(float),
                    color=SCRUB, alpha=0.2, lw=0, label=f"5-95 %, {label}")
    ax.plot(times, s[f"{tag}_median"].astype(float), "-o", ms=3, color=SCRUB, label=f"median, {label}")
    if truth is not None and "scrubbed_so2" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth["scrubbed_so2"], "x",
                ms=4, color="#777777", label="synthetic truth")
    ax.legend(fontsize=7, frameon=False, loc="upper left")
    ax.set_ylim(-0.03, 1.03)
    ax.set_ylabel("scrubbed SO2\nfraction", fontsize=9)


def _pressure_panel(ax, s, times, truth):
    ax.fill_between(times, s["pressure_bar_q05"].astype(float), s["pressure_bar_q95"].astype(float),
                    color=INK, alpha=0.15, lw=0, label="5-95 %")
    ax.plot(times, s["pressure_bar_median"].astype(float), "-o", ms=3, color=INK, label="median")
    if truth is not None and "pressure_bar" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth["pressure_bar"], "x",
                ms=4, color="#777777", label="synthetic truth")
    ax.set_yscale("log")
    ax.set_ylabel("degassing\npressure (bar)", fontsize=9)
    ax.legend(fontsize=7, frameon=False, loc="upper left", ncol=3)


def plot_rows_vs_windows(rows_csv, windows_csv, path, truth_csv=None, title=""):
    """P(M0) and the model-averaged scrubbed fraction: row by row beside by windows."""
    plt = _plt()
    a = pd.read_csv(rows_csv, dtype={"id": str}, keep_default_na=False, na_values=[""])
    b = pd.read_csv(windows_csv, dtype={"id": str, "window": str}, keep_default_na=False, na_values=[""])
    t = pd.to_datetime(a["time"].str.rstrip("Z"))
    fig, axes = plt.subplots(2, 1, figsize=(9, 6.5), sharex=True)
    for s, mk, col, lab in ((a, "o", "#8da9c4", "row by row"), (b, "s", INK, "by windows (shared source)")):
        axes[0].errorbar(t, s["p_magmatic"].astype(float), yerr=s["p_magmatic_error"].astype(float).fillna(0),
                         fmt=mk, ms=4, color=col, capsize=2, label=lab)
        axes[1].plot(t, s["scrubbed_so2_avg_median"].astype(float), mk + "-", ms=3, color=col, label=lab)
    mixed = b["flags"].fillna("").str.contains("mixed_sources")
    for ax in axes:
        for tm in t[mixed.to_numpy()]:
            ax.axvspan(tm - pd.Timedelta(days=5), tm + pd.Timedelta(days=5), color="#f4a261", alpha=0.25, lw=0)
    if truth_csv:
        tr = pd.read_csv(truth_csv)
        axes[1].plot(pd.to_datetime(tr["time"].str.rstrip("Z")), tr["scrubbed_so2"], "x", color="#777777",
                     label="synthetic truth")
    axes[0].axhline(0.5, color="#999999", lw=0.8, ls=":", label="prior P(M0) = 0.5")
    axes[0].set_ylabel("P(M0)\npurely magmatic", fontsize=9)
    axes[1].set_ylabel("scrubbed SO2 fraction\n(model-averaged median)", fontsize=9)
    for ax in axes:
        ax.set_ylim(-0.03, 1.03)
        ax.legend(fontsize=7, frameon=False, loc="center left")
    axes[0].set_title((title + "\n" if title else "") + "shaded: window flagged mixed_sources "
                      "(a change of magma inside the window)", fontsize=9)
    _footnote(fig)
    fig.tight_layout(rect=(0, 0.025, 1, 1))
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def plot_corner(out_dir, row_ids, fig_dir=None):
    """Corner plot of the M1 posterior of each named row, from rows/KEY.nc."""
    import arviz as az
    import corner
    from ventsource.common.errors import InputError
    from ventsource.workflow.series import row_key
    plt = _plt()
    fig_dir = fig_dir or os.path.join(out_dir, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    paths = []
    for rid in row_ids:
        nc = os.path.join(out_dir, "rows", f"{row_key(rid)}.nc")
        if not os.path.exists(nc):
            raise InputError(f"--corner: no finished row with id '{rid}' in {out_dir}")
        post = az.from_netcdf(nc).posterior
        names = list(post.data_vars)
        x = np.column_stack([post[v].values.reshape(-1) for v in names])
        labels = [f"{v}\n[{post[v].attrs.get('units', '')}]" for v in names]
        fig = corner.corner(x, labels=labels, quantiles=[0.05, 0.5, 0.95], color=INK,
                            hist_kwargs={"color": INK}, label_kwargs={"fontsize": 8})
        fig.suptitle(f"posterior (scrubbing free), row {rid}", fontsize=10)
        _footnote(fig)
        p = os.path.join(fig_dir, f"corner_{row_key(rid)}.png")
        fig.savefig(p, dpi=100)
        plt.close(fig)
        paths.append(p)
    return paths


def plot_ratio_plane_with_data(spec, series, path, n=2000, seed=0, x_ratio=None, y_ratio=None):
    """Prior-predictive ratio-ratio plane (with and without scrubbing) with the measurements."""
    from ventsource.workflow.prior_predictive import plot_ratio_plane, prior_predictive_table
    names = list(series.ratio_names)
    x_ratio = x_ratio or ("H2S/SO2" if "H2S/SO2" in names else names[-1])
    y_ratio = y_ratio or ("SO2/CO2" if "SO2/CO2" in names else names[0])
    table = prior_predictive_table(spec, n, seed=seed, ratio_names=tuple(dict.fromkeys([x_ratio, y_ratio])))
    return plot_ratio_plane(table, x_ratio, y_ratio, path, data=series.values_for(x_ratio, y_ratio),
                            title=spec.name)


def run_figures(out_dir, series, spec, corner_ids=(), truth_csv=None, title="", n_prior=2000):
    """All figures of a finished run into out_dir/figures; returns their paths."""
    fig_dir = os.path.join(out_dir, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    paths = [plot_time_series(os.path.join(out_dir, "summary.csv"), os.path.join(fig_dir, "series.png"),
                              series=series, truth_csv=truth_csv, title=title)]
    if len(series.ratio_names) >= 2 and n_prior > 0:
        paths.append(plot_ratio_plane_with_data(spec, series, os.path.join(fig_dir, "ratio_plane.png"),
                                                n=n_prior))
    if corner_ids:
        paths += plot_corner(out_dir, corner_ids, fig_dir)
    return paths
