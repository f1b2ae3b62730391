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
LAG_SWITCH_MARGIN = 0.01  # least gain in r to leave the usual lag (common practice, no source)
MIN_LAG_PROMINENCE = 0.2   # least drop of the correlation away from its peak (common practice, no source)


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


def lag_correlations(reference, signals, max_lag):
    """Pearson r of signal[i + L] with reference[i] over their overlap, L = -max_lag..max_lag,
    for each row of signals (G, n) -> (G, 2 max_lag + 1); None when the window is too
    short for the bound."""
    n = reference.size
    if max_lag < 1 or n < 4 * max_lag + 3:
        return None
    ref = reference - reference.mean()
    sig = signals - signals.mean(axis=1, keepdims=True)
    pad = np.zeros((sig.shape[0], max_lag))
    padded = np.concatenate([pad, sig, pad], axis=1)
    segs = np.lib.stride_tricks.sliding_window_view(padded, n, axis=1)  # [g, k]: shift k - max_lag
    cross = segs @ ref            # sums over the overlap of each shift (zeros outside it)
    lags = np.arange(-max_lag, max_lag + 1)
    m = n - np.abs(lags)
    zero = np.zeros((1,))
    c_ref, c_ref2 = np.concatenate([zero, np.cumsum(ref)]), np.concatenate([zero, np.cumsum(ref * ref)])
    zeros = np.zeros((sig.shape[0], 1))
    c_sig = np.concatenate([zeros, np.cumsum(sig, axis=1)], axis=1)
    c_sig2 = np.concatenate([zeros, np.cumsum(sig * sig, axis=1)], axis=1)
    r_lo, r_hi = np.maximum(0, -lags), n - np.maximum(0, lags)       # ref indices of the overlap
    s_lo, s_hi = r_lo + lags, r_hi + lags                            # signal indices
    s_r, s_rr = c_ref[r_hi] - c_ref[r_lo], c_ref2[r_hi] - c_ref2[r_lo]
    s_s, s_ss = c_sig[:, s_hi] - c_sig[:, s_lo], c_sig2[:, s_hi] - c_sig2[:, s_lo]
    with np.errstate(invalid="ignore", divide="ignore"):
        return (cross - s_r * s_s / m) / np.sqrt(np.maximum(s_rr - s_r ** 2 / m, 0)
                                                 * np.maximum(s_ss - s_s ** 2 / m, 0))


def best_lag(curve, max_lag, min_correlation):
    """(L, r) at the peak of one correlation curve; L = 0 when r < min_correlation, and
    r = NaN when the curve is flat (drops by less than MIN_LAG_PROMINENCE)."""
    if curve is None:
        return 0, np.nan
    finite = np.isfinite(curve)
    if not finite.any():
        return 0, np.nan
    r = np.where(finite, curve, -np.inf)
    best = int(np.argmax(r))
    lag, best_r = best - max_lag, float(r[best])
    if best_r - r[finite].min() < MIN_LAG_PROMINENCE:
        best_r = np.nan      # a flat curve (a trend, no plume peak) locates no lag
    return (lag, best_r) if best_r >= min_correlation else (0, best_r)


def find_lag_samples(reference, signal, max_lag, min_correlation):
    """Shift L (samples) maximising the correlation of signal[i + L] with reference[i],
    |L| <= max_lag (see best_lag). Returns (L, r)."""
    curves = lag_correlations(reference, np.asarray(signal, dtype=float)[None, :], max_lag)
    return best_lag(None if curves is None else curves[0], max_lag, min_correlation)


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
    lags_kept: set         # gases whose lag came from earlier windows (weak own search)
    aligned: dict = None   # concentrations used (for figures)


def _window_flags(t, values, s):
    flags = []
    if t.size > 1:
        gap = float(np.diff(t).max()) / NS
        if gap > s.max_gap_s:
            flags.append(f"gap of {gap:g} s > {s.max_gap_s:g} s")
    saturated = {g for g, top in s.max_reading_ppmv.items() if g in values and (values[g] >= top).any()}
    return flags, saturated


class LagMemory:
    """Lags accepted in earlier windows, per gas. A sensor's lag is a property of the
    instrument: a window moves away from the median of the last `keep` accepted lags
    only when its own correlation there is higher by LAG_SWITCH_MARGIN; a window whose
    own search is weak (peak below min_lag_correlation, a flat curve, or a peak on the
    search bound) keeps that median (0 before any). Depends only on the window order."""

    def __init__(self, keep=25):
        self.keep, self.accepted = keep, {}

    def choose(self, gas, curve, max_lag, min_correlation):
        """(lag, True when the window's own search gave it) from the window's curve."""
        history = self.accepted.setdefault(gas, [])
        usual = int(np.median(history)) if history else 0
        found, r = best_lag(curve, max_lag, min_correlation)
        if not (np.isfinite(r) and r >= min_correlation and abs(found) < max_lag):
            return usual, False
        history.append(found)
        del history[:-self.keep]
        if len(history) > 1 and found != usual and abs(usual) <= max_lag:
            if curve[found + max_lag] - curve[usual + max_lag] < LAG_SWITCH_MARGIN:
                return usual, True
        return found, True


def _lags(values, s, dt, memory):
    lags, searched = {s.tracer: 0}, {}
    max_lag = int(s.max_lag_s / dt)
    search = [g for g in values if g != s.tracer and g not in s.lag_s] if max_lag >= 1 else []
    for g in values:
        if g != s.tracer and g not in search:
            lags[g] = int(round(s.lag_s.get(g, 0.0) / dt))
    if search:
        curves = lag_correlations(values[s.tracer], np.array([values[g] for g in search]), max_lag)
        for k, g in enumerate(search):
            lags[g], searched[g] = memory.choose(g, None if curves is None else curves[k], max_lag,
                                                 s.min_lag_correlation)
    return lags, searched


def analyse_window(window, gases, settings, keep_data=False, lag_memory=None):
    """Ratios of one window (a reader.Chunk) -> WindowResult. Pass one LagMemory for
    all windows of a record, in time order."""
    s = settings
    t = window.times_ns
    values = {g: window.values[g] for g in gases}
    flags, saturated = _window_flags(t, values, s)
    dt = sampling_interval_s(t)
    lags, searched = _lags(values, s, dt, lag_memory if lag_memory is not None else LagMemory())
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
    sigmas = point_sigmas(aligned, noise, background, s) if hi - lo >= 3 else noise
    results = ratio_results(aligned, noise, sigmas, dl, saturated, flags, s)
    if not keep_data:
        for r in results:
            r.fit = None     # keeps a year of window results small
    wid = np.datetime64(int(t[0]), "ns").astype("datetime64[s]").astype(str).replace("-", "").replace(":", "")
    return WindowResult(f"W{wid}Z", int(t[0]), int(t[-1]), int(window.lines[0]), int(window.lines[-1]),
                        {g: lags[g] * dt for g in gases}, noise, dl, flags, results,
                        {g for g, own in searched.items() if not own},
                        aligned if keep_data else None)


def robust_ranges(aligned):
    """Range of each gas from its 2nd to its 98th percentile (robust to single spikes)."""
    names = list(aligned)
    stack = np.array([aligned[g] for g in names])
    if stack.shape[1] < 2:
        return {g: 0.0 for g in names}
    lo, hi = np.percentile(stack, [2, 98], axis=1)
    return {g: float(h - l) for g, l, h in zip(names, lo, hi)}


def point_sigmas(aligned, noise, background, settings):
    """1-sigma per gas: the background noise, or for gases with a relative error model
    (H2O derived from RH and T: RH and e_s(T) errors scale with the level) the
    background's relative noise times each point's level."""
    out = dict(noise)
    for g in settings.relative_noise_gases:
        if g in aligned and g not in settings.noise_ppmv:
            base = aligned[g][background] if background.sum() >= 10 else aligned[g]
            level = float(np.median(base)) if base.size else np.nan
            if np.isfinite(level) and level > 0:
                out[g] = noise[g] / level * np.abs(aligned[g])
    return out


def ratio_results(aligned, noise, sigmas, dl, saturated, window_flags, s):
    n = next(iter(aligned.values())).size
    ranges = robust_ranges(aligned)
    pairs = [r.split("/") for r in s.ratios]
    fits = [None] * len(pairs)
    if s.method == "york":
        batch = [k for k, (a, b) in enumerate(pairs) if np.ndim(sigmas[a]) == 0 and np.ndim(sigmas[b]) == 0]
        if batch:   # one sigma per gas and window: one vectorised call for these ratios
            x = np.array([aligned[pairs[k][1]] for k in batch])
            y = np.array([aligned[pairs[k][0]] for k in batch])
            sx = np.array([[sigmas[pairs[k][1]]] for k in batch])
            sy = np.array([[sigmas[pairs[k][0]]] for k in batch])
            fit = york_fit(x, y, sx, sy, tol=1e-10)
            for j, k in enumerate(batch):
                fits[k] = type(fit)(*(np.asarray(f)[j:j + 1] for f in vars(fit).values()))
        for k, (a, b) in enumerate(pairs):
            if fits[k] is None:
                fits[k] = york_fit(aligned[b], aligned[a], _sigma_arg(sigmas[b]), _sigma_arg(sigmas[a]),
                                   tol=1e-10)
    else:
        fits = [ols_fit(aligned[b], aligned[a]) for a, b in pairs]
    return [_judge(ratio, a, b, fit, ranges, noise, dl, saturated, window_flags, n, s)
            for ratio, (a, b), fit in zip(s.ratios, pairs, fits)]


def _sigma_arg(sigma):
    return sigma if np.ndim(sigma) == 0 else np.asarray(sigma)[None, :]


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
