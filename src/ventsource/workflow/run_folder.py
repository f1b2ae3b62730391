"""A series run's folder: its layout (see ventsource.workflow.series), the lock that
keeps a second run out, the checks before anything is written, --resume's verification
of finished rows and of the earlier run's settings, and atomic writes (temp file +
rename, so a file by its final name is always complete).
"""
import csv
import fcntl
import hashlib
import json
import os

import numpy as np

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError


SUMMARY_NAME = "summary.csv"
RUNNING_NAME = "summary.running.csv"
HAZARD_NAME = "hazard.json"
LOCK_NAME = ".lock"


# run.json entries that change a number; --resume refuses a change in any (label for the message)
RECORDED_SETTINGS = {"data_sha256": "measurement file", "prior_sha256": "prior file", "seed": "--seed",
                     "sigma": "--sigma (default relative 1-sigma)", "options": "inference options",
                     "package_version": "ventsource version", "window": "--window",
                     "window_per_row": "per-row set of the window model (the prior's [window] per_row)"}


def file_sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def row_key(row_id):
    """File-name-safe key of a row identifier (a short hash keeps keys unique)."""
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in row_id)[:60]
    if safe != row_id:
        safe += "-" + hashlib.sha256(row_id.encode()).hexdigest()[:8]
    return safe


def _fmt(v):
    if v is None:
        return ""
    if isinstance(v, (float, np.floating)):
        return "" if not np.isfinite(v) else repr(float(v))
    return str(v)


def _verified_rows(out_dir, ids, prior_sha, cols):
    """Finished rows that pass their checks: {id: row}, and the ids that failed them.

    A row is kept only when rows/KEY.json reads as this row's summary (its id, every
    summary column, this run's prior) and rows/KEY.nc has the sha256 the summary
    recorded; anything else (a truncated or edited file, a summary written under other
    column names) is inverted again."""
    from ventsource.workflow.summary_columns import has_columns
    done, failed = {}, []
    for rid in ids:
        key = row_key(rid)
        js = os.path.join(out_dir, "rows", f"{key}.json")
        nc = os.path.join(out_dir, "rows", f"{key}.nc")
        if not os.path.exists(js):
            continue  # never finished (an .nc alone is a row stopped between its two files)
        try:
            with open(js) as fh:
                row = json.load(fh)
            ok = (isinstance(row, dict) and row.get("id") == rid and row.get("prior_sha256") == prior_sha
                  and has_columns(row, cols) and row.get("nc_sha256") == file_sha256(nc))
        except (OSError, ValueError):
            ok = False
        if ok:
            done[rid] = row
        else:
            failed.append(rid)
    return done, failed


def prior_content_sha256(path):
    """sha256 of the prior's content (its TOML tables, keys sorted): a comment or the
    layout of the file does not change it, a value does. --resume compares this."""
    import tomllib
    with open(path, "rb") as fh:
        data = tomllib.load(fh)
    text = json.dumps(data, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _run_settings(series, prior_path, prior_sha, seed, options):
    from ventsource import __version__
    return {"data": os.path.abspath(series.path), "data_sha256": file_sha256(series.path),
            "prior": os.path.abspath(str(prior_path)), "prior_sha256": prior_sha,
            "seed": int(seed), "sigma": getattr(series, "default_sigma", None), "options": options,
            "package_version": __version__}


def _check_output_folder(out_dir):
    """Refuse a folder that cannot hold a run, before anything is written."""
    if os.path.exists(out_dir) and not os.path.isdir(out_dir):
        raise InputError(f"{out_dir}: exists and is not a folder; choose another --out")
    probe = os.path.abspath(out_dir)
    while not os.path.exists(probe):
        probe = os.path.dirname(probe)
    if not os.path.isdir(probe):
        raise InputError(f"{out_dir}: cannot be made: {probe} is a file, not a folder")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError(f"{out_dir}: cannot write in {probe} (permission denied or read-only)")
    rows = os.path.join(out_dir, "rows")
    if os.path.exists(rows) and not (os.path.isdir(rows) and os.access(rows, os.W_OK | os.X_OK)):
        raise InputError(f"{rows}: not a writable folder")


def _earlier_run(out_dir, settings, resume, window_column=False):
    """The earlier run's run.json (or None); refuses what would mix or lose results."""
    run_path = os.path.join(out_dir, "run.json")
    if not os.path.exists(run_path):
        return None
    try:
        with open(run_path) as fh:
            old = json.load(fh)
        assert isinstance(old, dict)
    except (OSError, ValueError, AssertionError):
        raise InputError(f"{run_path}: unreadable; choose another --out") from None
    rows = os.path.join(out_dir, "rows")
    has_rows = os.path.isdir(rows) and any(f.endswith(".json") for f in os.listdir(rows))
    if not resume:
        if has_rows or old.get("status") == "complete":
            raise InputError(f"{out_dir}: holds an earlier run; use --resume to continue it or "
                             "choose another --out")
        return old  # an earlier start that finished no row: nothing to lose, start again
    now = json.loads(json.dumps(settings, default=str))
    for key, label in RECORDED_SETTINGS.items():
        if not _same_setting(key, _old_setting(old, key, now[key]), now[key], window_column):
            if key == "options":
                diff = sorted(k for k in set(old.get(key) or {}) | set(now[key])
                              if (old.get(key) or {}).get(k) != now[key].get(k))
                label = "inference option " + ", ".join(diff) if diff else label
            raise InputError(f"{out_dir}: --resume with a different {label} than the run there "
                             f"({_short(old.get(key))} there, {_short(now[key])} now); "
                             "use the same settings or choose another --out")
    return old


def _same_setting(key, old_value, now_value, window_column):
    """Settings that give the same numbers compare equal: an option given at its default
    value, and --window 1 (or 'column') where the file's own layout already meant it."""
    if key == "options":
        from ventsource.inference.row.one_measurement import _DEFAULTS
        def plain(opts):
            return {k: v for k, v in (opts or {}).items() if _DEFAULTS.get(k, object()) != v}
        return plain(old_value) == plain(now_value)
    if key == "window":
        def plain(w):
            return ("column" if window_column else "rows") if w is None else w
        return plain(old_value) == plain(now_value)
    return old_value == now_value


def _old_setting(old, key, now):
    """An earlier run's setting; a window run from before [window] tables used the default set."""
    if key == "window_per_row" and key not in old:
        from ventsource.inference.priors.window_table import PER_ROW_DEFAULT
        return now if now in (None, list(PER_ROW_DEFAULT)) else None
    return old.get(key)


def _short(value):
    text = json.dumps(value, default=str)
    return text if len(text) <= 40 else text[:12] + "..."


def _refuse_if_in_use(out_dir):
    """A run holding the folder's lock is named as such, whatever else the folder holds."""
    path = os.path.join(out_dir, LOCK_NAME)
    if os.path.exists(path):
        with _FolderLock(out_dir):
            pass


class _FolderLock:
    """An exclusive flock on OUT/.lock for the life of a run."""

    def __init__(self, out_dir):
        self.path, self.fh = os.path.join(out_dir, LOCK_NAME), None

    def __enter__(self):
        try:
            os.makedirs(os.path.dirname(self.path), exist_ok=True)
            self.fh = open(self.path, "a")
        except OSError as exc:
            raise InputError(f"{os.path.dirname(self.path)}: cannot write ({exc.strerror or exc})") from None
        try:
            fcntl.flock(self.fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self.fh.close()
            raise InputError(f"{os.path.dirname(self.path)}: another run is using this folder; "
                             "wait for it to end or choose another --out") from None
        return self

    def __exit__(self, *exc):
        self.fh.close()  # closing releases the lock
        return False


def _mark_stopped(out_dir, settings, message):
    """Best effort: run.json says the run stopped and why (a full disk may refuse even this)."""
    from ventsource import __version__
    run_path = os.path.join(out_dir, "run.json")
    try:
        with open(run_path) as fh:
            if json.load(fh).get("status") != "running":
                return  # a finished run stays "complete"
        _write_json(run_path, dict(settings, status="stopped", error=message,
                                   package_version=__version__, caution=CAUTION))
    except (OSError, ValueError):
        pass


def _atomic(path, write):
    """write(PART) then rename PART to path; a failed write leaves no PART file behind."""
    part = path + ".part"
    failure = None
    try:
        _quiet_unless_ok(write, part)
        os.replace(part, path)
    except BaseException as exc:
        _remove_quietly(part)
        if not isinstance(exc, OSError):
            raise
        failure = OSError(exc.errno or _errno_in(exc), _one_line_reason(exc), path)
    if failure is not None:  # raised here, the failed write's frames are already let go
        _release_quietly()  # and its HDF5 objects are freed now, not at exit (a crash there)
        _remove_quietly(part)
        raise failure


def _remove_quietly(path):
    try:
        os.remove(path)
    except OSError:
        pass


def _quiet_unless_ok(write, part):
    """Run write(part) holding back what it prints on stderr: a full disk makes HDF5 print a
    traceback per object it frees; a write that succeeds passes its messages on."""
    import io
    import sys
    held, real = io.StringIO(), sys.stderr
    sys.stderr = held
    try:
        write(part)
    finally:
        sys.stderr = real
    if held.getvalue():
        real.write(held.getvalue())


def _release_quietly():
    """After a failed write the run stops: the HDF5 objects it left behind complain as they
    are freed (dozens of 'Exception ignored' tracebacks); the one-line error says it all."""
    import gc
    import sys
    sys.unraisablehook = lambda unraisable: None
    gc.collect()


def _errno_in(exc):
    import re
    m = re.search(r"errno = (\d+)", str(exc))
    return int(m.group(1)) if m else None


def _one_line_reason(exc):
    """'No space left on device' rather than an HDF5 message spread over several lines."""
    code = exc.errno or _errno_in(exc)
    if code:
        return os.strerror(code)
    return (exc.strerror or str(exc)).splitlines()[0] if (exc.strerror or str(exc)) else "write failed"


def _dump_json(path, doc, indent=2):
    with open(path, "w") as fh:
        json.dump(doc, fh, indent=indent, default=str)


def _write_json(path, doc):
    _atomic(path, lambda part: _dump_json(part, doc))


def write_text_json(path, doc):
    """A JSON file for people (hazard.json): UTF-8 with '±' as itself, written atomically."""
    def write(part):
        with open(part, "w", encoding="utf-8") as fh:
            json.dump(doc, fh, indent=2, default=str, ensure_ascii=False)
    _atomic(path, write)


def _rewrite(path, cols, rows):
    def write(part):
        with open(part, "w", newline="") as fh:
            out = csv.writer(fh, lineterminator="\n")  # quotes ids with commas, quotes or spaces at ends
            out.writerow(cols)
            for row in rows:
                out.writerow([_fmt(row.get(c)) for c in cols])
    _atomic(path, write)
