"""Figures of a finished run: the time series, corner plots, the ratio-ratio plane.

Every figure carries the caution as a footnote. Palette: dark blue for
measurements and P(M0), copper for posterior-predictive bands, plum for the
scrubbed fraction; grey crosses for a synthetic truth when one is given.
"""
import os

import numpy as np
import pandas as pd

from ventsource.common.caution import CAUTION
from ventsource.workflow.log_axes import plain_log_axis
from ventsource.workflow.prior_bands import prior_bands, prior_p_magmatic  # noqa: F401 (re-exported)

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


UNITS_RATIO = "mol/mol"
FLAG_COLOUR = "#c0392b"


def _read_summary(summary_csv):
    s = pd.read_csv(summary_csv, dtype={"id": str, "window": str}, keep_default_na=False, na_values=[""])
    return s, pd.to_datetime(s["time"].str.rstrip("Z"))


def plot_time_series(summary_csv, path, series=None, truth_csv=None, title="", prior_name="",
                     p_magmatic_prior=None, prior_bands=None):
    """Measured ratios with posterior-predictive 5-95 % bands, P(M0), scrubbed fraction.

    Returns the saved path; the Figure stays inspectable via series_figure()."""
    plt = _plt()
    fig = series_figure(summary_csv, series=series, truth_csv=truth_csv, title=title,
                        prior_name=prior_name, p_magmatic_prior=p_magmatic_prior,
                        prior_bands=prior_bands)
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def series_figure(summary_csv, series=None, truth_csv=None, title="", prior_name="",
                  p_magmatic_prior=None, prior_bands=None):
    """The series figure as a matplotlib Figure (not saved, not closed).

    prior_bands: {parameter: (prior 5 %, prior 95 %)} drawn as a hatched band beside the
    posterior band of the pressure and scrubbed-fraction panels (see prior_bands())."""
    plt = _plt()
    s, times = _read_summary(summary_csv)
    truth = pd.read_csv(truth_csv) if truth_csv else None
    ratios = [c[3:-4] for c in s.columns if c.startswith("pp ") and c.endswith("_q05")]
    has_p = _pressure_column(s) is not None
    has_m2 = "p_released" in s and s["p_released"].notna().any()
    has_budget = "cumulative_retained_s_t_median" in s and s["cumulative_retained_s_t_median"].notna().any()
    extra = int(has_m2) + int(has_budget)
    n = len(ratios) + 2 + int(has_p) + extra
    fig, axes = plt.subplots(n, 1, figsize=(12, 1.9 * n + 1.4), sharex=True)
    bottom = axes[-1]
    if extra:  # the sulfur panels go last; the standard panels keep their places before them
        tail, axes = axes[len(axes) - extra:], axes[:len(axes) - extra]
        if has_m2:
            _hypotheses_panel(tail[0], s, times)
        if has_budget:
            _budget_panel(tail[-1], s, times, truth)
    legend = {}
    for ax, r in zip(axes, ratios):
        _ratio_panel(ax, s, times, r, series, truth)
        for h, lab in zip(*ax.get_legend_handles_labels()):
            legend.setdefault(lab, h)  # one legend for all ratio panels, censored markers included
    if ratios:
        _legend_outside(axes[0], list(legend.values()), list(legend.keys()))
    if has_p:
        _pressure_panel(axes[-3], s, times, truth)
    _p_magmatic_panel(axes[-2], s, times, p_magmatic_prior)
    _scrubbed_panel(axes[-1], s, times, truth)
    for ax, name in ((axes[-3] if has_p else None, "pressure_bar"), (axes[-1], "scrubbed_so2")):
        if ax is not None and (prior_bands or {}).get(name) is not None:
            _prior_band(ax, prior_bands[name], name == "scrubbed_so2")
    _window_marks(fig.axes, s, times)
    bottom.set_xlabel("time (UTC)")
    import matplotlib.dates as mdates
    locator = mdates.AutoDateLocator(maxticks=8)
    bottom.xaxis.set_major_locator(locator)
    bottom.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
    data_name = os.path.basename(series.path) if series is not None else os.path.basename(summary_csv)
    head = title or "Gas-ratio inversion"
    fig.suptitle(f"{head}\nprior: {prior_name or 'not given'}   data: {data_name}", fontsize=10)
    _footnote(fig)
    fig.tight_layout(rect=(0, 0.025, 1, 1))
    return fig


# legends beside the panels, never over the data (a point under a legend is a point lost)
_LEGEND_BOX = dict(frameon=False)


def _legend_outside(ax, handles=None, labels=None):
    """The panel's legend to the right of its axes, top-aligned."""
    args = (handles, labels) if handles is not None else ()
    ax.legend(*args, fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0),
              borderaxespad=0.0)


def _window_marks(axes, s, times):
    """Windows of a window run: dotted lines between them, their labels along the top."""
    if "window" not in s or s["window"].isna().all():
        return
    labels = s["window"].astype("string").fillna("").tolist()
    starts = [i for i in range(len(labels)) if i == 0 or labels[i] != labels[i - 1]]
    for i in starts[1:]:
        edge = times.iloc[i - 1] + (times.iloc[i] - times.iloc[i - 1]) / 2
        for ax in axes:
            ax.axvline(edge, color="#999999", lw=0.8, ls=(0, (1, 2)), zorder=0)
    for k, i in enumerate(starts):
        j = (starts[k + 1] if k + 1 < len(starts) else len(labels)) - 1
        mid = times.iloc[i] + (times.iloc[j] - times.iloc[i]) / 2
        axes[0].annotate(labels[i], (mid, 1.0), xycoords=("data", "axes fraction"), xytext=(0, 2),
                         textcoords="offset points", ha="center", va="bottom", fontsize=7, color="#555555")


def _hypotheses_panel(ax, s, times):
    """P(M0), P(M1), P(M2) of each row (they sum to 1)."""
    p1 = s["p_scrubbed"].astype(float)
    p2 = s["p_released"].astype(float)
    ax.plot(times, s["p_magmatic"].astype(float), "s-", ms=3, color=INK, label="P(M0) purely magmatic")
    ax.plot(times, p1, "o-", ms=3, color=SCRUB, label="P(M1) SO2 scrubbed")
    ax.plot(times, p2, "^-", ms=3, color=BAND, label="P(M2) stored sulfur released")
    ax.set_ylim(-0.03, 1.03)
    ax.set_ylabel("probability", fontsize=9)
    _legend_outside(ax)


def _budget_panel(ax, s, times, truth=None):
    """Cumulative sulfur retained below the surface, 5-95 % band (and a synthetic truth)."""
    lo = s["cumulative_retained_s_t_q05"].astype(float)
    hi = s["cumulative_retained_s_t_q95"].astype(float)
    ax.fill_between(times, lo, hi, color=SCRUB, alpha=0.2, lw=0, label="5-95 %")
    ax.plot(times, s["cumulative_retained_s_t_median"].astype(float), "-o", ms=3, color=SCRUB,
            label="median")
    if truth is not None and "cumulative_retained_s_t" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth["cumulative_retained_s_t"], "x",
                ms=4, color="#777777", label="synthetic truth")
    ax.axhline(0.0, color="#999999", lw=0.8, ls=":")
    ax.set_ylabel("sulfur retained\nsince first row (t S)", fontsize=9)
    _legend_outside(ax)


def _ratio_panel(ax, s, times, r, series, truth):
    lo, med, hi = (s[f"pp {r}_{q}"].astype(float) for q in ("q05", "median", "q95"))
    ax.fill_between(times, lo, hi, color=BAND, alpha=0.25, lw=0, label="posterior predictive 5-95 %")
    ax.plot(times, med, color=BAND, lw=1.0)
    if series is not None and r in series.ratio_names:
        j = series.ratio_names.index(r)
        t = pd.to_datetime([str(x) for x in series.times])
        v = np.array([m.values[j] for m in series.measurements])
        c = np.array([m.censoring[j] for m in series.measurements])
        ok = np.isfinite(v)
        for sel, mk, lab in ((c == 0, "o", "measured"),
                             (c < 0, "v", "below detection limit (drawn at the limit)"),
                             (c > 0, "^", "above range (drawn at the limit)")):
            if np.any(ok & sel):
                ax.plot(t[ok & sel], v[ok & sel], mk, ms=3.5 if mk == "o" else 6,
                        mfc=INK if mk == "o" else "none", color=INK, label=lab, ls="none")
    if truth is not None and f"true {r}" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth[f"true {r}"], "x",
                ms=4, color="#777777", label="synthetic truth (noise-free)")
    plain_log_axis(ax)
    ax.set_ylabel(f"{r}\n({UNITS_RATIO})", fontsize=9)


def _p_magmatic_panel(ax, s, times, p_prior):
    err = s["p_magmatic_error"].astype(float).fillna(0.0)
    p = s["p_magmatic"].astype(float)
    ax.errorbar(times, p, yerr=err, fmt="s", ms=3.5, color=INK, ecolor="#8da9c4", capsize=2,
                label="P(M0), bar: Monte Carlo error")
    flagged = s["flags"].astype("string").fillna("").str.len().to_numpy() > 0 if "flags" in s else None
    if flagged is not None and flagged.any():
        ax.plot(times[flagged], p[flagged], "o", ms=9, mfc="none", mec=FLAG_COLOUR, mew=1.2, ls="none",
                label="row carries a flag (meanings:\nreport.html, README.txt)")
        previous = ""
        for t, pv, text in zip(times, p, s["flags"].astype("string").fillna("")):
            if text and text != previous:  # a window's flag is written once, at its first row
                ax.annotate(str(text).replace(";", "\n"), (t, pv if np.isfinite(pv) else 0.5), fontsize=6,
                            color=FLAG_COLOUR, xytext=(4, 4), textcoords="offset points")
            previous = text
    if p_prior is not None:
        ax.axhline(p_prior, color="#999999", lw=0.8, ls=":", label=f"prior P(M0) = {p_prior:g}")
    _legend_outside(ax)
    ax.set_ylim(-0.03, 1.03)
    ax.set_ylabel("P(M0) purely\nmagmatic\n(probability)", fontsize=9)


def _scrubbed_panel(ax, s, times, truth):
    """Model-averaged scrubbed fraction (point mass at 0 with weight P(M0)) and, dashed,
    the fraction if scrubbed (model M1 only)."""
    cond = "scrubbed_so2_if_scrubbed" if "scrubbed_so2_if_scrubbed_median" in s else "scrubbed_so2"
    if "scrubbed_so2_avg_median" in s and s["scrubbed_so2_avg_median"].notna().any():
        ax.fill_between(times, s["scrubbed_so2_avg_q05"].astype(float), s["scrubbed_so2_avg_q95"].astype(float),
                        color=SCRUB, alpha=0.2, lw=0, label="5-95 %, model-averaged")
        ax.plot(times, s["scrubbed_so2_avg_median"].astype(float), "-o", ms=3, color=SCRUB,
                label="median, model-averaged")
    if f"{cond}_median" in s:
        ax.plot(times, s[f"{cond}_median"].astype(float), "--", lw=1.0, color=SCRUB,
                label="median if scrubbed (model M1 only, conditional)")
    if truth is not None and "scrubbed_so2" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth["scrubbed_so2"], "x",
                ms=4, color="#777777", label="synthetic truth")
    _legend_outside(ax)
    ax.set_ylim(-0.03, 1.03)
    ax.set_ylabel("scrubbed SO2\n(fraction)", fontsize=9)


def _pressure_column(s):
    """(column stem, legend tag) of the pressure to draw, or None: the model-averaged
    pressure_bar_avg_*, else the posterior if scrubbed (said so in the legend)."""
    if "pressure_bar_avg_median" in s and s["pressure_bar_avg_median"].notna().any():
        return "pressure_bar_avg", "model-averaged"
    return ("pressure_bar_if_scrubbed", "if scrubbed (model M1 only, conditional)") \
        if "pressure_bar_if_scrubbed_median" in s else None


def _pressure_panel(ax, s, times, truth):
    col, tag = _pressure_column(s)
    ax.fill_between(times, s[f"{col}_q05"].astype(float), s[f"{col}_q95"].astype(float),
                    color=INK, alpha=0.15, lw=0, label=f"5-95 %, {tag}")
    ax.plot(times, s[f"{col}_median"].astype(float), "-o", ms=3, color=INK, label=f"median, {tag}")
    if truth is not None and "pressure_bar" in truth:
        ax.plot(pd.to_datetime(truth["time"].str.rstrip("Z")), truth["pressure_bar"], "x",
                ms=4, color="#777777", label="synthetic truth")
    plain_log_axis(ax)
    ax.set_ylabel("degassing\npressure (bar)", fontsize=9)
    _legend_outside(ax)


def plot_rows_vs_windows(rows_csv, windows_csv, path, truth_csv=None, title="", p_magmatic_prior=0.5):
    """P(M0) and the model-averaged scrubbed fraction: row by row beside by windows."""
    plt = _plt()
    fig = rows_vs_windows_figure(rows_csv, windows_csv, truth_csv, title, p_magmatic_prior)
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def rows_vs_windows_figure(rows_csv, windows_csv, truth_csv=None, title="", p_magmatic_prior=0.5):
    """The rows-vs-windows Figure (not saved, not closed): P(M0), P(M2) when both runs carry
    the released-sulfur hypothesis, and the model-averaged scrubbed fraction."""
    plt = _plt()
    a = pd.read_csv(rows_csv, dtype={"id": str}, keep_default_na=False, na_values=[""])
    b = pd.read_csv(windows_csv, dtype={"id": str, "window": str}, keep_default_na=False, na_values=[""])
    t = pd.to_datetime(a["time"].str.rstrip("Z"))
    has_m2 = all("p_released" in x and x["p_released"].notna().any() for x in (a, b))
    fig, axes = plt.subplots(3 if has_m2 else 2, 1, figsize=(9, 8.5 if has_m2 else 6.5), sharex=True)
    for s, mk, col, lab in ((a, "o", "#8da9c4", "row by row"), (b, "s", INK, "by windows (shared source)")):
        axes[0].errorbar(t, s["p_magmatic"].astype(float), yerr=s["p_magmatic_error"].astype(float).fillna(0),
                         fmt=mk, ms=4, color=col, capsize=2, label=lab)
        if has_m2:
            axes[1].errorbar(t, s["p_released"].astype(float), yerr=s["p_released_error"].astype(float).fillna(0),
                             fmt=mk, ms=4, color=col, capsize=2, label=lab)
        axes[-1].plot(t, s["scrubbed_so2_avg_median"].astype(float), mk + "-", ms=3, color=col, label=lab)
    _shade_mixed(axes, t, b["flags"].astype("string").fillna("").str.contains("mixed_sources").to_numpy())
    if truth_csv:
        tr = pd.read_csv(truth_csv)
        axes[-1].plot(pd.to_datetime(tr["time"].str.rstrip("Z")), tr["scrubbed_so2"], "x", color="#777777",
                      label="synthetic truth")
    axes[0].axhline(p_magmatic_prior, color="#999999", lw=0.8, ls=":",
                    label=f"prior P(M0) = {p_magmatic_prior:g}")
    axes[0].set_ylabel("P(M0) purely\nmagmatic (probability)", fontsize=9)
    if has_m2:
        axes[1].set_ylabel("P(M2) stored sulfur\nreleased (probability)", fontsize=9)
    axes[-1].set_ylabel("scrubbed SO2 (fraction)\nmodel-averaged median", fontsize=9)
    axes[-1].set_xlabel("time (UTC)")
    for ax in axes:
        ax.set_ylim(-0.03, 1.03)
        _legend_outside(ax)
    _window_marks(list(axes), b, t)
    axes[0].set_title((title + "\n" if title else "") + "shaded: window flagged mixed_sources "
                      "(a change of magma inside the window)", fontsize=9, pad=14)
    _footnote(fig)
    fig.tight_layout(rect=(0, 0.025, 1, 1))
    return fig


def _shade_mixed(axes, t, mixed):
    """One shaded span per run of consecutive rows flagged mixed_sources."""
    half = [(t.iloc[min(i + 1, len(t) - 1)] - t.iloc[max(i - 1, 0)]) / 4 for i in range(len(t))]
    i = 0
    while i < len(t):
        if not mixed[i]:
            i += 1
            continue
        j = i
        while j + 1 < len(t) and mixed[j + 1]:
            j += 1
        for ax in axes:
            ax.axvspan(t.iloc[i] - half[i], t.iloc[j] + half[j], color="#f4a261", alpha=0.25, lw=0)
        i = j + 1


def plot_corner(out_dir, row_ids, fig_dir=None, truth_csv=None):
    """Corner plot of the M1 posterior of each named row, from rows/KEY.nc; with truth_csv
    (a synthetic series) the true values are drawn as lines."""
    from ventsource.common.errors import InputError
    from ventsource.workflow.run_folder import row_key
    plt = _plt()
    fig_dir = fig_dir or os.path.join(out_dir, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    truth = pd.read_csv(truth_csv, dtype={"id": str}) if truth_csv else None
    paths = []
    for rid in row_ids:
        nc = os.path.join(out_dir, "rows", f"{row_key(rid)}.nc")
        if not os.path.exists(nc):
            raise InputError(f"--corner: no finished row with id '{rid}' in {out_dir}")
        fig = corner_figure(nc, rid, truth)
        p = os.path.join(fig_dir, f"corner_{row_key(rid)}.png")
        fig.savefig(p, dpi=100)
        plt.close(fig)
        paths.append(p)
    return paths


def corner_figure(nc_path, rid, truth=None):
    """Corner Figure of one row's M1 posterior (not saved, not closed)."""
    import arviz as az
    import corner
    post = az.from_netcdf(nc_path).posterior
    names = list(post.data_vars)
    x = np.column_stack([post[v].values.reshape(-1) for v in names])
    labels = [f"{v}\n({post[v].attrs.get('units', '') or 'fraction'})" for v in names]
    truths = None
    if truth is not None and rid in set(truth["id"]):
        row = truth[truth["id"] == rid].iloc[0]
        truths = [float(row[v]) if v in row.index else None for v in names]
    # smoothing in units of histogram bins: a few hundred draws give ragged contours otherwise
    few = x.shape[0] < 2000
    fig = corner.corner(x, labels=labels, quantiles=[0.05, 0.5, 0.95], color=INK, smooth=2.0 if few else 1.0,
                        smooth1d=1.5 if few else 0.8, bins=20 if few else 30, truths=truths, truth_color="#777777",
                        hist_kwargs={"color": INK}, label_kwargs={"fontsize": 8}, labelpad=0.08)
    head = f"Posterior if scrubbed (model M1, scrubbed fraction free), row {rid}"
    fig.suptitle(head, fontsize=10)
    from matplotlib.lines import Line2D
    lines = [Line2D([], [], color=INK, ls="--", lw=1.0,
                    label="dashed (diagonal panels): 5 %, 50 %, 95 % quantiles"),
             Line2D([], [], color=INK, lw=1.0, label="contours: 2-D density of the posterior draws")]
    if truths is not None:
        lines.append(Line2D([], [], color="#777777", lw=1.2, label="grey lines: synthetic truth"))
    fig.legend(handles=lines, loc="upper right", fontsize=8, frameon=False, bbox_to_anchor=(0.98, 0.86))
    fig.subplots_adjust(left=0.12, bottom=0.16, top=0.90)
    _footnote(fig)
    return fig


def plot_ratio_plane_with_data(spec, series, path, n=2000, seed=0, x_ratio=None, y_ratio=None):
    """Prior-predictive ratio-ratio plane (with and without scrubbing) with the measurements."""
    from ventsource.workflow.prior_predictive import plot_ratio_plane, prior_predictive_table
    names = list(series.ratio_names)
    x_ratio = x_ratio or ("H2S/SO2" if "H2S/SO2" in names else names[-1])
    y_ratio = y_ratio or ("SO2/CO2" if "SO2/CO2" in names else names[0])
    from ventsource.workflow.prior_predictive import overlay_points
    table = prior_predictive_table(spec, n, seed=seed, ratio_names=tuple(dict.fromkeys([x_ratio, y_ratio])))
    return plot_ratio_plane(table, x_ratio, y_ratio, path, data=overlay_points(series, x_ratio, y_ratio),
                            title=spec.name)


def _prior_band(ax, band, conditional):
    """The prior's 5-95 % band, hatched, behind the posterior band: where the two coincide
    the data said little about this parameter."""
    tag = " (if scrubbed)" if conditional else ""
    ax.axhspan(band[0], band[1], facecolor="none", edgecolor="#c8c8c8", hatch="//", lw=0,
               zorder=0, label=f"prior 5-95 %{tag}")
    _legend_outside(ax)


def run_figures(out_dir, series, spec, corner_ids=(), truth_csv=None, title="", n_prior=2000):
    """All figures of a finished run into out_dir/figures; returns their paths."""
    fig_dir = os.path.join(out_dir, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    paths = [plot_time_series(os.path.join(out_dir, "summary.csv"), os.path.join(fig_dir, "series.png"),
                              series=series, truth_csv=truth_csv, title=title, prior_name=spec.name,
                              p_magmatic_prior=prior_p_magmatic(spec),
                              prior_bands=prior_bands(spec))]
    if len(series.ratio_names) >= 2 and n_prior > 0:
        paths.append(plot_ratio_plane_with_data(spec, series, os.path.join(fig_dir, "ratio_plane.png"),
                                                n=n_prior))
    if corner_ids:
        paths += plot_corner(out_dir, corner_ids, fig_dir, truth_csv=truth_csv)
    return paths
