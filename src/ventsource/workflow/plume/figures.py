"""Figures of the raw-to-ratio step: one per window (scatter, fitted line, 1-sigma band)
and one overview of every ratio against time. Each carries the caution."""
import os

import numpy as np

from ventsource.common.caution import CAUTION


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _save(fig, path):
    fig.text(0.01, 0.005, "Caution: " + CAUTION, fontsize=6, color="#333333", ha="left", va="bottom",
             wrap=True)
    part = path + ".part"
    fig.savefig(part, dpi=110, format="png")
    os.replace(part, path)


def line_band(fit, x):
    """Line a + b x and its 1-sigma band from the slope and intercept errors
    (cov(a, b) = -x_centre sigma_b^2, York et al. 2004)."""
    a, b = float(fit.intercept[0]), float(fit.slope[0])
    sb, sa, xc = float(fit.slope_sigma[0]), float(fit.intercept_sigma[0]), float(fit.x_centre[0])
    var0 = max(sa ** 2 - xc ** 2 * sb ** 2, 0.0)
    return a + b * x, np.sqrt(var0 + (x - xc) ** 2 * sb ** 2)


def plot_window(w, figure_dir):
    """Scatter of each ratio's gases in one window with the fitted line; returns the path."""
    plt = _plt()
    os.makedirs(figure_dir, exist_ok=True)
    n = len(w.results)
    fig, axes = plt.subplots(1, n, figsize=(3.6 * n, 3.8), squeeze=False)
    for ax, r in zip(axes[0], w.results):
        top, bottom = r.ratio.split("/")
        x, y = w.aligned[bottom], w.aligned[top]
        ax.plot(x, y, ".", ms=2, color="#4a6fa5", alpha=0.6)
        if r.fit is not None and np.isfinite(r.fit.slope[0]):
            xs = np.linspace(x.min(), x.max(), 50)
            line, band = line_band(r.fit, xs)
            ax.plot(xs, line, color="#b03a2e", lw=1.2)
            ax.fill_between(xs, line - band, line + band, color="#b03a2e", alpha=0.25)
        value = (f"{r.censor}{r.value:.3g}" + (f" +- {100 * r.relative_sigma:.2g} %" if not r.censor else "")
                 if np.isfinite(r.value) else "dropped")
        ax.set_title(f"{r.ratio} = {value}\nR2 {r.r_squared:.2f}, n {r.n_points}", fontsize=8)
        ax.set_xlabel(f"{bottom} (ppmv)", fontsize=8)
        ax.set_ylabel(f"{top} (ppmv)", fontsize=8)
        if r.flags:
            ax.text(0.02, 0.98, "\n".join(r.flags), transform=ax.transAxes, va="top", fontsize=6,
                    color="#7d3c98")
    fig.suptitle(f"window {w.window_id}", fontsize=9)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    path = os.path.join(figure_dir, f"window_{w.window_id}.png")
    _save(fig, path)
    plt.close(fig)
    return path


def plot_overview(windows, ratios, path):
    """Every ratio against time: values with 1-sigma bars, censored values as open triangles."""
    plt = _plt()
    os.makedirs(os.path.dirname(path) or ".", exist_ok=True)
    fig, axes = plt.subplots(len(ratios), 1, figsize=(8, 2.2 * len(ratios) + 0.6), sharex=True,
                             squeeze=False)
    times = np.array([np.datetime64((w.start_ns + w.end_ns) // 2, "ns") for w in windows])
    for k, (ax, ratio) in enumerate(zip(axes[:, 0], ratios)):
        v = np.array([w.results[k].value for w in windows])
        sig = np.array([w.results[k].relative_sigma for w in windows])
        cen = np.array([w.results[k].censor for w in windows])
        exact = np.isfinite(v) & (cen == "")
        ax.errorbar(times[exact], v[exact], yerr=(v * sig)[exact], fmt="o", ms=3, color="#1f4e79",
                    ecolor="#7f9cbf", lw=0.8)
        for mark, sym in (("<", "v"), (">", "^")):
            m = cen == mark
            if m.any():
                ax.plot(times[m], v[m], sym, mfc="none", color="#b03a2e", ms=5,
                        label=f"'{mark}' censored")
        if (cen != "").any():
            ax.legend(fontsize=7, loc="best")
        ax.set_ylabel(ratio)
        if exact.any() and v[exact].max() > 3 * v[exact].min():
            ax.set_yscale("log")
    axes[-1, 0].set_xlabel("time (UTC)")
    fig.suptitle("Gas ratios per window (slope through each window)", fontsize=10)
    fig.autofmt_xdate()
    fig.tight_layout(rect=(0, 0.04, 1, 1))
    _save(fig, path)
    plt.close(fig)
    return path
