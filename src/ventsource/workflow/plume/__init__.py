"""From raw in-plume sensor concentrations to gas ratios with their errors.

Modules: york (straight lines with errors in both variables), humidity (H2O
from temperature, relative humidity and pressure), units, reader (chunked raw
CSV with checks), windows (fixed or plume-passage windows across chunks),
ratios (one window -> ratios, rules, censoring), writer (measurement file,
sidecar, run record), figures (per-window and overview plots).

Layer: workflow (imports common and anything below workflow).
"""
