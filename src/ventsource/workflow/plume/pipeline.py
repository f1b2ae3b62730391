"""Raw sensor file -> measurement file: the whole run, streaming window by window."""
import datetime
import os
import platform
import shutil

from ventsource.workflow.series import file_sha256
from ventsource import __version__
from ventsource.common.errors import InputError
from ventsource.workflow.plume.analysis import LagMemory, analyse_window
from ventsource.workflow.plume.reader import add_h2o, inspect_header, read_chunks
from ventsource.workflow.plume.windows import FixedWindows, PlumeWindows, iter_windows
from ventsource.workflow.plume.writer import write_outputs

DEFAULT_RATIOS = ("SO2/CO2", "H2S/SO2", "H2O/CO2", "H2/SO2")
METEO = ("T", "RH", "P")


def _available(layout):
    names = set(layout.columns)
    if "H2O" not in names and all(m in names for m in METEO):
        names.add("H2O")
    return names


def choose_ratios(layout, requested):
    """Requested ratios (checked) or the default ones whose gases the file has."""
    have = _available(layout)
    if not requested:
        chosen = tuple(r for r in DEFAULT_RATIOS if set(r.split("/")) <= have)
        if not chosen:
            raise InputError(f"{layout.path}: no default ratio ({', '.join(DEFAULT_RATIOS)}) can be "
                             f"formed from the columns {', '.join(sorted(layout.columns))}")
        return chosen
    for r in requested:
        parts = r.split("/")
        if len(parts) != 2 or not all(parts) or parts[0] == parts[1]:
            raise InputError(f"--ratios: '{r}' must be GAS/GAS of two different gases, e.g. SO2/CO2")
        for g in parts:
            if g not in have:
                hint = " (or T, RH and P columns to compute it)" if g == "H2O" else ""
                raise InputError(f"{layout.path}: row {layout.comment_lines + 1}, column '{g}': "
                                 f"missing gas column{hint}, needed for {r}")
    return tuple(requested)


def _analyse_all(windows, gases, settings, figure_stage):
    """WindowResult per window; per-window figures into figure_stage when given."""
    if figure_stage:
        from ventsource.workflow.plume.figures import plot_window
        shutil.rmtree(figure_stage, ignore_errors=True)
    results, lag_memory = [], LagMemory()
    for window in windows:
        w = analyse_window(window, gases, settings, keep_data=bool(figure_stage), lag_memory=lag_memory)
        if figure_stage:
            plot_window(w, figure_stage)
            w.aligned = None
            for r in w.results:
                r.fit = None
        results.append(w)
    return results


def _run_record(raw_path, layout, needed, derive_h2o, gases, settings, chunk_rows, assume_utc,
                unit_overrides, hash_input):
    """Every setting and what was read, for the run record JSON."""
    return {
        "program": f"ventsource {__version__} ratios", "python": platform.python_version(),
        "created_utc": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "input": {"path": os.path.abspath(raw_path), "bytes": os.path.getsize(raw_path),
                  "sha256": file_sha256(raw_path) if hash_input else None,
                  "columns_used": {g: layout.columns[g] for g in needed},
                  "unit_conversion": {g: layout.scale[g] for g in needed},
                  "columns_ignored": layout.ignored,
                  "h2o": "from T, RH, P: Buck (1981) e_w1 with enhancement factor" if derive_h2o
                  else "measured column" if "H2O" in gases else "not used"},
        "settings": settings.record(), "chunk_rows": chunk_rows, "assume_utc": assume_utc,
        "units_given": dict(unit_overrides or {}),
    }


def run_ratios(raw_path, out_path, settings, unit_overrides=None, chunk_rows=200_000,
               assume_utc=False, figure_dir=None, window_figures=False, hash_input=True):
    """Read raw_path in chunks, analyse each window, write the outputs; returns a summary dict."""
    layout = inspect_header(raw_path, unit_overrides)
    settings.ratios = choose_ratios(layout, settings.ratios)
    gases = sorted({g for r in settings.ratios for g in r.split("/")} | {settings.tracer})
    if settings.tracer not in _available(layout):
        raise InputError(f"{raw_path}: row {layout.comment_lines + 1}, column '{settings.tracer}': "
                         "missing column of the tracer gas (--tracer)")
    for option, table in (("--noise", settings.noise_ppmv), ("--detection-limit", settings.detection_limit_ppmv),
                          ("--max-reading", settings.max_reading_ppmv), ("--min-range", settings.min_range_ppmv),
                          ("--lag", settings.lag_s)):
        for name in table:
            if name not in gases:
                raise InputError(f"{option}: '{name}' is none of the gases in use ({', '.join(gases)})")
    derive_h2o = "H2O" in gases and "H2O" not in layout.columns
    settings.relative_noise_gases = ("H2O",) if derive_h2o else ()
    needed = [g for g in gases if not (g == "H2O" and derive_h2o)] + (list(METEO) if derive_h2o else [])
    chunks = read_chunks(layout, needed, chunk_rows=chunk_rows, assume_utc=assume_utc)
    if derive_h2o:
        chunks = map(add_h2o, chunks)
    windower = (PlumeWindows(settings.plume_threshold, settings.pad_s, settings.merge_gap_s,
                             settings.max_duration_s) if settings.plume_threshold is not None
                else FixedWindows(settings.window_s))
    stage = os.path.join(figure_dir, "windows.part") if window_figures and figure_dir else None
    try:
        results = _analyse_all(iter_windows(chunks, windower, settings.tracer), gases, settings, stage)
    except BaseException:
        if stage:
            shutil.rmtree(stage, ignore_errors=True)   # no partial set of window figures
        raise
    if not results:
        raise InputError(f"{raw_path}: no data rows under the header")
    record = _run_record(raw_path, layout, needed, derive_h2o, gases, settings, chunk_rows, assume_utc,
                         unit_overrides, hash_input)
    if not any(any(r.value == r.value for r in w.results) for w in results):
        from ventsource.workflow.plume.writer import sidecar_paths, write_csv_atomic, header, row_cells
        write_csv_atomic(sidecar_paths(out_path)[0], header(settings.ratios, gases),
                         [row_cells(w, gases) for w in results])
        raise InputError(f"{raw_path}: none of the {len(results)} windows gave a usable ratio under the "
                         f"rules; reasons per window in {sidecar_paths(out_path)[0]}")
    windows_path, record_path = write_outputs(out_path, settings.ratios, gases, results, record)
    figures = []
    if stage:
        final = os.path.join(figure_dir, "windows")
        shutil.rmtree(final, ignore_errors=True)
        os.replace(stage, final)
        figures.append(final)
    if figure_dir:
        from ventsource.workflow.plume.figures import plot_overview
        figures.append(plot_overview(results, settings.ratios, os.path.join(figure_dir, "ratios_overview.png")))
    return {"windows": results, "windows_path": windows_path, "record_path": record_path,
            "figures": figures, "gases": gases}
