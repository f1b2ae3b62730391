"""Every setting of a raw-to-ratio run, with the defaults a user sees in --help."""
from dataclasses import dataclass, field, asdict


@dataclass
class RatioSettings:
    ratios: tuple = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
    tracer: str = "SO2"                  # gas that marks the plume (lag reference, background)
    window_s: float = 1800.0             # fixed windows (None when plume_threshold is set)
    plume_threshold: float = None        # ppmv of the tracer marking a plume passage
    pad_s: float = 30.0
    merge_gap_s: float = 10.0
    max_duration_s: float = 3600.0
    method: str = "york"                 # "york" or "ols"
    noise_ppmv: dict = field(default_factory=dict)        # gas -> 1-sigma; else from background
    detection_limit_ppmv: dict = field(default_factory=dict)  # gas -> DL; else 3 x noise
    detection_sigmas: float = 3.0
    max_reading_ppmv: dict = field(default_factory=dict)  # gas -> instrument maximum
    h2s_so2_cross_sensitivity: float = 0.0  # ppmv H2S signal per ppmv SO2
    lag_s: dict = field(default_factory=dict)  # gas -> fixed lag (s); else searched
    max_lag_s: float = 30.0
    min_lag_correlation: float = 0.8
    min_points: int = 30
    min_range_ppmv: dict = field(default_factory=dict)  # gas -> least x-gas range
    min_range_noise: float = 10.0        # least x-gas range in units of its noise
    min_r2: float = 0.6
    max_relative_sigma: float = 1.0
    keep_flagged: bool = False
    scale_by_mswd: bool = True
    max_gap_s: float = 10.0
    background_quantile: float = 0.5     # background rows: lower half of the smoothed tracer
    relative_noise_gases: tuple = ()     # set by the pipeline: ("H2O",) when H2O comes from RH, T, P

    def record(self):
        return asdict(self)
