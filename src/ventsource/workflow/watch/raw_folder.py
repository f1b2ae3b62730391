"""Raw sensor files dropped into a folder -> ratio rows appended to OUT/ratios-from-raw.csv.

`ventsource watch FOLDER` (FOLDER a directory): each raw in-plume file (the format
`ventsource ratios` reads) goes through the raw-data step of `ventsource ratios`
(workflow/plume/pipeline.run_ratios, with the settings of `--raw-options`), and its
ratio rows are appended, in time order, to the measurement file that the watcher then
follows like any growing measurement file.

When a file is complete: its size and modification time are the same at two looks in a
row (the looks are recorded in the watch state, so with `--once` the run after the one
that first saw a file takes it). Names starting with '.' or ending in .part, .tmp, .partial
are never taken (a writer may write under such a name and rename when done).

Each file is taken once: watch.json lists every file decided (name, sha256, rows, or the
reason it was skipped); a file with the content of one already taken is skipped as a copy.
The append is recorded before it is made (offset and text), and finished on restart if it
was cut short, so a stop at any moment neither loses nor repeats rows.
"""
from __future__ import annotations

import copy
import csv
import io
import os
from dataclasses import dataclass, field

from ventsource.common.errors import InputError

MEASUREMENT_NAME = "ratios-from-raw.csv"
RAW_DIR = "raw"      # OUT/raw/NAME/: the ratios step's measurement file, window sidecar, run record
IGNORED_SUFFIXES = (".part", ".tmp", ".partial")


@dataclass
class RawOptions:
    """The options of the raw-data step: as given (recorded in the watch settings) and parsed by
    the `ventsource ratios` parser (cli/ratios_command.parse_ratio_options)."""
    text: str
    settings: object          # plume.settings.RatioSettings; copied for each file (run_ratios fills it in)
    run_kwargs: dict = field(default_factory=dict)


class RawFolder:
    """The raw-file step of one watch: looks at the folder, takes complete files."""

    def __init__(self, folder, out_dir, raw_options, log):
        self.folder, self.out_dir, self.raw_options, self.log = str(folder), str(out_dir), raw_options, log
        self.measurement_path = os.path.join(self.out_dir, MEASUREMENT_NAME)

    def step(self, state, save):
        """One look: finish a cut append, take the complete files; returns how many were decided."""
        self._skipped = state["skipped"]
        raw = state.setdefault("raw", {"files": [], "seen": {}, "header": None, "pending": None})
        if raw.get("pending"):
            self._finish_append(raw)
            save()
        decided = {f["name"] for f in raw["files"]}
        seen_now, ready = {}, []
        try:
            names = sorted(os.listdir(self.folder))
        except OSError as exc:   # the folder gone or unreadable for a moment: the next look tries again
            names, logged = [], getattr(self, "_list_failed", False)
            self._list_failed = True
            if not logged:   # once per outage, not once per poll
                self.log(f"raw folder {self.folder}: cannot be listed ({exc}); looking again")
        else:
            self._list_failed = False
        for name in names:
            path = os.path.join(self.folder, name)
            if name in decided or name.startswith(".") or name.lower().endswith(IGNORED_SUFFIXES) \
                    or not os.path.isfile(path):
                continue
            try:
                st = os.stat(path)
            except FileNotFoundError:   # removed since the listing
                continue
            seen_now[name] = [st.st_size, st.st_mtime_ns]
            if st.st_size > 0 and raw["seen"].get(name) == seen_now[name]:
                ready.append(name)
        rows = []
        for name in ready:
            rows += self._take(raw, name)
            del seen_now[name]
        changed = bool(ready) or raw["seen"] != seen_now
        raw["seen"] = seen_now
        if rows:
            self._append(raw, rows, save)
        if changed:
            save()
        return len(ready)

    def _take(self, raw, name):
        """Ratio rows of one raw file ([(time, cells by column)]), or [] when skipped (logged)."""
        from ventsource.workflow.plume.pipeline import run_ratios
        from ventsource.workflow.series import file_sha256
        path = os.path.join(self.folder, name)
        try:
            sha = file_sha256(path)
        except OSError as exc:
            entry = {"name": name, "sha256": None}
            raw["files"].append(entry)
            return self._skip(entry, f"{path}: cannot be read ({exc})")
        twin = next((f["name"] for f in raw["files"] if f.get("sha256") == sha), None)
        entry = {"name": name, "sha256": sha}
        raw["files"].append(entry)
        if twin is not None:
            return self._skip(entry, f"same content as {twin}, already read")
        work = os.path.join(self.out_dir, RAW_DIR, name)
        os.makedirs(work, exist_ok=True)
        settings = copy.deepcopy(self.raw_options.settings)
        try:
            run_ratios(path, os.path.join(work, "ratios.csv"), settings, hash_input=False,
                       **self.raw_options.run_kwargs)
            with open(os.path.join(work, "ratios.csv"), encoding="utf-8", newline="") as fh:
                table = list(csv.DictReader(fh))
        except InputError as exc:
            return self._skip(entry, str(exc))
        except (ValueError, OSError, UnicodeError) as exc:   # anything the reader did not word itself
            return self._skip(entry, f"{path}: cannot be read ({type(exc).__name__}: {exc})")
        if raw["header"] is None and table:
            with open(os.path.join(work, "ratios.csv"), encoding="utf-8", newline="") as fh:
                raw["header"] = next(csv.reader(fh))
        entry["rows"] = len(table)
        self.log(f"raw file {name}: {len(table)} ratio row(s) taken")
        return [(r["time"], r) for r in table]

    def _skip(self, entry, reason):
        entry["skipped"] = reason
        self._skipped.append({"line": None, "id": None, "raw_file": entry["name"], "reason": reason})
        self.log(f"skipped raw file {entry['name']}: {reason}")
        return []

    def _append(self, raw, rows, save):
        """Rows in time order (stable: file name order within a time) as complete lines; recorded first."""
        buf = io.StringIO()
        out = csv.writer(buf, lineterminator="\n")
        size = os.path.getsize(self.measurement_path) if os.path.exists(self.measurement_path) else 0
        if size == 0:
            out.writerow(raw["header"])
        for _, cells in sorted(rows, key=lambda r: r[0]):
            out.writerow([cells.get(c, "") or "" for c in raw["header"]])
        raw["pending"] = {"offset": size, "text": buf.getvalue()}
        save()   # the append is on record before a byte of it is written
        self._finish_append(raw)

    def _finish_append(self, raw):
        """Write the recorded text at its offset (again, if a stop cut it), then forget it."""
        p = raw["pending"]
        data = p["text"].encode("utf-8")
        size = os.path.getsize(self.measurement_path) if os.path.exists(self.measurement_path) else 0
        if size < p["offset"]:
            raise InputError(f"{self.measurement_path}: shorter than the watch wrote it; choose another --out")
        with open(self.measurement_path, "r+b" if size else "wb") as fh:
            fh.seek(p["offset"])
            fh.write(data)
            fh.truncate()
            fh.flush()
            os.fsync(fh.fileno())
        raw["pending"] = None
