"""Log-scale axes with plain decimal tick labels (0.2, 0.5, 1, 2, 300), shared by the
run figures and the prior-predictive ratio plane."""
import numpy as np


def plain_number(value, _pos=None):
    """Tick text in plain decimals (0.2, 0.5, 1, 2, 300), never powers of ten."""
    if not np.isfinite(value) or value <= 0:
        return ""
    if 1e-4 <= value < 1e6:
        return f"{value:.6g}"
    if 1e-9 <= value < 1e-4:  # 0.00001 rather than 1e-05 (ratio planes reach that far)
        return np.format_float_positional(float(f"{value:.6g}"), trim="-")
    return f"{value:.0e}"


def _plain_at(leads):
    """Minor-tick formatter: plain text only where the leading digit is one of leads."""
    def fmt(value, _pos=None):
        if not np.isfinite(value) or value <= 0:
            return ""
        lead = value / 10.0 ** np.floor(np.log10(value) + 1e-9)
        return plain_number(value) if any(abs(lead - d) < 1e-6 for d in leads) else ""
    return fmt


def plain_log_axis(ax, axis="y"):
    """Log scale with plain decimal labels: every digit inside one decade, 2 and 5 over a few
    decades, powers of ten only over many."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter
    target = ax.yaxis if axis == "y" else ax.xaxis
    (ax.set_yscale if axis == "y" else ax.set_xscale)("log")
    lo, hi = (ax.get_ylim() if axis == "y" else ax.get_xlim())
    span = hi / lo if lo > 0 else np.inf
    leads = (2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0) if span < 10 else (2.0, 5.0)
    target.set_major_locator(LogLocator(base=10.0))
    target.set_major_formatter(FuncFormatter(plain_number))
    target.set_minor_locator(LogLocator(base=10.0, subs=leads))
    target.set_minor_formatter(FuncFormatter(_plain_at(leads)) if span < 200 else NullFormatter())
    target.get_offset_text().set_visible(False)
