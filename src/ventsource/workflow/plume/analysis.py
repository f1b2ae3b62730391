"""One window of aligned concentrations -> ratios with errors, quality and flags.

The ratio Y/X is the slope of Y against X through the window (the intercept
absorbs a constant background). Rules (settings.RatioSettings):
* a saturated gas (a reading at or above its instrument maximum) or a data gap
  longer than max_gap_s drops the window's ratios with that gas / all ratios;
* fewer than min_points points, or an X range (2nd to 98th percentile) below
  max(min_range_ppmv[X], min_range_noise x noise of X), drops the ratio;
* Y never rising above its detection limit while X is well measured gives the
  censored value '<DL_Y / range_X'; the reverse gives '>range_Y / DL_X';
* R^2 < min_r2 or relative 1-sigma > max_relative_sigma flags the ratio,
  which is then dropped unless keep_flagged; a non-positive slope is dropped.
"""
from dataclasses import dataclass

import numpy as np

from ventsource.workflow.plume.york import ols_fit, york_fit

NS = 1_000_000_000


@dataclass
class RatioResult:
    ratio: str
    value: float          # NaN when dropped
    relative_sigma: float
    censor: str           # "", "<" or ">"
    n_points: int
    r_squared: float
    x_range: float
    y_range: float
    flags: list
    fit: object = None    # LineFit of one window, for figures


def sampling_interval_s(times_ns):
    return float(np.median(np.diff(times_ns))) / NS if times_ns.size > 1 else 1.0


def find_lag_samples(reference, signal, max_lag, min_correlation):
    """Shift L (samples) maximising the correlation of signal[i + L] with reference[i],
    |L| <= max_lag; 0 when no shift reaches min_correlation. Returns (L, r)."""
    n = reference.size
    if max_lag < 1 or n < 4 * max_lag + 3:
        return 0, np.nan
    ref = reference[max_lag:n - max_lag]
    ref = ref - ref.mean()
    segs = np.lib.stride_tricks.sliding_window_view(signal, ref.size)   # (2 L + 1, m), no copy
    seg_mean = segs.mean(axis=1)
    cov = segs @ ref
    seg_ss = np.einsum("ij,ij->i", segs, segs) - ref.size * seg_mean ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        r = cov / np.sqrt(np.maximum(seg_ss, 0) * (ref @ ref))
    r = np.where(np.isfinite(r), r, -np.inf)
    best = int(np.argmax(r))
    lag, best_r = best - max_lag, float(r[best])
    return (lag, best_r) if best_r >= min_correlation else (0, best_r)


def align(values, lags):
    """values[g][i + lags[g]] on the common index range."""
    n = next(iter(values.values())).size
    lo = max(0, -min(lags.values()))
    hi = n - max(0, max(lags.values()))
    return {g: v[lo + lags[g]:hi + lags[g]] for g, v in values.items()}, lo, hi


def noise_sigma(values, background):
    """1-sigma white noise per gas from point-to-point differences of background rows:
    1.4826 MAD(diff) / sqrt(2) (robust to a slowly drifting background; common practice,
    no source), floored at the quantisation noise step / sqrt(12)."""
    names = list(values)
    stack = np.array([values[g] for g in names])
    use = stack[:, background] if background.sum() >= 10 else stack
    d = np.diff(use, axis=1)
    if d.shape[1]:
        mad = 1.4826 * np.median(np.abs(d - np.median(d, axis=1, keepdims=True)), axis=1) / np.sqrt(2)
    else:
        mad = np.zeros(len(names))
    steps = np.abs(np.diff(stack, axis=1))
    steps = np.where(steps > 0, steps, np.inf).min(axis=1) if steps.shape[1] else np.full(len(names), np.inf)
    floor = np.where(np.isfinite(steps), steps / np.sqrt(12), 1e-9)
    return {g: float(max(m, f)) for g, m, f in zip(names, mad, floor)}


@dataclass
class WindowResult:
    window_id: str
    start_ns: int
    end_ns: int
    first_line: int
    last_line: int
    lags_s: dict
    noise_ppmv: dict
    detection_limit_ppmv: dict
    flags: list
    results: list          # RatioResult per requested ratio
    aligned: dict = None   # concentrations used (for figures)


def _window_flags(t, values, s):
    flags = []
    if t.size > 1:
        gap = float(np.diff(t).max()) / NS
        if gap > s.max_gap_s:
            flags.append(f"gap of {gap:g} s > {s.max_gap_s:g} s")
    saturated = {g for g, top in s.max_reading_ppmv.items() if g in values and (values[g] >= top).any()}
    return flags, saturated


def _lags(values, s, dt):
    lags, found = {s.tracer: 0}, {}
    for g, v in values.items():
        if g == s.tracer:
            continue
        if g in s.lag_s:
            lags[g] = int(round(s.lag_s[g] / dt))
        else:
            lags[g], _ = find_lag_samples(values[s.tracer], v, int(s.max_lag_s / dt),
                                          s.min_lag_correlation)
    return lags


def analyse_window(window, gases, settings, keep_data=False):
    """Ratios of one window (a reader.Chunk) -> WindowResult."""
    s = settings
    t = window.times_ns
    values = {g: window.values[g] for g in gases}
    flags, saturated = _window_flags(t, values, s)
    dt = sampling_interval_s(t)
    lags = _lags(values, s, dt)
    aligned, lo, hi = align(values, lags)
    if "H2S" in aligned and "SO2" in aligned and s.h2s_so2_cross_sensitivity:
        aligned["H2S"] = aligned["H2S"] - s.h2s_so2_cross_sensitivity * aligned["SO2"]
    tracer = aligned[s.tracer]
    if hi - lo < 3:
        background = np.zeros(tracer.size, dtype=bool)
    elif s.plume_threshold is not None:
        background = np.convolve(tracer, np.ones(11) / 11, "same") <= s.plume_threshold
    else:   # select on the smoothed tracer, so the tracer's own noise is not truncated
        smooth = np.convolve(tracer, np.ones(11) / 11, "same")
        background = smooth <= np.quantile(smooth, s.background_quantile)
    noise = noise_sigma(aligned, background) if hi - lo >= 3 else {g: np.nan for g in gases}
    noise.update({g: v for g, v in s.noise_ppmv.items() if g in noise})
    dl = {g: s.detection_limit_ppmv.get(g, s.detection_sigmas * noise[g]) for g in gases}
    results = ratio_results(aligned, noise, dl, saturated, flags, s)
    if not keep_data:
        for r in results:
            r.fit = None     # keeps a year of window results small
    wid = np.datetime64(int(t[0]), "ns").astype("datetime64[s]").astype(str).replace("-", "").replace(":", "")
    return WindowResult(f"W{wid}Z", int(t[0]), int(t[-1]), int(window.lines[0]), int(window.lines[-1]),
                        {g: lags[g] * dt for g in gases}, noise, dl, flags, results,
                        aligned if keep_data else None)


def robust_ranges(aligned):
    """Range of each gas from its 2nd to its 98th percentile (robust to single spikes)."""
    names = list(aligned)
    stack = np.array([aligned[g] for g in names])
    if stack.shape[1] < 2:
        return {g: 0.0 for g in names}
    lo, hi = np.percentile(stack, [2, 98], axis=1)
    return {g: float(h - l) for g, l, h in zip(names, lo, hi)}


def ratio_results(aligned, noise, dl, saturated, window_flags, s):
    pairs = [r.split("/") for r in s.ratios]
    n = next(iter(aligned.values())).size
    x = np.array([aligned[b] for _, b in pairs]).reshape(len(pairs), n)
    y = np.array([aligned[a] for a, _ in pairs]).reshape(len(pairs), n)
    if s.method == "york":
        sx = np.array([[noise[b]] for _, b in pairs])
        sy = np.array([[noise[a]] for a, _ in pairs])
        fit = york_fit(x, y, sx, sy, tol=1e-10)
    else:
        fit = ols_fit(x, y)
    ranges = robust_ranges(aligned)
    out = []
    for k, (ratio, (top, bottom)) in enumerate(zip(s.ratios, pairs)):
        one = type(fit)(*(np.asarray(f)[k:k + 1] for f in vars(fit).values()))
        out.append(_judge(ratio, top, bottom, one, ranges, noise, dl, saturated, window_flags, n, s))
    return out


def _least_range(gas, noise, s):
    return max(s.min_range_ppmv.get(gas, 0.0), s.min_range_noise * noise[gas])


def _judge(ratio, top, bottom, fit, ranges, noise, dl, saturated, window_flags, n, s):
    """Apply the rules of the module docstring to one fitted ratio."""
    r2 = float(fit.r_squared[0])
    res = RatioResult(ratio, np.nan, np.nan, "", int(fit.n_points[0]), r2, ranges[bottom],
                      ranges[top], list(window_flags), fit)
    bad = [f"{g} saturated" for g in (top, bottom) if g in saturated]
    if n < s.min_points:
        bad.append(f"{n} points < {s.min_points}")
    res.flags += bad
    if res.flags:
        return res
    x_ok = ranges[bottom] >= _least_range(bottom, noise, s)
    y_ok = ranges[top] >= _least_range(top, noise, s)
    if x_ok and ranges[top] < dl[top]:
        res.value, res.censor = dl[top] / ranges[bottom], "<"
        res.flags.append(f"{top} below detection limit {dl[top]:.3g} ppmv")
        return res
    if not x_ok:
        if y_ok and ranges[bottom] < dl[bottom]:
            res.value, res.censor = ranges[top] / dl[bottom], ">"
            res.flags.append(f"{bottom} below detection limit {dl[bottom]:.3g} ppmv")
        else:
            res.flags.append(f"{bottom} range {ranges[bottom]:.3g} ppmv < "
                             f"{_least_range(bottom, noise, s):.3g}")
        return res
    slope, sigma = float(fit.slope[0]), float(fit.slope_sigma[0])
    if s.method == "york" and s.scale_by_mswd and fit.mswd[0] > 1:
        sigma *= float(np.sqrt(fit.mswd[0]))   # scatter beyond the stated noise widens the error
    if not (np.isfinite(slope) and np.isfinite(sigma)) or slope <= 0:
        res.flags.append(f"slope {slope:.3g} not positive" if np.isfinite(slope) else "fit failed")
        return res
    relative = sigma / slope
    soft = []
    if r2 < s.min_r2:
        soft.append(f"R2 {r2:.2f} < {s.min_r2:g}")
    if relative > s.max_relative_sigma:
        soft.append(f"relative sigma {relative:.2f} > {s.max_relative_sigma:g}")
    res.flags += soft
    if soft and not s.keep_flagged or relative > 5:
        return res
    res.value, res.relative_sigma = slope, relative
    return res
